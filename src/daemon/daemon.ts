import pino, { type Logger } from 'pino';
import type { PlateauConfig, SubscriptionConfig } from '../config/plateau-config.js';
import { settingsFor } from '../config/load-config.js';
import { ChannelRegistry } from '../engine/channel-registry.js';
import type { Channel } from '../engine/channel.js';
import type { ChannelOptions } from '../engine/channel-options.js';
import type { ChannelEvent } from '../engine/channel-events.js';
import { TestPoints, type TestPoint, type TestPointChange } from '../engine/test-points.js';
import { decodePayload, DECODER_DEFAULTS } from '../ingest/payload-decoder.js';
import { REJECT_REASONS, type RejectReason } from '../ingest/sample.js';
import { MqttConnection } from '../ingest/mqtt-connection.js';
import { MqttSampleSource } from '../ingest/mqtt-sample-source.js';
import { MqttPublisher } from '../ingest/mqtt-publisher.js';
import { SqliteStore } from '../store/sqlite-store.js';
import { SystemClock } from '../clock/system-clock.js';
import type { Clock } from '../ports/clock.js';
import type { Publisher, VolatileEvent } from '../ports/publisher.js';
import type { SampleSource, SourceBatch, SourceStatus } from '../ports/sample-source.js';
import type { Store, StoredEvent } from '../ports/store.js';
import { DerivedResults } from './derived-results.js';
import { CommitCycle, type CommitHealth } from './commit-cycle.js';
import { ListenerPublisher } from './listener-publisher.js';
import { PlateauError } from '../errors/catalogue.js';
import type { PendingBatch } from './pending-batch.js';

/**
 * The daemon: MQTT streams in, the engine, SQLite state, test points, alerts out. This is the
 * composition root: it owns the adapters and passes plain values between them.
 *
 * Flow of one message: decode (the only place bad input stops) -> the channel registry applies the
 * time policy and feeds the pipeline -> the samples and the events they raise wait in the pending
 * batch -> as soon as the burst of messages in hand is handled, one SQLite transaction commits the
 * batch (samples, events, checkpoints due, test-point changes) -> then the held MQTT
 * acknowledgements go out -> then the events are published (WebSocket, MQTT event topic, retained
 * status). Nothing is acknowledged before it is durable, and nothing is published that a restart
 * could take back.
 */
export interface DaemonOptions {
  logger?: Logger;
  /** Broker URL to use when the config says "embedded" (the demo starts the broker itself). */
  brokerUrl?: string;
  clock?: Clock;
  /** Ingest lag that raises the `ingest-lag` warning event (default 5000 ms). */
  lagWarningMs?: number;
  /** The store (default: SqliteStore on config.store.path, opened by start()). */
  store?: Store;
  /** The sample source (default: MQTT on the configured broker); with it, `publisher` replaces the MQTT publisher. */
  source?: SampleSource;
  publisher?: Publisher;
  /** Backoff of the commit retries after a failed commit (ms). */
  commitRetry?: { initialMs?: number; maxMs?: number };
}

/** The daemon's health: the store's commits and the broker connection. */
export interface DaemonHealth {
  /** ok; degraded: the broker is not connected; failing: commits fail (nothing is acknowledged). */
  status: 'ok' | 'degraded' | 'failing';
  broker: 'connected' | 'disconnected';
  store: CommitHealth;
}

/** An event as committed to the store and then handed to the listeners and the MQTT event topic. */
export type PublishedEvent = StoredEvent;

export type DaemonListener = (event: PublishedEvent) => void;

/** Log one line per reason at most this often. */
const REJECT_LOG_INTERVAL_MS = 10_000;
/** Ingest lag that raises a warning event, unless the options say otherwise. */
const LAG_WARNING_MS = 5_000;
/** Seconds over which the usual difference between arrival and time stamp is taken. */
const LAG_BASELINE_SECONDS = 60;

