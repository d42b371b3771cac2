import pino, { type Logger } from 'pino';
import type { PlateauConfig, SubscriptionConfig } from '../config/plateau-config.js';
import { settingsFor } from '../config/load-config.js';
import { ChannelRegistry, RECENT_TIMES, type RegisteredChannel } from '../engine/channel-registry.js';
import type { ChannelOptions } from '../engine/channel-options.js';
import type { ChannelEvent } from '../engine/channel-events.js';
import { TestPoints, type TestPoint, type TestPointChange } from '../engine/test-points.js';
import { decodePayload, DECODER_DEFAULTS } from '../ingest/payload-decoder.js';
import { REJECT_REASONS, type RejectReason } from '../ingest/sample.js';
import { MqttIngest, isUnknownTopic } from '../ingest/mqtt-ingest.js';
import { SqliteStore, type FlushBatch, type StoredEvent } from '../store/sqlite-store.js';
import type { ChannelPipelineState } from '../engine/channel-pipeline.js';
import { DerivedResults } from './derived-results.js';

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
  now?: () => number;
  /** Ingest lag that raises the `ingest-lag` warning event (default 5000 ms). */
  lagWarningMs?: number;
}

/** An event as committed to the store and then handed to the listeners and the MQTT event topic. */
export type PublishedEvent = StoredEvent;

export type DaemonListener = (event: PublishedEvent) => void;

