import pino, { type Logger } from 'pino';
import type { PlateauConfig, SubscriptionConfig } from '../config/plateau-config.js';
import { channelOptionsFromSettings, settingsFor } from '../config/load-config.js';
import { parseTypeB } from '../config/uncertainty-config.js';
import { DECODER_DEFAULTS } from '../config/decoder-spec.js';
import { ChannelRegistry } from '../engine/channel-registry.js';
import type { ChannelOptions } from '../engine/channel-options.js';
import { TestPoints } from '../engine/test-points.js';
import { REJECT_REASONS } from '../ingest/sample.js';
import { MqttConnection } from '../ingest/mqtt-connection.js';
import { MqttSampleSource } from '../ingest/mqtt-sample-source.js';
import { MqttPublisher } from '../ingest/mqtt-publisher.js';
import { JetStreamWorker } from '../ingest/jetstream-worker.js';
import { SqliteStore } from '../store/sqlite-store.js';
import { SystemClock } from '../clock/system-clock.js';
import { PlateauError } from '../errors/catalogue.js';
import type { Clock } from '../ports/clock.js';
import type { Acknowledgement, ChannelView, DaemonApi, DaemonHealth, DerivedView, TestPointRequest, TestPointView, TestPointWindowView } from '../ports/daemon-api.js';
import type { Publisher, VolatileEvent } from '../ports/publisher.js';
import type { SampleSource, SourceStatus } from '../ports/sample-source.js';
import type { Store, StoredEvent, StoredRecord } from '../ports/store.js';
import { Acknowledgements, ACKNOWLEDGED_KIND, ALERT_KINDS } from './acknowledgements.js';
import { CheckpointSchedule } from './checkpoint-schedule.js';
import { Commands } from './commands.js';
import { CommitCycle } from './commit-cycle.js';
import { DeliveryFence } from './delivery-fence.js';
import { DerivedResults } from './derived-results.js';
import { Ingest, type IngestCounters } from './ingest.js';
import { ListenerPublisher } from './listener-publisher.js';
import type { PendingBatch } from './pending-batch.js';
import { Publishing } from './publishing.js';
import { Queries } from './queries.js';
import { channelTrace } from './channel-trace.js';
import { restoreChannels, restoreTestPoints } from './restore.js';
import { PartitionCheckpoints } from './partition-checkpoints.js';
import type { SharedCheckpoints } from '../ingest/shared-checkpoints.js';
import { TestPointControl } from './test-point-control.js';

/**
 * The daemon's composition root: it builds the adapters (the store, the sample source and the
 * publishers, the clock) unless given them, wires the concerns together, and answers the API of
 * src/ports/daemon-api.ts by delegation. The concerns live in their own modules:
 *   ingest.ts             source batches -> decode -> the channels' accept path -> the pending batch
 *   commit-cycle.ts       batch -> one store transaction -> acknowledge only what committed; retries
 *   restore.ts            channels from their checkpoints and stored samples, test points
 *   test-point-control.ts test points: window restarts and their marks, readiness, records
 *   commands.ts           the MQTT command topic
 *   publishing.ts         committed events and retained status out; the daemon's health
 *   acknowledgements.ts   alert acknowledgements; queries.ts the read side of the API
 * Nothing is acknowledged before it is durable, and nothing is published that a restart could take
 * back (except the `store-failing` alert, which says that nothing can be stored).
 */
export interface DaemonOptions {
  logger?: Logger;
  /** Write the structured log to this file instead of standard output (the demo keeps its banner clean). */
  logFile?: string;
  /** Broker URL to use when the config says "embedded" (the demo starts the broker itself). */
  brokerUrl?: string;
  clock?: Clock;
  /** Ingest lag that raises the `ingest-lag` warning event (default 5000 ms). */
  lagWarningMs?: number;
  /** The store (default: SqliteStore on config.store.path, opened by start()). */
  store?: Store;
  /** The sample source (default: MQTT on the configured broker). */
  source?: SampleSource;
  /** An extra publisher (with `source` given, the only one besides the in-process listeners). */
  publisher?: Publisher;
  /** Backoff of the commit retries after a failed commit (ms). */
  commitRetry?: { initialMs?: number; maxMs?: number };
}

export type { DaemonHealth } from '../ports/daemon-api.js';

/** An event as committed to the store and then handed to the publishers. */
export type PublishedEvent = StoredEvent;

/** Ingest lag that raises a warning event, unless the options say otherwise. */
const LAG_WARNING_MS = 5_000;