export class Daemon {
  readonly config: PlateauConfig;
  readonly log: Logger;
  readonly registry: ChannelRegistry;
  readonly testPoints: TestPoints;
  readonly derived: DerivedResults;
  store!: Store;
  private source: SampleSource | null = null;
  private readonly publishers: Publisher[] = [];
  private readonly listeners: ListenerPublisher;
  private readonly options: DaemonOptions;
  private readonly clock: Clock;
  private readonly brokerUrl: string;
  private readonly lagWarningMs: number;
  readonly commits: CommitCycle;
  private timers: NodeJS.Timeout[] = [];
  private lastCheckpoint = new Map<string, number>();
  /** Channels the store has, or the pending batch introduces. */
  private readonly introduced = new Set<string>();
  /** Channels that took samples since the last commit (the only ones a checkpoint can fall due for). */
  private readonly active = new Set<Channel>();
  /** Wall-clock ms of each channel's last sample (staleness). */
  private readonly lastArrival = new Map<string, number>();
  private publishedId = 0;
  private lastRejectLog = new Map<string, number>();
  private lagWarned = false;
  private stopped = false;
  readonly counters = {
    messages: 0,
    accepted: 0,
    rejected: Object.fromEntries(REJECT_REASONS.map((r) => [r, 0])) as Record<RejectReason, number>,
    ingestLagMs: 0,
    commands: 0,
    restoredSamples: 0,
    late: 0,
    restoreMs: 0,
  };

  constructor(config: PlateauConfig, options: DaemonOptions = {}) {
    this.config = config;
    this.options = options;
    this.log = options.logger ?? pino({ level: config.log.level, base: { service: 'plateau' } });
    this.clock = options.clock ?? new SystemClock();
    this.lagWarningMs = options.lagWarningMs ?? LAG_WARNING_MS;
    this.brokerUrl = config.broker.url === 'embedded' ? options.brokerUrl ?? 'mqtt://127.0.0.1:1883' : config.broker.url;
    this.registry = new ChannelRegistry((name) => this.channelOptions(name));
    this.testPoints = new TestPoints(this.registry);
    this.derived = new DerivedResults(config, this.registry);
    this.testPoints.useDerived(this.derived);
    this.listeners = new ListenerPublisher((err) => this.log.warn({ err }, 'event listener failed'));
    this.commits = new CommitCycle({
      store: { commit: (batch, nowMs) => this.store.commit(batch, nowMs) },
      clock: this.clock,
      log: this.log,
      flushIntervalMs: config.store.flushIntervalMs,
      ...(options.commitRetry?.initialMs !== undefined ? { retryInitialMs: options.commitRetry.initialMs } : {}),
      ...(options.commitRetry?.maxMs !== undefined ? { retryMaxMs: options.commitRetry.maxMs } : {}),
      acknowledge: (tokens) => this.source?.acknowledge(tokens) ?? 0,
      prepare: (batch, final) => this.prepareCommit(batch, final),
      committed: (events) => this.publish(events),
      healthChanged: (health) => this.storeHealthChanged(health),
    });
  }

  private now(): number {
    return this.clock.now();
  }

  /** The sample source's state: connected, reconnects, batches not yet acknowledged (null before start). */
  get ingest(): SourceStatus | null {
    return this.source?.status() ?? null;
  }

  health(): DaemonHealth {
    const store = this.commits.health();
    const connected = this.source?.status().connected ?? false;
    return { status: store.failing ? 'failing' : connected ? 'ok' : 'degraded', broker: connected ? 'connected' : 'disconnected', store };
  }

  /** The unit the configuration gives a channel (looked up once per channel). */
  private configuredUnit(name: string): string | null {
    const known = this.registry.get(name);
    if (known) return known.unit;
    return settingsFor(this.config, name).unit;
  }

  channelOptions(name: string): ChannelOptions {
    const s = settingsFor(this.config, name);
    return { window: s.window, maxLag: s.maxLag, estimator: s.estimator, confidence: s.confidence, target: s.target, rate: s.rate, falseAlarmSamples: s.falseAlarmSamples, staleSeconds: s.staleSeconds };
  }