interface PendingChunk {
  channelId: number;
  firstSeq: number;
  times: number[];
  values: number[];
}

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
  store!: SqliteStore;
  ingest: MqttIngest | null = null;
  private readonly now: () => number;
  private readonly brokerUrl: string;
  private readonly lagWarningMs: number;
  private pendingChunks = new Map<number, PendingChunk>();
  private pendingEvents: { source: string; kind: string; at: number | null; body: Record<string, unknown> }[] = [];
  private pendingMarks: FlushBatch['marks'] = [];
  private pendingTestPoints: TestPoint[] = [];
  private pendingRecords: { testPointId: string; body: unknown }[] = [];
  private flushScheduled = false;
  private flushTimer: NodeJS.Timeout | null = null;
  private timers: NodeJS.Timeout[] = [];
  private lastCheckpoint = new Map<number, number>();
  private statusSent = new Map<string, string>();
  private listeners = new Set<DaemonListener>();
  private publishedId = 0;
  private lastRejectLog = new Map<string, number>();
  private lagWarned = false;
  private stopped = false;
  readonly counters = {
    messages: 0,
    accepted: 0,
    rejected: Object.fromEntries(REJECT_REASONS.map((r) => [r, 0])) as Record<RejectReason, number>,
    flushes: 0,
    lastFlushMs: 0,
    maxFlushMs: 0,
    ingestLagMs: 0,
    acknowledged: 0,
    commands: 0,
    restoredSamples: 0,
    late: 0,
    restoreMs: 0,
  };

  constructor(config: PlateauConfig, options: DaemonOptions = {}) {
    this.config = config;
    this.log = options.logger ?? pino({ level: config.log.level, base: { service: 'plateau' } });
    this.now = options.now ?? Date.now;
    this.lagWarningMs = options.lagWarningMs ?? LAG_WARNING_MS;
    this.brokerUrl = config.broker.url === 'embedded' ? options.brokerUrl ?? 'mqtt://127.0.0.1:1883' : config.broker.url;
    this.registry = new ChannelRegistry((name) => this.channelOptions(name));
    this.testPoints = new TestPoints(this.registry);
    this.derived = new DerivedResults(config, this.registry);
    this.testPoints.useDerived(this.derived);
  }

  /** The unit the configuration gives a channel (looked up once per channel). */
  private configuredUnit(name: string): string | null {
    const known = this.registry.get(name);
    if (known) return known.unit;
    return settingsFor(this.config, name).unit;
  }

  channelOptions(name: string): ChannelOptions {
    const s = settingsFor(this.config, name);
    return { window: s.window, maxLag: s.maxLag, estimator: s.estimator, warmup: s.warmup, confidence: s.confidence, target: s.target, rate: s.rate, falseAlarmSamples: s.falseAlarmSamples, staleSeconds: s.staleSeconds };
  }

  /** Opens the store, rebuilds every channel's state, connects to the broker. */
  async start(): Promise<void> {
    this.store = new SqliteStore(this.config.store.path);
    this.restore();
    const commandSubscription: SubscriptionConfig = { ...COMMAND_SUBSCRIPTION, topic: `${this.config.topics.command}/#` };
    this.ingest = new MqttIngest(this.config.broker, this.brokerUrl, [...this.config.subscriptions, commandSubscription], {
      onMessage: (topic, payload, subscription) => this.onMessage(topic, payload, subscription),
      onConnectionChange: (connected, detail) => {
        this.log.info({ broker: this.brokerUrl, connected }, `broker ${detail}`);
        this.queueEvent('daemon', connected ? 'broker-connected' : 'broker-disconnected', null, { broker: this.brokerUrl, detail });
        this.scheduleFlush();
      },
      onError: (error) => this.log.warn({ err: error.message }, 'mqtt'),
    });
    await this.ingest.start();
    this.timers.push(setInterval(() => this.checkStale(), 1000));
    this.timers.push(setInterval(() => this.prune(), 3_600_000));
    for (const timer of this.timers) timer.unref();
  }

  /** Stops taking messages, commits what is pending with a checkpoint of every channel, closes. */
  async stop(): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    for (const timer of this.timers) clearInterval(timer);
    if (this.flushTimer) clearTimeout(this.flushTimer);
    // Commit what is pending with a checkpoint of every channel, acknowledge it, then disconnect.
    this.flush(true);
    await this.ingest?.stop();
    this.store.close();
  }

  onEvent(listener: DaemonListener): () => void {
    this.listeners.add(listener);
    return () => this.listeners.delete(listener);
  }

  // ---- ingest -------------------------------------------------------------------------------

  onMessage(topic: string, payload: Buffer, subscription: SubscriptionConfig): void {
    const arrival = this.now();
    this.counters.messages++;
    if (topic.startsWith(`${this.config.topics.command}/`)) return this.onCommand(topic, payload);
    if (isUnknownTopic(subscription)) return this.rejected('unknown-topic', `topic ${topic.slice(0, 80)}: no subscription of this daemon matches it`);
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
      channel.lastArrivalMs = arrival;
      if (channel.id < 0) channel.id = this.store.addChannel(channel.name, channel.unit, arrival);
      let chunk = this.pendingChunks.get(channel.id);
      if (!chunk) {
        chunk = { channelId: channel.id, firstSeq: result.seq, times: [], values: [] };
        this.pendingChunks.set(channel.id, chunk);
      }
      chunk.times.push(result.timeMs);
      chunk.values.push(sample.value);
      for (const event of result.events) this.queueChannelEvent(channel, event);
      this.derived.onSample(channel.name, sample.value, result.timeMs);
    }
    if (latestStamp > 0) this.noteLag(arrival, arrival - latestStamp);
    this.scheduleFlush();
  }

  private onCommand(topic: string, payload: Buffer): void {
    this.counters.commands++;
    const action = topic.slice(this.config.topics.command.length + 1);
    let body: Record<string, unknown> = {};
    try {
      const text = payload.toString('utf8');
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
      this.log.warn({ command: action, err: (error as Error).message }, 'command refused');
      this.queueEvent('daemon', 'command-refused', null, { command: action, reason: (error as Error).message });
      this.scheduleFlush();
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

  startTestPoint(request: { id?: string; name?: string; channels: string[]; derived?: string[] }): TestPoint {
    const change = this.testPoints.start(request, this.now(), this.derived.names());
    if (change.kind === 'test-point-started') {
      const marks = [...change.marks];
      // The inputs of the test point's derived results restart with it, even when they are not
      // listed as channels (they do not join its readiness: a channel without a target is never precise).
      for (const name of this.derived.inputsOf(change.point.derived)) {
        if (change.point.channels.includes(name)) continue;
        const channel = this.registry.ensure(name, this.configuredUnit(name));
        if (channel.pipeline.options.window.kind !== 'growing') continue;
        marks.push({ channel: name, seq: channel.pipeline.totalReceived });
        channel.pipeline.restartWindow();
      }
      for (const mark of marks) {
        const channel = this.registry.get(mark.channel) as RegisteredChannel;
        if (channel.id < 0) channel.id = this.store.addChannel(channel.name, channel.unit, this.now());
        this.pendingMarks.push({ channelId: channel.id, seq: mark.seq, kind: 'restart-window' });
        // The samples before the restart are in an earlier chunk: start a new one here.
        this.closeChunk(channel.id);
      }
      this.derived.restart(change.point.derived);
    }
    this.applyTestPointChange(change);
    this.flush(false);
    return change.point;
  }

  stopTestPoint(id: string): TestPoint {
    const change = this.testPoints.stop(id, this.now());
    this.applyTestPointChange(change);
    this.flush(false);
    return change.point;
  }

  annotateTestPoint(id: string, text: string): TestPoint {
    const point = this.testPoints.annotate(id, text, this.now());
    this.pendingTestPoints.push(point);
    this.queueEvent(id, 'test-point-annotated', null, { text: text.slice(0, 2000) });
    this.flush(false);
    return point;
  }

  private applyTestPointChange(change: TestPointChange): void {
    this.pendingTestPoints.push(change.point);
    const body: Record<string, unknown> = { testPoint: change.point.id, name: change.point.name, channels: change.point.channels, state: change.point.state };
    if (change.kind !== 'test-point-started') {
      this.pendingRecords.push({ testPointId: change.point.id, body: change.record });
      body.record = change.record;
    }
    this.queueEvent(change.point.id, change.kind, null, body);
  }

  private closeChunk(channelId: number): void {
    const chunk = this.pendingChunks.get(channelId);
    if (!chunk) return;
    this.pendingChunks.delete(channelId);
    this.closedChunks.push(chunk);
  }

  private closedChunks: PendingChunk[] = [];

  // ---- events and flushing ------------------------------------------------------------------

  private queueChannelEvent(channel: RegisteredChannel, event: ChannelEvent): void {
    const { kind, at, ...rest } = event;
    this.queueEvent(channel.name, kind, at, { channel: channel.name, ...rest });
  }

  queueEvent(source: string, kind: string, at: number | null, body: Record<string, unknown>): void {
    this.pendingEvents.push({ source, kind, at, body });
  }

  /**
   * A commit is due: at once (after the burst of messages in hand, which mqtt.js handles on the next
   * ticks, before setImmediate) when acknowledgements or events wait on it, else within
   * store.flushIntervalMs, so that QoS 0 streams are committed in batches.
   */
  scheduleFlush(): void {
    if (this.stopped) return;
    const urgent = (this.ingest?.heldCount ?? 0) > 0 || this.pendingEvents.length > 0 || this.pendingTestPoints.length > 0;
    if (urgent) {
      if (this.flushScheduled) return;
      if (this.flushTimer) {
        clearTimeout(this.flushTimer);
        this.flushTimer = null;
      }
      this.flushScheduled = true;
      setImmediate(() => this.flush(false));
      return;
    }
    if (this.flushScheduled || this.flushTimer) return;
    this.flushTimer = setTimeout(() => {
      this.flushTimer = null;
      this.flush(false);
    }, this.config.store.flushIntervalMs);
  }

  /** Commits the pending batch, then acknowledges and publishes. `final` checkpoints every channel. */
  flush(final: boolean): void {
    this.flushScheduled = false;
    if (this.flushTimer) {
      clearTimeout(this.flushTimer);
      this.flushTimer = null;
    }
    const started = performance.now();
    const now = this.now();
    for (const change of this.testPoints.evaluate(now)) this.applyTestPointChange(change);
    for (const event of this.derived.drainEvents()) this.queueEvent(event.source, event.kind, event.at, event.body);
    const chunks = [...this.closedChunks, ...this.pendingChunks.values()];
    this.closedChunks = [];
    this.pendingChunks = new Map();
    const checkpoints: FlushBatch['checkpoints'] = [];
    for (const channel of this.registry.all()) {
      if (channel.id < 0) continue;
      const received = channel.pipeline.totalReceived;
      const last = this.lastCheckpoint.get(channel.id) ?? 0;
      const due = Math.max(this.config.store.checkpointSamples, 2 * channel.pipeline.count);
      if ((final && received > last) || received - last >= due) {
        checkpoints.push({ channelId: channel.id, seq: received, state: channel.pipeline.saveState() });
        this.lastCheckpoint.set(channel.id, received);
      }
    }
    const events = this.pendingEvents;
    this.pendingEvents = [];
    const batch: FlushBatch = {
      chunks: chunks.map((c) => ({ channelId: c.channelId, firstSeq: c.firstSeq, times: Float64Array.from(c.times), values: Float64Array.from(c.values) })),
      events: events.map((e) => ({ timeMs: now, source: e.source, kind: e.kind, at: e.at, body: e.body })),
      checkpoints,
      marks: this.pendingMarks,
      testPoints: this.pendingTestPoints.map((p) => ({ id: p.id, body: p })),
      records: this.pendingRecords,
      counters: this.counterSnapshot(),
    };
    this.pendingMarks = [];
    this.pendingTestPoints = [];
    this.pendingRecords = [];
    try {
      this.store.commit(batch, now);
    } catch (error) {
      // The acknowledgements stay held: the broker will redeliver after a restart.
      this.log.error({ err: (error as Error).message }, 'commit failed; messages are not acknowledged');
      return;
    }
    this.counters.acknowledged += this.ingest?.releaseAcknowledgements() ?? 0;
    this.counters.flushes++;
    const elapsed = performance.now() - started;
    this.counters.lastFlushMs = elapsed;
    if (elapsed > this.counters.maxFlushMs) this.counters.maxFlushMs = elapsed;
    if (events.length > 0) this.publish(events, now);
  }

  private publish(events: { source: string; kind: string; at: number | null; body: Record<string, unknown> }[], now: number): void {
    const stored = this.store.eventsAfter(this.publishedId, events.length + 100);
    for (const event of stored) {
      this.publishedId = event.id;
      for (const listener of this.listeners) {
        try {
          listener(event);
        } catch (error) {
          this.log.warn({ err: (error as Error).message }, 'event listener failed');
        }
      }
      this.ingest?.publish(`${this.config.topics.events}/${event.kind}`, JSON.stringify(event), { qos: 1, retain: false });
    }
    // Retained status for every source whose state may have changed.
    const sources = new Set(events.map((e) => e.source));
    for (const source of sources) {
      const point = this.testPoints.get(source);
      if (point) {
        this.publishStatus(`${this.config.topics.status}/test-point/${point.id}`, { testPoint: point.id, name: point.name, state: point.state, channels: this.testPoints.verdict(point), timeMs: now });
        continue;
      }
      const channel = this.registry.get(source);
      if (channel) this.publishStatus(`${this.config.topics.status}/channel/${channel.name}`, { ...channel.pipeline.summary(), unit: channel.unit, timeMs: now });
    }
  }

  private publishStatus(topic: string, body: Record<string, unknown>): void {
    const text = JSON.stringify(body, (_k, v) => (typeof v === 'number' && !Number.isFinite(v) ? null : v));
    if (this.statusSent.get(topic) === text) return;
    this.statusSent.set(topic, text);
    this.ingest?.publish(topic, text, { qos: 1, retain: true });
  }

  private checkStale(): void {
    const now = this.now();
    let any = false;
    for (const channel of this.registry.all()) {
      // A channel restored from the store counts its silence from the daemon's start.
      if (Number.isNaN(channel.lastArrivalMs)) channel.lastArrivalMs = now;
      const event = channel.pipeline.checkStale((now - channel.lastArrivalMs) / 1000);
      if (event) {
        this.queueChannelEvent(channel, event);
        any = true;
      }
    }
    if (any) this.scheduleFlush();
  }

  private prune(): void {
    const before = this.now() - this.config.store.retentionSeconds * 1000;
    const removed = this.store.prune(before);
    if (removed.chunks + removed.events > 0) this.log.info(removed, 'retention: old samples and events deleted');
  }

  // ---- restart ------------------------------------------------------------------------------

  /** Rebuilds each channel from its last checkpoint and the samples after it, and the test points. */
  private restore(): void {
    const started = performance.now();
    let replayed = 0;
    for (const stored of this.store.channels()) {
      const channel = this.registry.ensure(stored.name, stored.unit, stored.id);
      const checkpoint = this.store.checkpoint(stored.id);
      let from = 0;
      if (checkpoint) {
        channel.pipeline.loadState(checkpoint.state as ChannelPipelineState);
        from = checkpoint.seq;
        this.lastCheckpoint.set(stored.id, from);
      }
      const marks = this.store.marksFrom(stored.id, from);
      let markIndex = 0;
      let lastTime = Number.NEGATIVE_INFINITY;
      // The times of the samples just before the checkpoint are needed too: a message redelivered
      // after the restart must still be recognised as a repeat.
      for (const chunk of this.store.samplesFrom(stored.id, Math.max(0, from - RECENT_TIMES))) {
        for (let i = 0; i < chunk.values.length; i++) {
          const seq = chunk.firstSeq + i;
          const time = chunk.times[i] as number;
          lastTime = time;
          if (seq < from) {
            this.registry.rememberTime(channel, time);
            continue;
          }
          while (markIndex < marks.length && (marks[markIndex] as { seq: number }).seq <= seq) {
            if ((marks[markIndex] as { seq: number; kind: string }).seq === seq) channel.pipeline.restartWindow();
            markIndex++;
          }
          channel.pipeline.push(chunk.values[i] as number, time / 1000);
          this.registry.rememberTime(channel, time);
          this.derived.onSample(channel.name, chunk.values[i] as number, time, true);
          replayed++;
        }
      }
      // A mark at the very next sample (a test point started after the last sample).
      while (markIndex < marks.length) {
        if ((marks[markIndex] as { seq: number }).seq === channel.pipeline.totalReceived) channel.pipeline.restartWindow();
        markIndex++;
      }
      if (lastTime > channel.lastTimeMs) channel.lastTimeMs = lastTime;
    }
    this.testPoints.load(this.store.testPoints() as TestPoint[]);
    this.publishedId = this.store.lastEventId();
    const counters = this.store.counters();
    this.counters.accepted = counters.accepted ?? 0;
    this.counters.messages = counters.messages ?? 0;
    for (const reason of REJECT_REASONS) this.counters.rejected[reason] = counters[`rejected.${reason}`] ?? 0;
    this.counters.restoredSamples = replayed;
    this.counters.restoreMs = performance.now() - started;
    this.log.info({ channels: this.registry.size, replayedSamples: replayed, ms: Math.round(this.counters.restoreMs) }, 'state rebuilt from the store');
  }

  private counterSnapshot(): Record<string, number> {
    const out: Record<string, number> = { accepted: this.counters.accepted, messages: this.counters.messages };
    for (const reason of REJECT_REASONS) out[`rejected.${reason}`] = this.counters.rejected[reason];
    return out;
  }

  /** Counters for the API: samples accepted and rejected by reason, broker, lag, database. */
  counterReport(): Record<string, unknown> {
    return {
      samples: { accepted: this.counters.accepted, late: this.counters.late, rejected: { ...this.counters.rejected } },
      messages: this.counters.messages,
      commands: this.counters.commands,
      broker: { url: this.brokerUrl, connected: this.ingest?.connected ?? false, reconnects: this.ingest?.reconnects ?? 0, heldAcknowledgements: this.ingest?.heldCount ?? 0 },
      ingestLagMs: this.counters.ingestLagMs,
      flush: { count: this.counters.flushes, lastMs: this.counters.lastFlushMs, maxMs: this.counters.maxFlushMs },
      database: { path: this.config.store.path, bytes: this.store.sizeBytes() },
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

/** The command topic's subscription (its payloads are read by onCommand, not by the decoder). */
const COMMAND_SUBSCRIPTION: SubscriptionConfig = { ...DECODER_DEFAULTS, topic: 'plateau/command/#', format: 'json', channel: '{topic}', maxBytes: 65_536, maxDepth: 4, maxSamples: 1 };