export class Daemon implements DaemonApi {
  readonly config: PlateauConfig;
  readonly log: Logger;
  readonly registry: ChannelRegistry;
  readonly testPoints: TestPoints;
  readonly derived: DerivedResults;
  readonly commits: CommitCycle;
  private readonly options: DaemonOptions;
  private readonly clock: Clock;
  private readonly brokerUrl: string;
  private readonly ingestion: Ingest;
  private readonly control: TestPointControl;
  private readonly commands: Commands;
  private readonly acknowledgements: Acknowledgements;
  private readonly queries: Queries;
  private readonly publishing: Publishing;
  private readonly checkpoints: CheckpointSchedule;
  private readonly listeners: ListenerPublisher;
  private readonly publishers: Publisher[] = [];
  private storeAdapter: Store | null = null;
  private source: SampleSource | null = null;
  /** The MQTT connection the daemon built (null when it was given a source): decoders publish on it (Sparkplug B rebirth requests). */
  private connection: MqttConnection | null = null;
  /** With `broker.url: nats://...`: this worker's partitions, leases and JetStream source. */
  private worker: JetStreamWorker | null = null;
  private fence: DeliveryFence | null = null;
  /** With JetStream ingest: the partitions' checkpoints in the shared bucket (takeover restores from them). */
  private shared: PartitionCheckpoints | null = null;
  private timers: NodeJS.Timeout[] = [];
  private restored = { samples: 0, ms: 0 };
  private stopped = false;

  constructor(config: PlateauConfig, options: DaemonOptions = {}) {
    this.config = config;
    this.options = options;
    this.log =
      options.logger ??
      (options.logFile !== undefined
        ? pino({ level: config.log.level, base: { service: 'plateau' } }, pino.destination({ dest: options.logFile, sync: true, mkdir: true }))
        : pino({ level: config.log.level, base: { service: 'plateau' } }));
    this.clock = options.clock ?? new SystemClock();
    this.brokerUrl = config.broker.url === 'embedded' ? options.brokerUrl ?? 'mqtt://127.0.0.1:1883' : config.broker.url;
    this.registry = new ChannelRegistry((name) => this.channelOptions(name));
    this.testPoints = new TestPoints(this.registry);
    this.derived = new DerivedResults(config, this.registry);
    this.testPoints.useDerived(this.derived);
    this.testPoints.useRig(config.rig ?? { id: null, name: null });
    this.listeners = new ListenerPublisher((err) => this.log.warn({ err }, 'event listener failed'));
    this.checkpoints = new CheckpointSchedule(config.store.checkpointSamples);
    this.commits = new CommitCycle({
      store: { commit: (batch, nowMs) => this.store.commit(batch, nowMs) },
      clock: this.clock,
      log: this.log,
      flushIntervalMs: config.store.flushIntervalMs,
      ...(options.commitRetry?.initialMs !== undefined ? { retryInitialMs: options.commitRetry.initialMs } : {}),
      ...(options.commitRetry?.maxMs !== undefined ? { retryMaxMs: options.commitRetry.maxMs } : {}),
      acknowledge: (tokens) => this.source?.acknowledge(tokens) ?? 0,
      prepare: (batch, final) => this.prepareCommit(batch, final),
      committed: (events) => {
        for (const event of events) this.acknowledgements.note(event);
        this.publishing.committed(events);
      },
      healthChanged: () => this.publishing.healthChanged(this.health()),
      afterCommit: () => this.shared?.afterCommit(),
    });
    const raise = (source: string, kind: string, at: number | null, body: Record<string, unknown>) => this.queueEvent(source, kind, at, body);
    this.ingestion = new Ingest({
      registry: this.registry,
      batch: this.commits.batch,
      clock: this.clock,
      log: this.log,
      commandTopic: config.topics.command,
      lagWarningMs: options.lagWarningMs ?? LAG_WARNING_MS,
      configuredUnit: (name) => this.configuredUnit(name),
      command: (action, payload) => this.commands.handle(action, payload),
      raise,
      isDerivedInput: (channel) => this.derived.usesChannel(channel),
      sampled: (channel) => this.derived.onSample(channel),
      requestCommit: () => this.commits.request(),
      expectedIntervalMs: (name) => {
        const rate = settingsFor(this.config, name).rate;
        return rate !== null && rate > 0 ? 1000 / rate : null;
      },
      publish: (topic, payload) => {
        if (this.connection === null) return false;
        this.connection.publish(topic, Buffer.from(payload.buffer, payload.byteOffset, payload.byteLength), { qos: 0, retain: false });
        return true;
      },
    });
    this.control = new TestPointControl({
      testPoints: this.testPoints,
      registry: this.registry,
      derived: this.derived,
      ingest: this.ingestion,
      batch: this.commits.batch,
      clock: this.clock,
      requireStore: () => this.requireStore(),
      commit: () => this.commits.commit(false),
      raise,
      configuredUnit: (name) => this.configuredUnit(name),
      trace: (name, pipeline, count) => {
        const channel = this.registry.get(name);
        return channel === undefined ? null : channelTrace(this.storeAdapter, channel, count, pipeline, this.commits.batch.pendingSamples(name));
      },
    });
    this.commands = new Commands({ testPoints: this.control, log: this.log, rejected: (reason, detail) => this.ingestion.rejected(reason, detail), raise });
    this.publishing = new Publishing({ publishers: () => this.publishers, registry: this.registry, testPoints: this.testPoints, clock: this.clock });
    this.acknowledgements = new Acknowledgements({
      store: () => this.store,
      record: (source, body) => {
        this.requireStore();
        this.queueEvent(source, ACKNOWLEDGED_KIND, null, body);
        if (!this.commits.commit(false)) this.requireStore();
        return true;
      },
    });
    this.queries = new Queries({ registry: this.registry, derived: this.derived, testPoints: this.control, store: () => this.storeAdapter, lastEventId: () => this.publishing.lastEventId, gaps: (channel, fromMs, toMs) => this.ingestion.gapTrace(channel, fromMs, toMs), intake: (channel) => this.ingestion.intake(channel), intakeBrief: (channel) => this.ingestion.intakeBrief(channel) });
  }

