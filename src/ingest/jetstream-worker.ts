import { jetstreamManager } from '@nats-io/jetstream';
import type { BrokerConfig, SubscriptionConfig } from '../config/plateau-config.js';
import type { ScaleConfig } from '../config/scale-config.js';
import { PlateauError } from '../errors/catalogue.js';
import { declareLayout, leaseBucket, patiently } from './jetstream-layout.js';
import { JetStreamSampleSource } from './jetstream-sample-source.js';
import { NatsLink } from './nats-link.js';
import { PartitionLeases } from './partition-leases.js';
import { SharedCheckpoints } from './shared-checkpoints.js';

/**
 * One worker of a lab on NATS JetStream: its connection, the server objects (declared or checked),
 * its sample source and its partition leases, wired together. The daemon builds one when
 * `broker.url` is nats:// and gives it `startAfter`: the stream sequence its own state covers for a
 * partition (what it committed, or took since), where a partition it acquires resumes.
 */
export interface WorkerLog {
  info(object: Record<string, unknown>, message: string): void;
  warn(object: Record<string, unknown>, message: string): void;
}

export interface JetStreamWorkerOptions {
  scale: ScaleConfig;
  broker: Pick<BrokerConfig, 'username' | 'password'> & { tls?: BrokerConfig['tls'] };
  subscriptions: SubscriptionConfig[];
  log: WorkerLog;
  /** The stream sequence this worker's state covers for a partition's log (0: nothing). */
  startAfter(partitionSource: string): number;
  /**
   * Before a partition acquired is read: restore its channels from the partition's shared
   * checkpoint when it is ahead of this worker's own state; returns the stream sequence the state
   * now covers (null: nothing restored, read after `startAfter`).
   */
  restore?(partition: number, partitionSource: string): Promise<number | null>;
  /** Partitions held changed (for the API and the log). */
  changed?(owned: number[]): void;
}

export class JetStreamWorker {
  readonly link: NatsLink;
  readonly source: JetStreamSampleSource;
  private leases: PartitionLeases | null = null;
  private readonly options: JetStreamWorkerOptions;
  /** Monotonic time of each acquisition (for the takeover figures). */
  readonly acquisitions: { partition: number; at: number; startAfter: number }[] = [];
  /** The partitions' shared checkpoints (opened by open()). */
  checkpoints: SharedCheckpoints | null = null;

  constructor(options: JetStreamWorkerOptions) {
    this.options = options;
    const { scale } = options;
    this.link = new NatsLink({ servers: scale.servers, name: `plateau ${scale.worker}`, username: options.broker.username, password: options.broker.password, tls: options.broker.tls ?? null });
    this.source = new JetStreamSampleSource({ link: this.link, stream: scale.stream, subjectPrefix: scale.subjectPrefix, subscriptions: options.subscriptions, fetchBatch: scale.fetchBatch, ownsLink: false });
  }

  /** Connects and declares or checks the server objects: one clear error when the server is not there, one line per disagreement. */
  async open(): Promise<void> {
    const { scale, log } = this.options;
    let nc;
    try {
      nc = await this.link.open();
    } catch (error) {
      throw new PlateauError('ERR_SCALE_UNREACHABLE', { servers: scale.servers.join(', '), detail: (error as Error).message });
    }
    const report = await declareLayout(nc, scale);
    if (report.problems.length === 0) {
      try {
        this.checkpoints = await patiently(() => SharedCheckpoints.open(nc, scale.checkpointBucket, scale.replicas));
      } catch (error) {
        report.problems.push(`key-value bucket ${scale.checkpointBucket}: ${(error as Error).message}`);
      }
    }
    for (const note of report.notes) log.warn({ stream: scale.stream }, note);
    if (report.problems.length > 0) {
      await this.link.close();
      throw new PlateauError('ERR_SCALE_LAYOUT', { detail: report.problems.join('\n') });
    }
  }

  /** The partitions held now. */
  owned(): number[] {
    return this.leases?.owned() ?? [];
  }

  /** Live workers seen at the last heartbeat. */
  workers(): string[] {
    return this.leases?.workers ?? [];
  }

  /** Starts the leases (after the source has started): partitions are read as they are acquired. */
  async startLeases(): Promise<void> {
    const { scale, log } = this.options;
    const kv = await patiently(() => leaseBucket(this.link.nc, scale));
    const source = this.source;
    // The live workers in one request: the subjects of the bucket's stream under `w.` (an expired
    // presence is removed by the bucket's age limit; a clean stop purges its own).
    const jsm = await jetstreamManager(this.link.nc, { timeout: Math.max(100, (scale.leaseSeconds * 1000) / 3) });
    const stream = `KV_${scale.leaseBucket}`;
    const prefix = `$KV.${scale.leaseBucket}.w.`;
    this.leases = new PartitionLeases({
      kv,
      worker: scale.worker,
      partitions: scale.partitions,
      leaseSeconds: scale.leaseSeconds,
      liveWorkers: async () => Object.keys((await jsm.streams.info(stream, { subjects_filter: `${prefix}>` })).state.subjects ?? {}).map((subject) => subject.slice(prefix.length)),
      removePresence: async () => {
        await jsm.streams.purge(stream, { filter: `${prefix}${scale.worker}` });
      },
      handlers: {
        acquired: async (p, deadline) => {
          const at = performance.now();
          const restored = (await this.options.restore?.(p, source.partitionName(p))) ?? null;
          const startAfter = restored ?? this.options.startAfter(source.partitionName(p));
          this.acquisitions.push({ partition: p, at, startAfter });
          await source.assign(p, startAfter, deadline);
          log.info({ partition: p, startAfter, worker: scale.worker }, `partition ${p} acquired: reading from stream sequence ${startAfter + 1}`);
          this.options.changed?.(this.owned());
        },
        renewed: (p, deadline) => source.setDeadline(p, deadline),
        lost: (p, reason) => {
          source.setDeadline(p, 0);
          void source.release(p);
          log.warn({ partition: p, worker: scale.worker }, `partition ${p} lost: ${reason}; it is no longer read or acknowledged here`);
          this.options.changed?.(this.owned());
        },
        release: async (p) => {
          await source.release(p);
          log.info({ partition: p, worker: scale.worker }, `partition ${p} released`);
          this.options.changed?.(this.owned().filter((q) => q !== p));
        },
        error: (error) => log.warn({ err: error }, 'partition leases'),
      },
    });
    await this.leases.start();
  }

  /** Releases every lease (the partitions move to the other workers at once) and closes the connection. */
  async stop(): Promise<void> {
    await this.source.stop();
    await this.leases?.stop();
    await this.link.close();
  }
}