  /** Opens the store, rebuilds every channel's state, connects to the broker. */
  async start(): Promise<void> {
    this.store = this.options.store ?? new SqliteStore(this.config.store.path);
    this.restore();
    if (this.options.source) {
      this.source = this.options.source;
      if (this.options.publisher) this.publishers.push(this.options.publisher);
    } else {
      const subscriptions = daemonSubscriptions(this.config);
      const connection = new MqttConnection(this.config.broker, this.brokerUrl, subscriptions.map((s) => s.topic));
      this.source = new MqttSampleSource(connection, subscriptions);
      this.publishers.push(this.options.publisher ?? new MqttPublisher(connection, this.config.topics));
    }
    this.publishers.push(this.listeners);
    await this.source.start(
      {
        batch: (batch) => this.onBatch(batch),
        connection: (connected, detail) => {
          this.log.info({ broker: this.brokerUrl, connected }, `broker ${detail}`);
          this.queueEvent('daemon', connected ? 'broker-connected' : 'broker-disconnected', null, { broker: this.brokerUrl, detail });
          this.commits.request();
        },
        error: (err) => this.log.warn({ err }, 'mqtt'),
      },
      this.store.position(this.source.name),
    );
    this.timers.push(setInterval(() => this.checkStale(), 1000));
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
    await this.source?.stop();
    this.store.close();
  }

  onEvent(listener: DaemonListener): () => void {
    return this.listeners.onEvent(listener);
  }

  /** Volatile events (the store-failing alert), as they are raised. */
  onVolatileEvent(listener: (event: VolatileEvent) => void): () => void {
    return this.listeners.onVolatileEvent(listener);
  }

  /** Health changes (the store failing or recovering), as they happen. */
  onHealth(listener: (health: DaemonHealth) => void): () => void {
    return this.listeners.onStatus((subject) => {
      if (subject === 'daemon') listener(this.health());
    });
  }

  /** Commits what is pending now (tests, and commands that must be durable before they answer). */
  commitNow(): boolean {
    return this.commits.commit(false);
  }

  // ---- ingest -------------------------------------------------------------------------------

  private onBatch(batch: SourceBatch): void {
    for (const delivery of batch.deliveries) {
      this.onMessage(delivery.topic, delivery.payload, delivery.subscription);
      if (delivery.position.durable) this.commits.batch.setPosition(delivery.position);
    }
    this.commits.batch.addToken(batch.token);
    this.commits.request();
  }

  private onMessage(topic: string, payload: Uint8Array, subscription: SubscriptionConfig | null): void {
    const arrival = this.now();
    this.counters.messages++;
    if (topic.startsWith(`${this.config.topics.command}/`)) return this.onCommand(topic, payload);
    if (subscription === null) return this.rejected('unknown-topic', `topic ${topic.slice(0, 80)}: no subscription of this daemon matches it`);
    const decoded = decodePayload(topic, payload, subscription, arrival);
    for (const rejection of decoded.rejections) this.rejected(rejection.reason, rejection.detail);
    let latestStamp = 0;
    for (const sample of decoded.samples) {
      let result: ReturnType<ChannelRegistry['accept']>;
      try {
        result = this.registry.accept(sample.channel, sample.value, sample.timeMs, sample.stamped, sample.unit ?? this.configuredUnit(sample.channel));
      } catch (error) {
        // A defect in the engine must not take the daemon down: the sample is counted and logged.
        this.rejected('engine-error', `channel ${sample.channel}: ${(error as Error).message}`);
        continue;
      }
      if (!result.accepted) {
        this.rejected(result.reason, `channel ${sample.channel}: sample at ${new Date(sample.timeMs).toISOString()} ${result.reason === 'duplicate' ? 'repeats the last accepted time' : 'is older than the last accepted one'}`);
        continue;
      }
      this.counters.accepted++;
      if (result.late) this.counters.late++;
      if (sample.stamped && sample.timeMs > latestStamp) latestStamp = sample.timeMs;
      const channel = result.channel;
      this.lastArrival.set(channel.name, arrival);
      this.introduce(channel);
      this.commits.batch.addSample(channel.name, result.seq, result.timeMs, sample.value, sample.stamped);
      this.active.add(channel);
      for (const event of result.events) this.queueChannelEvent(channel, event);
      this.derived.onSample(channel.name, sample.value, result.timeMs);
    }
    if (latestStamp > 0) this.noteLag(arrival, arrival - latestStamp);
  }