  /** The store (opened by start()). */
  get store(): Store {
    if (this.storeAdapter === null) throw new Error('the daemon has not been started: no store yet');
    return this.storeAdapter;
  }

  /** The sample source's state: connected, reconnects, batches not yet acknowledged (null before start). */
  get ingest(): SourceStatus | null {
    return this.source?.status() ?? null;
  }

  /** Samples and messages taken and refused, ingest lag, commands, the last restore. */
  get counters(): IngestCounters & { commands: number; restoredSamples: number; restoreMs: number } {
    return { ...this.ingestion.counters, commands: this.commands.count, restoredSamples: this.restored.samples, restoreMs: this.restored.ms };
  }

  channelOptions(name: string): ChannelOptions {
    return channelOptionsFromSettings(settingsFor(this.config, name));
  }

  /** The unit the configuration gives a channel (looked up once per channel). */
  private configuredUnit(name: string): string | null {
    return settingsFor(this.config, name).unit;
  }

  // ---- lifecycle ----------------------------------------------------------------------------

  /** Opens the store, rebuilds every channel's state, connects the sample source. */
  async start(): Promise<void> {
    const store = this.options.store ?? new SqliteStore(this.config.store.path);
    this.storeAdapter = store;
    const summary = restoreChannels(store, this.registry, this.ingestion, this.log);
    for (const [channel, seq] of summary.checkpointAt) this.checkpoints.stored(channel, seq);
    restoreTestPoints(store, this.testPoints, this.registry);
    this.derived.restored();
    this.publishing.lastEventId = store.lastEventId();
    const counters = store.counters();
    const ingest = this.ingestion.counters;
    ingest.accepted = counters.accepted ?? 0;
    ingest.messages = counters.messages ?? 0;
    ingest.late = counters.late ?? 0;
    this.commands.count = counters.commands ?? 0;
    for (const reason of REJECT_REASONS) ingest.rejected[reason] = counters[`rejected.${reason}`] ?? 0;
    ingest.gaps = counters.gaps ?? 0;
    ingest.missingSamples = counters.missingSamples ?? 0;
    const ingestState = this.ingestion.restoreState((prefix) => store.stateEntries(prefix));
    this.restored = { samples: summary.replayed, ms: summary.ms };
    this.log.info({ channels: summary.channels, checkpoints: summary.outcomes, replayedSamples: summary.replayed, gapDetectors: ingestState.gapDetectors, sparkplugNodes: ingestState.edgeNodes, ms: Math.round(summary.ms) }, 'state rebuilt from the store');

    this.fence = new DeliveryFence((source) => store.position(source)?.sequence ?? 0);
    if (this.options.source) {
      this.source = this.options.source;
      if (this.options.publisher) this.publishers.push(this.options.publisher);
    } else if (this.config.scale) {
      const fence = this.fence;
      this.worker = new JetStreamWorker({
        scale: this.config.scale,
        broker: this.config.broker,
        subscriptions: daemonSubscriptions(this.config),
        log: this.log,
        startAfter: (source) => fence.covered(source),
        restore: (partition, source) => this.shared?.restore(partition, source) ?? Promise.resolve(null),
      });
      await this.worker.open();
      this.shared = new PartitionCheckpoints({
        bucket: this.worker.checkpoints as SharedCheckpoints,
        worker: this.config.scale.worker,
        checkpointSamples: this.config.scale.checkpointSamples,
        registry: this.registry,
        ingest: this.ingestion,
        fence,
        batch: this.commits.batch,
        held: () => (this.worker as JetStreamWorker).owned(),
        partitionSource: (p) => (this.worker as JetStreamWorker).source.partitionName(p),
        commit: () => this.commits.commit(false),
        log: this.log,
      });
      this.source = this.worker.source;
      if (this.options.publisher) this.publishers.push(this.options.publisher);
    } else {
      const subscriptions = daemonSubscriptions(this.config);
      const connection = new MqttConnection(this.config.broker, this.brokerUrl, subscriptions.map((s) => s.topic));
      this.connection = connection;
      this.source = new MqttSampleSource(connection, subscriptions);
      this.publishers.push(this.options.publisher ?? new MqttPublisher(connection, this.config.topics));
    }
    this.publishers.push(this.listeners);
    // The broker should hold this client's session when the daemon has been connected before (in
    // this process, or in an earlier one that committed a position): a new session then means
    // messages published meanwhile may never come, and that is a warning, not an information line.
    const position = store.position(this.source.name);
    let expectSession = position !== null;
    await this.source.start(
      {
        batch: (batch) => this.ingestion.batch((this.fence as DeliveryFence).filter(batch)),
        connection: (connected, detail) => {
          const sessionLost = connected && expectSession && /new session/.test(detail);
          if (connected) expectSession = true;
          if (sessionLost) {
            const warning = `the broker did not keep this client's session (clientId ${this.config.broker.clientId}): messages published while the daemon was away may not come; the broker must persist sessions and stop cleanly, and broker.clientId must stay the same`;
            this.log.warn({ broker: this.brokerUrl }, warning);
            this.queueEvent('daemon', 'broker-session-lost', null, { broker: this.brokerUrl, detail: warning });
          } else this.log.info({ broker: this.brokerUrl, connected }, `broker ${detail}`);
          this.queueEvent('daemon', connected ? 'broker-connected' : 'broker-disconnected', null, { broker: this.brokerUrl, detail });
          // Not while stopping: a publish on a connection that is closing only holds up its end.
          if (!this.stopped) this.publishing.healthChanged(this.health());
        },
        error: (err) => this.log.warn({ err }, 'sample source'),
      },
      store.position(this.source.name),
    );
    if (this.worker) await this.worker.startLeases();
    this.timers.push(setInterval(() => this.ingestion.checkStale(), 1000));
    this.timers.push(setInterval(() => this.prune(), 3_600_000));
    for (const timer of this.timers) timer.unref();
  }

