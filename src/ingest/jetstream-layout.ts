import { AckPolicy, DeliverPolicy, RetentionPolicy, StorageType, jetstreamManager, type JetStreamManager, type StreamInfo } from '@nats-io/jetstream';
import { Kvm, type KV } from '@nats-io/kv';
import type { NatsConnection } from '@nats-io/transport-node';
import type { ScaleConfig } from '../config/scale-config.js';
import { consumerName, partitionFilter, streamSubjects } from './nats-subjects.js';

/**
 * The server objects a lab of workers stands on, declared when absent and checked when present:
 * - the stream `scale.stream` capturing `<prefix>.*.>` (every partition), limits retention (the
 *   log is kept: a worker that takes a partition over replays it from the stream), file storage,
 *   `scale.replicas` replicas;
 * - one durable pull consumer per partition, `<stream>_p<p>`, filtered to `<prefix>.<p>.>`,
 *   explicit acknowledgements;
 * - the key-value bucket of the leases, whose entries expire after `scale.leaseSeconds`.
 * Each disagreement with an existing object is one line in `problems` (start-up stops on them);
 * `notes` are warnings (a retention limit that takeover replays may run into).
 */
export interface LayoutReport {
  problems: string[];
  notes: string[];
}

/** How long a delivered message waits for its acknowledgement before the server sends it again. */
export const ACK_WAIT_MS = 30_000;
/** Messages delivered and not yet acknowledged, per partition. */
export const MAX_ACK_PENDING = 20_000;

export async function declareLayout(nc: NatsConnection, scale: ScaleConfig): Promise<LayoutReport> {
  const problems: string[] = [];
  const notes: string[] = [];
  let jsm: JetStreamManager;
  try {
    jsm = await jetstreamManager(nc, { timeout: 5000 });
  } catch (error) {
    return { problems: [`JetStream is not available on ${nc.getServer()}: ${(error as Error).message} (start nats-server with -js, or jetstream {} in its config)`], notes };
  }
  const subjects = streamSubjects(scale.subjectPrefix);
  let info: StreamInfo | null = null;
  try {
    info = await patiently(() => jsm.streams.info(scale.stream));
  } catch (error) {
    if (!/not found/i.test((error as Error).message)) return { problems: [`stream ${scale.stream}: ${(error as Error).message}`], notes };
  }
  if (info === null) {
    try {
      info = await patiently(() => jsm.streams.add({ name: scale.stream, subjects, retention: RetentionPolicy.Limits, storage: StorageType.File, num_replicas: scale.replicas }));
    } catch (error) {
      return { problems: [`stream ${scale.stream}: cannot be created with ${scale.replicas} replica(s): ${(error as Error).message}`], notes };
    }
  } else {
    const c = info.config;
    const have = [...(c.subjects ?? [])].sort();
    if (have.join(',') !== subjects.join(',')) problems.push(`stream ${scale.stream} captures ${JSON.stringify(have)}; scale.subjectPrefix ${scale.subjectPrefix} needs exactly ${JSON.stringify(subjects)}`);
    if (c.num_replicas < scale.replicas) problems.push(`stream ${scale.stream} has ${c.num_replicas} replica(s); scale.replicas asks for ${scale.replicas}`);
    if (c.retention !== RetentionPolicy.Limits) problems.push(`stream ${scale.stream} has ${c.retention} retention; takeover replays partitions from the stream, which needs limits retention`);
    const limits: string[] = [];
    if (c.max_age > 0) limits.push(`max_age ${Math.round(c.max_age / 1e9)} s`);
    if (c.max_msgs > 0) limits.push(`max_msgs ${c.max_msgs}`);
    if (c.max_bytes > 0) limits.push(`max_bytes ${c.max_bytes}`);
    // A takeover restores a partition's channels from its latest shared checkpoint and reads the
    // stream after it: up to store.checkpointSamples samples of each channel must still be there.
    if (c.max_msgs > 0 && c.max_msgs < scale.checkpointSamples) {
      notes.push(`stream ${scale.stream} keeps at most ${c.max_msgs} messages, fewer than store.checkpointSamples (${scale.checkpointSamples}): the retention does not cover the checkpoint interval, and a worker that takes over a partition would miss samples between its latest shared checkpoint and the oldest message kept`);
    } else if (limits.length > 0) {
      notes.push(`stream ${scale.stream} keeps messages only within ${limits.join(', ')}: a worker that takes over a partition reads the stream after the partition's latest shared checkpoint, so the stream must keep at least store.checkpointSamples (${scale.checkpointSamples}) samples of every channel of a partition, and a partition with no checkpoint yet from its first message; what the limits removed before that is not in the results`);
    }
    if (info.state.first_seq > 1) notes.push(`stream ${scale.stream} starts at sequence ${info.state.first_seq}: earlier messages are gone and a takeover cannot replay them`);
  }
  for (let p = 0; p < scale.partitions; p++) {
    const name = consumerName(scale.stream, p);
    const filter = partitionFilter(scale.subjectPrefix, p);
    try {
      const ci = await patiently(() => jsm.consumers.info(scale.stream, name));
      const c = ci.config;
      if (c.filter_subject !== filter) problems.push(`consumer ${name} of stream ${scale.stream} filters ${JSON.stringify(c.filter_subject ?? '')}; partition ${p} needs ${JSON.stringify(filter)}`);
      if (c.ack_policy !== AckPolicy.Explicit) problems.push(`consumer ${name} of stream ${scale.stream} acknowledges "${c.ack_policy}"; plateau needs explicit acknowledgements`);
      if (c.deliver_subject) problems.push(`consumer ${name} of stream ${scale.stream} is a push consumer; plateau needs a pull consumer`);
    } catch (error) {
      if (!/not found/i.test((error as Error).message)) {
        problems.push(`consumer ${name} of stream ${scale.stream}: ${(error as Error).message}`);
        continue;
      }
      try {
        await patiently(() => jsm.consumers.add(scale.stream, consumerConfig(scale, p, null)));
      } catch (err) {
        problems.push(`consumer ${name} of stream ${scale.stream}: cannot be created: ${(err as Error).message}`);
      }
    }
  }
  // Consumers of partitions beyond scale.partitions: the count was changed under a running lab.
  try {
    for await (const ci of jsm.consumers.list(scale.stream)) {
      const match = new RegExp(`^${scale.stream}_p(\\d+)$`).exec(ci.name);
      if (match && Number(match[1]) >= scale.partitions) problems.push(`consumer ${ci.name} of stream ${scale.stream} is for partition ${match[1]}, but scale.partitions is ${scale.partitions}: the server's subject mapping and every worker must agree on the count`);
    }
  } catch {
    // Listing is a check only.
  }
  try {
    const kv = await patiently(() => leaseBucket(nc, scale));
    const status = await patiently(() => kv.status());
    if (Math.abs(status.ttl - scale.leaseSeconds * 1000) > 1) problems.push(`key-value bucket ${scale.leaseBucket} expires entries after ${status.ttl / 1000} s; scale.leaseSeconds is ${scale.leaseSeconds}`);
    if (status.replicas < scale.replicas) problems.push(`key-value bucket ${scale.leaseBucket} has ${status.replicas} replica(s); scale.replicas asks for ${scale.replicas}`);
  } catch (error) {
    problems.push(`key-value bucket ${scale.leaseBucket}: ${(error as Error).message}`);
  }
  return { problems, notes };
}