  /** A channel the store has not seen joins the pending batch (its first commit creates it). */
  private introduce(channel: Channel): void {
    if (this.introduced.has(channel.name)) return;
    this.introduced.add(channel.name);
    this.commits.batch.addChannel(channel.name, channel.unit);
  }

  private onCommand(topic: string, payload: Uint8Array): void {
    this.counters.commands++;
    const action = topic.slice(this.config.topics.command.length + 1);
    let body: Record<string, unknown> = {};
    try {
      const text = Buffer.from(payload.buffer, payload.byteOffset, payload.byteLength).toString('utf8');
      body = text.trim() === '' ? {} : (JSON.parse(text) as Record<string, unknown>);
      if (typeof body !== 'object' || body === null || Array.isArray(body)) throw new Error('not an object');
    } catch {
      return this.rejected('unparseable', `command ${action}: payload is not a JSON object`);
    }
    try {
      if (action === 'test-point/start') {
        this.startTestPoint({ ...(typeof body.id === 'string' ? { id: body.id } : {}), ...(typeof body.name === 'string' ? { name: body.name } : {}), channels: Array.isArray(body.channels) ? (body.channels as string[]) : [], derived: Array.isArray(body.derived) ? (body.derived as string[]) : [] });
      } else if (action === 'test-point/stop') {
        this.stopTestPoint(String(body.id ?? ''));
      } else this.rejected('unknown-topic', `command topic ${topic.slice(0, 80)}: unknown command (test-point/start, test-point/stop)`);
    } catch (error) {
      this.log.warn({ command: action, err: error }, 'command refused');
      this.queueEvent('daemon', 'command-refused', null, { command: action, reason: (error as Error).message });
    }
  }

  private rejected(reason: RejectReason, detail: string): void {
    this.counters.rejected[reason]++;
    const now = this.now();
    const last = this.lastRejectLog.get(reason) ?? 0;
    if (now - last >= REJECT_LOG_INTERVAL_MS) {
      this.lastRejectLog.set(reason, now);
      this.log.warn({ reason, count: this.counters.rejected[reason] }, `rejected: ${detail}`);
    }
  }

  /**
   * Ingest lag: how much later than usual samples are handled, measured against their own time
   * stamps. The difference arrival - stamp also holds the rig clock's offset (or a replay's age), so
   * the lag is the excess over the smallest difference seen in the last LAG_BASELINE_SECONDS: a
   * daemon that falls behind sees it grow, while a constant clock offset cancels out.
   */
  private noteLag(arrivalMs: number, differenceMs: number): void {
    const second = Math.floor(arrivalMs / 1000);
    const slot = second % LAG_BASELINE_SECONDS;
    if (this.lagSeconds[slot] !== second) {
      this.lagSeconds[slot] = second;
      this.lagMinima[slot] = differenceMs;
    } else if (differenceMs < (this.lagMinima[slot] as number)) this.lagMinima[slot] = differenceMs;
    let baseline = Number.POSITIVE_INFINITY;
    for (let i = 0; i < LAG_BASELINE_SECONDS; i++) {
      if (second - (this.lagSeconds[i] as number) < LAG_BASELINE_SECONDS && (this.lagMinima[i] as number) < baseline) baseline = this.lagMinima[i] as number;
    }
    const lagMs = Math.max(0, differenceMs - baseline);
    this.counters.ingestLagMs = lagMs;
    if (!this.lagWarned && lagMs > this.lagWarningMs) {
      this.lagWarned = true;
      this.queueEvent('daemon', 'ingest-lag', null, { lagMs, detail: `samples are being handled ${(lagMs / 1000).toFixed(1)} s later than their time stamps allow: the daemon is falling behind and the broker is queueing` });
    } else if (this.lagWarned && lagMs < this.lagWarningMs / 2) this.lagWarned = false;
  }