  /** Stops taking messages, commits what is pending with a checkpoint of every channel, closes. */
  async stop(): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    for (const timer of this.timers) clearInterval(timer);
    // Commit what is pending with a checkpoint of every channel, acknowledge it, then disconnect.
    this.commits.stop();
    if (this.worker) await this.worker.stop();
    else await this.source?.stop();
    this.storeAdapter?.close();
  }

  /** Commits what is pending now (tests, and commands that must be durable before they answer). */
  commitNow(): boolean {
    return this.commits.commit(false);
  }

  /** An event of the daemon's own: it joins the pending batch and is published once committed. */
  queueEvent(source: string, kind: string, at: number | null, body: Record<string, unknown>): void {
    this.commits.batch.addEvent({ timeMs: this.clock.now(), source, kind, at, body });
    this.commits.request();
  }

  /** Before each commit attempt: test-point verdicts, derived events, checkpoints due; returns the counters to store. */
  private prepareCommit(batch: PendingBatch, final: boolean): Record<string, number> {
    const now = this.clock.now();
    this.control.evaluate(now);
    for (const event of this.derived.drainEvents()) batch.addEvent({ timeMs: now, source: event.source, kind: event.kind, at: event.at, body: event.body });
    this.ingestion.saveState();
    const active = this.ingestion.takeActive();
    this.checkpoints.addDue(final ? this.registry.all() : active, batch, final);
    const c = this.ingestion.counters;
    // Every counter of the API that counts since the store began is stored with each commit (and so
    // carries on after a restart): accepted, messages, late, commands, refusals by reason.
    const out: Record<string, number> = { accepted: c.accepted, messages: c.messages, late: c.late, commands: this.commands.count };
    for (const reason of REJECT_REASONS) out[`rejected.${reason}`] = c.rejected[reason];
    out.gaps = c.gaps;
    out.missingSamples = c.missingSamples;
    return out;
  }

  private prune(): void {
    const before = this.clock.now() - this.config.store.retentionSeconds * 1000;
    try {
      const removed = this.store.prune(before);
      if (removed.chunks + removed.events > 0) this.log.info(removed, 'retention: old samples and events deleted');
    } catch (err) {
      this.log.error({ err }, 'retention failed; it runs again within the hour');
    }
  }

  /** Commands change durable state: refused while commits fail (nothing would be stored). */
  private requireStore(): void {
    const health = this.commits.health();
    if (health.failing) throw new PlateauError('ERR_STORE_UNAVAILABLE', { since: new Date(health.since as number).toISOString(), detail: health.lastError?.message ?? 'unknown error' });
  }

  // ---- the API (src/ports/daemon-api.ts) ----------------------------------------------------

  health(): DaemonHealth {
    const store = this.commits.health();
    const connected = this.source?.status().connected ?? false;
    return { status: store.failing ? 'failing' : connected ? 'ok' : 'degraded', broker: connected ? 'connected' : 'disconnected', store };
  }

  /** Counters for the API: samples accepted and rejected by reason, broker, lag, commits, database. */
  counterReport(): Record<string, unknown> {
    const health = this.commits.health();
    const c = this.ingestion.counters;
    const source = this.ingest;
    return {
      samples: { accepted: c.accepted, late: c.late, rejected: { ...c.rejected } },
      gaps: { count: c.gaps, missingSamples: c.missingSamples, channels: this.ingestion.gapReport() },
      sparkplug: { ...this.ingestion.decoders.sparkplug.counters, nodesNeedingRebirth: this.ingestion.decoders.sparkplug.nodesNeedingRebirth() },
      messages: c.messages,
      commands: this.commands.count,
      broker: { url: this.brokerUrl, connected: source?.connected ?? false, reconnects: source?.reconnects ?? 0, heldAcknowledgements: source?.unacknowledged ?? 0 },
      ingestLagMs: c.ingestLagMs,
      laggingSource: c.laggingSource,
      flush: { count: health.commits, lastMs: health.lastCommitMs, maxMs: health.maxCommitMs, acknowledged: this.commits.acknowledgedCount, failing: health.failing, failedAttempts: health.attempts, pendingSamples: health.pendingSamples, error: health.lastError },
      database: { path: this.storeAdapter?.location ?? this.config.store.path, bytes: this.storeAdapter?.sizeBytes() ?? 0 },
      channels: this.registry.size,
      restore: { samples: this.restored.samples, ms: this.restored.ms },
      redeliveriesSkipped: this.fence?.skipped ?? 0,
      ...(this.worker ? { scale: { ...this.scaleStatus(), lostDeliveries: this.worker.source.gaps, sharedCheckpoints: this.shared?.figures ?? null } } : {}),
      memory: process.memoryUsage(),
    };
  }

  channels(): ChannelView[] {
    return this.queries.channels();
  }

  /**
   * With JetStream ingest: this worker's name, the partitions it holds, the live workers, and per
   * channel the partition its latest sample came from (null: not since this process started) and
   * whether this worker holds it now (a channel of a partition that moved away is stale here: its
   * owner has the current state).
   */
  scaleStatus(): { worker: string; partitions: number[]; workers: string[]; channels: { name: string; partition: number | null; held: boolean }[] } | null {
    if (this.worker === null || !this.config.scale) return null;
    const partitions = this.worker.owned();
    const prefix = `${this.worker.source.name}/p`;
    const channels = this.registry.all().map((channel) => {
      const log = this.ingestion.logOf(channel.name);
      const partition = log !== null && log.startsWith(prefix) ? Number(log.slice(prefix.length)) : null;
      return { name: channel.name, partition, held: partition !== null && partitions.includes(partition) };
    });
    return { worker: this.config.scale.worker, partitions, workers: this.worker.workers(), channels };
  }

  channel(name: string): ChannelView | null {
    return this.queries.channel(name);
  }

  derivedNames(): string[] {
    return this.queries.derivedNames();
  }

  derivedResults(): DerivedView[] {
    return this.queries.derivedResults();
  }

  derivedResult(name: string): DerivedView | null {
    return this.queries.derivedResult(name);
  }

  events(after: number, limit: number): StoredEvent[] {
    return this.queries.events(after, limit);
  }

  latestEvents(limit: number): StoredEvent[] {
    return this.queries.latestEvents(limit);
  }

  event(id: number): StoredEvent | null {
    return this.queries.event(id);
  }

  eventsFor(source: string, limit: number): StoredEvent[] {
    return this.queries.eventsFor(source, limit);
  }

  /** The id of the newest event, stored at the restore or published since (0 when there is none). */
  get lastEventId(): number {
    return this.publishing.lastEventId;
  }

  alertKinds(): readonly string[] {
    return ALERT_KINDS;
  }

  acknowledgementsAfter(eventId: number): Acknowledgement[] {
    return this.acknowledgements.after(eventId);
  }

  acknowledgement(eventId: number): Acknowledgement | null {
    return this.acknowledgements.get(eventId);
  }

  testPointViews(): TestPointView[] {
    return this.queries.testPoints();
  }

  testPoint(id: string): TestPointView | null {
    return this.queries.testPoint(id);
  }

  records(testPointId: string): StoredRecord[] {
    return this.queries.records(testPointId);
  }

  testPointWindows(id: string, count: number): TestPointWindowView[] {
    return this.queries.testPointWindows(id, count);
  }

  startTestPoint(request: TestPointRequest): TestPointView {
    return this.control.start(request);
  }

  stopTestPoint(id: string): TestPointView {
    return this.control.stop(id);
  }

  annotateTestPoint(id: string, text: string): TestPointView {
    return this.control.annotate(id, text);
  }

  setChannelTypeB(name: string, typeB: unknown): { channel: string; typeB: unknown[] } {
    const channel = this.registry.get(name);
    if (channel === undefined) throw new PlateauError('ERR_CHANNEL_UNKNOWN', { name: name.slice(0, 80) });
    const parsed = parseTypeB(typeB, 'typeB');
    if (parsed.problems.length > 0) throw new PlateauError('ERR_TYPE_B_INVALID', { detail: parsed.problems.join('\n') });
    this.requireStore();
    const mark = channel.setTypeB(parsed.typeB);
    this.commits.batch.addMark({ channel: channel.name, seq: mark.seq, kind: mark.kind });
    this.queueEvent(channel.name, 'type-b-changed', null, { typeB: parsed.typeB });
    if (!this.commits.commit(false)) this.requireStore();
    return { channel: channel.name, typeB: [...channel.typeB] };
  }

  channelTypeB(name: string): { channel: string; typeB: unknown[] } | null {
    const channel = this.registry.get(name);
    return channel === undefined ? null : { channel: channel.name, typeB: [...channel.typeB] };
  }

  acknowledgeEvent(id: number, note: string | null): { acknowledgement: Acknowledgement; already: boolean } {
    const event = this.queries.event(id);
    if (event === null) throw new PlateauError('ERR_EVENT_UNKNOWN', { id });
    return this.acknowledgements.acknowledge(event, note);
  }

  onEvent(listener: (event: StoredEvent) => void): () => void {
    return this.listeners.onEvent(listener);
  }

  /** Volatile events (the store-failing alert), as they are raised. */
  onVolatileEvent(listener: (event: VolatileEvent) => void): () => void {
    return this.listeners.onVolatileEvent(listener);
  }

  onHealth(listener: (health: DaemonHealth) => void): () => void {
    return this.listeners.onStatus((subject) => {
      if (subject === 'daemon') listener(this.health());
    });
  }
}

/** What a daemon's sample source subscribes to: the configured subscriptions and the command topic. */
export function daemonSubscriptions(config: PlateauConfig): SubscriptionConfig[] {
  return [...config.subscriptions, { ...COMMAND_SUBSCRIPTION, topic: `${config.topics.command}/#` }];
}

/** The command topic's subscription (its payloads are read by the commands handler, not by the decoder). */
const COMMAND_SUBSCRIPTION: SubscriptionConfig = { ...DECODER_DEFAULTS, topic: 'plateau/command/#', format: 'json', channel: '{topic}', maxBytes: 65_536, maxDepth: 4, maxSamples: 1 };