/** Opens (creating when absent) the lease bucket: one revision per key, entries expire after the lease. */
export async function leaseBucket(nc: NatsConnection, scale: ScaleConfig): Promise<KV> {
  return new Kvm(nc).create(scale.leaseBucket, { history: 1, ttl: scale.leaseSeconds * 1000, replicas: scale.replicas });
}

/** The durable consumer of a partition; `startAfter` a stream sequence to start after (null: from the first message). */
export function consumerConfig(scale: Pick<ScaleConfig, 'stream' | 'subjectPrefix'>, partition: number, startAfter: number | null) {
  return {
    durable_name: consumerName(scale.stream, partition),
    filter_subject: partitionFilter(scale.subjectPrefix, partition),
    ack_policy: AckPolicy.Explicit,
    ack_wait: ACK_WAIT_MS * 1_000_000,
    max_ack_pending: MAX_ACK_PENDING,
    max_deliver: -1,
    ...(startAfter !== null && startAfter > 0 ? { deliver_policy: DeliverPolicy.StartSequence, opt_start_seq: startAfter + 1 } : { deliver_policy: DeliverPolicy.All }),
  };
}

/**
 * A request to the server, asked again when it times out or finds no responder (a cluster that has
 * just created a replicated stream, or is electing a leader, answers late for a few seconds): up
 * to `attempts` times. Any other error, or the last timeout, is the caller's.
 */
export async function patiently<T>(request: () => Promise<T>, attempts = 4): Promise<T> {
  for (let attempt = 1; ; attempt++) {
    try {
      return await request();
    } catch (error) {
      if (attempt >= attempts || !/timeout|no responders/i.test((error as Error).message)) throw error;
      await new Promise((resolve) => setTimeout(resolve, 250 * attempt));
    }
  }
}