  private readonly lagSeconds = new Float64Array(LAG_BASELINE_SECONDS).fill(-Infinity);
  private readonly lagMinima = new Float64Array(LAG_BASELINE_SECONDS);

  // ---- test points --------------------------------------------------------------------------

  /** Commands change durable state: refused while commits fail (nothing would be stored). */
  private requireStore(): void {
    const health = this.commits.health();
    if (health.failing) throw new PlateauError('ERR_STORE_UNAVAILABLE', { since: new Date(health.since as number).toISOString(), detail: health.lastError?.message ?? 'unknown error' });
  }

  startTestPoint(request: { id?: string; name?: string; channels: string[]; derived?: string[] }): TestPoint {
    this.requireStore();
    const change = this.testPoints.start(request, this.now(), this.derived.names());
    if (change.kind === 'test-point-started') {
      const marks = [...change.marks];
      // The inputs of the test point's derived results restart with it, even when they are not
      // listed as channels (they do not join its readiness: a channel without a target is never precise).
      for (const name of this.derived.inputsOf(change.point.derived)) {
        if (change.point.channels.includes(name)) continue;
        const channel = this.registry.ensure(name, this.configuredUnit(name));
        if (channel.pipeline.options.window.kind !== 'growing') continue;
        marks.push({ channel: name, seq: channel.restartWindow().seq });
      }
      for (const mark of marks) {
        const channel = this.registry.get(mark.channel) as Channel;
        this.introduce(channel);
        this.commits.batch.addMark({ channel: channel.name, seq: mark.seq, kind: 'restart-window' });
      }
      this.derived.restart(change.point.derived);
    }
    this.applyTestPointChange(change);
    this.commits.commit(false);
    return change.point;
  }

  stopTestPoint(id: string): TestPoint {
    this.requireStore();
    const change = this.testPoints.stop(id, this.now());
    this.applyTestPointChange(change);
    this.commits.commit(false);
    return change.point;
  }

  annotateTestPoint(id: string, text: string): TestPoint {
    this.requireStore();
    const point = this.testPoints.annotate(id, text, this.now());
    this.commits.batch.putTestPoint(point.id, point);
    this.queueEvent(id, 'test-point-annotated', null, { text: text.slice(0, 2000) });
    this.commits.commit(false);
    return point;
  }

  private applyTestPointChange(change: TestPointChange): void {
    this.commits.batch.putTestPoint(change.point.id, change.point);
    const body: Record<string, unknown> = { testPoint: change.point.id, name: change.point.name, channels: change.point.channels, state: change.point.state };
    if (change.kind !== 'test-point-started') {
      this.commits.batch.addRecord(change.point.id, change.record);
      body.record = change.record;
    }
    this.queueEvent(change.point.id, change.kind, null, body);
  }

  // ---- events and flushing ------------------------------------------------------------------

  private queueChannelEvent(channel: Channel, event: ChannelEvent): void {
    const { kind, at, ...rest } = event;
    this.queueEvent(channel.name, kind, at, { channel: channel.name, ...rest });
  }

  queueEvent(source: string, kind: string, at: number | null, body: Record<string, unknown>): void {
    this.commits.batch.addEvent({ timeMs: this.now(), source, kind, at, body });
    this.commits.request();
  }

  /** Before each commit attempt: test-point verdicts, derived events, checkpoints due; returns the counters to store. */
  private prepareCommit(batch: PendingBatch, final: boolean): Record<string, number> {
    const now = this.now();
    for (const change of this.testPoints.evaluate(now)) this.applyTestPointChange(change);
    for (const event of this.derived.drainEvents()) batch.addEvent({ timeMs: now, source: event.source, kind: event.kind, at: event.at, body: event.body });
    const candidates = final ? this.registry.all() : [...this.active];
    this.active.clear();
    for (const channel of candidates) {
      if (!this.introduced.has(channel.name)) continue;
      const next = channel.nextSeq;
      const last = this.lastCheckpoint.get(channel.name) ?? 0;
      const due = Math.max(this.config.store.checkpointSamples, 2 * channel.pipeline.count);
      if ((final && next > last) || next - last >= due) {
        batch.setCheckpoint({ channel: channel.name, ...channel.checkpoint() });
        this.lastCheckpoint.set(channel.name, next);
      }
    }
    return this.counterSnapshot();
  }

  /** After a commit: the stored events go to every publisher, then the retained status of what they concern. */
  private publish(events: StoredEvent[]): void {
    const now = this.now();
    for (const event of events) {
      this.publishedId = event.id;
      for (const publisher of this.publishers) publisher.event(event);
    }
    // Retained status for every source whose state may have changed.
    const sources = new Set(events.map((e) => e.source));
    for (const source of sources) {
      const point = this.testPoints.get(source);
      if (point) {
        this.publishStatus(`test-point/${point.id}`, { testPoint: point.id, name: point.name, state: point.state, channels: this.testPoints.verdict(point), timeMs: now });
        continue;
      }
      const channel = this.registry.get(source);
      if (channel) this.publishStatus(`channel/${channel.name}`, { ...channel.pipeline.summary(), unit: channel.unit, timeMs: now });
    }
  }

  /** The store started failing or recovered: the volatile `store-failing` alert, the daemon's status. */
  private storeHealthChanged(health: CommitHealth): void {
    const now = this.now();
    if (health.failing) {
      const body = { since: health.since, error: health.lastError, samples: health.pendingSamples, unacknowledged: health.pendingAcknowledgements, detail: 'commits to the store fail: nothing is acknowledged to the broker until they succeed again' };
      for (const publisher of this.publishers) publisher.volatileEvent({ timeMs: now, source: 'daemon', kind: 'store-failing', body });
    }
    const h = this.health();
    this.publishStatus('daemon', { status: h.status, broker: h.broker, store: { failing: h.store.failing, since: h.store.since, error: h.store.lastError }, timeMs: now });
  }

  private publishStatus(subject: string, body: Record<string, unknown>): void {
    for (const publisher of this.publishers) publisher.status(subject, body);
  }

  private checkStale(): void {
    const now = this.now();
    let any = false;
    for (const channel of this.registry.all()) {
      // A channel restored from the store counts its silence from the daemon's start.
      let last = this.lastArrival.get(channel.name);
      if (last === undefined) {
        last = now;
        this.lastArrival.set(channel.name, now);
      }
      const event = channel.pipeline.checkStale((now - last) / 1000);
      if (event) {
        this.queueChannelEvent(channel, event);
        any = true;
      }
    }
    if (any) this.commits.request();
  }

  private prune(): void {
    const before = this.now() - this.config.store.retentionSeconds * 1000;
    try {
      const removed = this.store.prune(before);
      if (removed.chunks + removed.events > 0) this.log.info(removed, 'retention: old samples and events deleted');
    } catch (err) {
      this.log.error({ err }, 'retention failed; it runs again within the hour');
    }
  }

  // ---- restart ------------------------------------------------------------------------------

  /** Rebuilds each channel from its last checkpoint and the samples after it, and the test points. */
  private restore(): void {
    const started = performance.now();
    let replayed = 0;
    let forced = 0;
    const outcomes: Record<string, number> = { fresh: 0, loaded: 0, migrated: 0, replayed: 0 };
    for (const stored of this.store.channels()) {
      const channel = this.registry.ensure(stored.name, stored.unit);
      this.introduced.add(stored.name);
      const report = channel.restore(this.store.checkpoint(stored.name), {
        samplesFrom: (seq) => this.store.samplesFrom(stored.name, seq),
        marksFrom: (seq) => this.store.marksFrom(stored.name, seq),
      });
      outcomes[report.outcome] = (outcomes[report.outcome] ?? 0) + 1;
      if (report.outcome === 'migrated' || report.outcome === 'replayed' || report.detail !== null) {
        this.log.info({ channel: stored.name, checkpoint: report.outcome, replayedSamples: report.replayed }, `restore ${stored.name}: checkpoint ${report.outcome}${report.detail ? `: ${report.detail}` : ''}`);
      }
      // A channel loaded from its checkpoint has it at that index; one rebuilt otherwise gets a new one at the first commit.
      if (report.outcome === 'loaded' || report.outcome === 'migrated') this.lastCheckpoint.set(stored.name, channel.nextSeq - report.replayed);
      else if (report.replayed > 0) this.active.add(channel);
      replayed += report.replayed;
      forced += report.forced;
    }
    if (forced > 0) this.log.warn({ samples: forced }, 'restore: stored samples the time policy would refuse now (the samples their lateness was judged against were removed by retention) were taken as they were the first time');
    this.testPoints.load(this.store.testPoints() as TestPoint[]);
    this.publishedId = this.store.lastEventId();
    const counters = this.store.counters();
    this.counters.accepted = counters.accepted ?? 0;
    this.counters.messages = counters.messages ?? 0;
    for (const reason of REJECT_REASONS) this.counters.rejected[reason] = counters[`rejected.${reason}`] ?? 0;
    this.counters.restoredSamples = replayed;
    this.counters.restoreMs = performance.now() - started;
    this.log.info({ channels: this.registry.size, checkpoints: outcomes, replayedSamples: replayed, ms: Math.round(this.counters.restoreMs) }, 'state rebuilt from the store');
  }

  private counterSnapshot(): Record<string, number> {
    const out: Record<string, number> = { accepted: this.counters.accepted, messages: this.counters.messages };
    for (const reason of REJECT_REASONS) out[`rejected.${reason}`] = this.counters.rejected[reason];
    return out;
  }

  /** Counters for the API: samples accepted and rejected by reason, broker, lag, database. */
  counterReport(): Record<string, unknown> {
    const health = this.commits.health();
    return {
      samples: { accepted: this.counters.accepted, late: this.counters.late, rejected: { ...this.counters.rejected } },
      messages: this.counters.messages,
      commands: this.counters.commands,
      broker: { url: this.brokerUrl, connected: this.ingest?.connected ?? false, reconnects: this.ingest?.reconnects ?? 0, heldAcknowledgements: this.ingest?.unacknowledged ?? 0 },
      ingestLagMs: this.counters.ingestLagMs,
      flush: { count: health.commits, lastMs: health.lastCommitMs, maxMs: health.maxCommitMs, acknowledged: this.commits.acknowledgedCount, failing: health.failing, failedAttempts: health.attempts, pendingSamples: health.pendingSamples, error: health.lastError },
      database: { path: this.store.location, bytes: this.store.sizeBytes() },
      channels: this.registry.size,
      restore: { samples: this.counters.restoredSamples, ms: this.counters.restoreMs },
      memory: process.memoryUsage(),
    };
  }

  events(after: number, limit: number): StoredEvent[] {
    return this.store.eventsAfter(after, limit);
  }

  eventsOfKind(kind: string, after: number, limit: number): StoredEvent[] {
    return this.store.eventsOfKind(kind, after, limit);
  }

  /** The id of the newest event, stored at the restore or published since (0 when there is none). */
  get lastEventId(): number {
    return this.publishedId;
  }
}

/** What a daemon's sample source subscribes to: the configured subscriptions and the command topic. */
export function daemonSubscriptions(config: PlateauConfig): SubscriptionConfig[] {
  return [...config.subscriptions, { ...COMMAND_SUBSCRIPTION, topic: `${config.topics.command}/#` }];
}

/** The command topic's subscription (its payloads are read by onCommand, not by the decoder). */
const COMMAND_SUBSCRIPTION: SubscriptionConfig = { ...DECODER_DEFAULTS, topic: 'plateau/command/#', format: 'json', channel: '{topic}', maxBytes: 65_536, maxDepth: 4, maxSamples: 1 };
