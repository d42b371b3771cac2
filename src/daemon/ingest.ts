import type { Logger } from 'pino';
import type { SubscriptionConfig } from '../config/plateau-config.js';
import type { ChannelRegistry } from '../engine/channel-registry.js';
import type { AcceptResult, Channel } from '../engine/channel.js';
import type { ChannelEvent } from '../engine/channel-events.js';
import { GapDetector, type GapRecord } from '../engine/gap-detector.js';
import { PayloadDecoders } from '../ingest/payload-decoder.js';
import { REJECT_REASONS, type DecodeEffects, type RejectReason } from '../ingest/sample.js';
import { sameUnit } from '../engine/unit-label.js';
import type { Clock } from '../ports/clock.js';
import type { SourceBatch } from '../ports/sample-source.js';
import type { PendingBatch } from './pending-batch.js';
import type { ChannelIntake, IntakeBrief } from '../ports/daemon-api.js';

/**
 * Ingest: a source batch in, samples out to their channels and into the pending batch.
 *
 * Each delivery is decoded (the only place bad input stops: every refusal is counted by reason and
 * logged at most once per REJECT_LOG_INTERVAL_MS per reason), each sample goes to its channel's
 * accept path (the channel's time policy decides), and what the channel accepts, with the events it
 * raised, joins the pending batch with the batch's acknowledgement token and source position. A
 * defect in the engine for one sample is caught, counted as `engine-error` and logged: it cannot
 * take the daemon down, and a sample the channel took before the engine failed is stored all the same. Deliveries on the command topic go to the commands handler.
 *
 * Also kept here: which channels the store has (or the pending batch introduces), which took
 * samples since the last commit (the checkpoint candidates), each channel's last arrival (staleness,
 * by the daemon's clock), and the ingest lag (see noteLag).
 */
export interface IngestOptions {
  registry: ChannelRegistry;
  batch: PendingBatch;
  clock: Clock;
  log: Logger;
  commandTopic: string;
  lagWarningMs: number;
  /** The unit the configuration gives a channel (it wins over a payload's). */
  configuredUnit(name: string): string | null;
  /** A command message (topic below the command topic, payload). */
  command(action: string, payload: Uint8Array): void;
  /** An event of the daemon's own (ingest lag). */
  raise(source: string, kind: string, at: number | null, body: Record<string, unknown>): void;
  /** Whether a derived result uses the channel (asked once per channel). */
  isDerivedInput(channel: string): boolean;
  /** A channel that derived results use took a sample (they are brought up to date later). */
  sampled(channel: string): void;
  /** Asks for a commit. */
  requestCommit(): void;
  /** The expected sample interval configured for a channel (ms), or null to learn it from the time stamps. */
  expectedIntervalMs?(name: string): number | null;
  /** Publishes a message the decoders ask for (a Sparkplug B rebirth request); false when there is no connection to send it on. */
  publish?(topic: string, payload: Uint8Array): boolean;
}

export interface IngestCounters {
  messages: number;
  accepted: number;
  late: number;
  rejected: Record<RejectReason, number>;
  /** The daemon's ingest lag: the smallest current lag of the sources heard from recently (see noteLag). */
  ingestLagMs: number;
  /** The source (topic) with the largest current lag, when one lags: a publisher whose clock slips shows here, not in ingestLagMs. */
  laggingSource: { topic: string; lagMs: number } | null;
  /** Gaps found (time stamps and sequence numbers) and the samples they miss. */
  gaps: number;
  missingSamples: number;
}

/** Log one line per reason at most this often. */
const REJECT_LOG_INTERVAL_MS = 10_000;
/** Seconds over which the usual difference between arrival and time stamp is taken. */
const LAG_BASELINE_SECONDS = 60;
/** A source counts towards the daemon's lag while it was heard from this recently. */
const LAG_RECENT_MS = 10_000;
/** The daemon's lag is worked out over every source at most this often. */
const LAG_JUDGE_MS = 250;
/** Sources (topics) followed one by one; beyond this many, the least recently heard is forgotten. */
const LAG_MAX_SOURCES = 1024;
/** Channels whose refusals are counted one by one; refusals for further names count for the daemon only. */
const REFUSED_MAX_CHANNELS = 10_000;
/** Gaps listed per channel in its intake (the newest; the totals count every one). */
const INTAKE_GAPS_LISTED = 50;


/** One source's usual difference between arrival and time stamp: per-second minima over LAG_BASELINE_SECONDS. */
class SourceLag {
  readonly seconds = new Float64Array(LAG_BASELINE_SECONDS).fill(-Infinity);
  readonly minima = new Float64Array(LAG_BASELINE_SECONDS);
  lagMs = 0;
  lastArrivalMs = 0;

  note(arrivalMs: number, differenceMs: number): number {
    const second = Math.floor(arrivalMs / 1000);
    const slot = second % LAG_BASELINE_SECONDS;
    if (this.seconds[slot] !== second) {
      this.seconds[slot] = second;
      this.minima[slot] = differenceMs;
    } else if (differenceMs < (this.minima[slot] as number)) this.minima[slot] = differenceMs;
    let baseline = Number.POSITIVE_INFINITY;
    for (let i = 0; i < LAG_BASELINE_SECONDS; i++) {
      if (second - (this.seconds[i] as number) < LAG_BASELINE_SECONDS && (this.minima[i] as number) < baseline) baseline = this.minima[i] as number;
    }
    this.lagMs = Math.max(0, differenceMs - baseline);
    this.lastArrivalMs = arrivalMs;
    return this.lagMs;
  }
}

/** What ingest keeps per channel: one look-up per sample. */
interface Tracked {
  channel: Channel;
  /** The store has the channel, or the pending batch introduces it. */
  introduced: boolean;
  /** Took samples since the last commit (a checkpoint candidate). */
  active: boolean;
  /** Wall-clock ms of the last sample (NaN: none since the start). */
  lastArrival: number;
  derivedInput: boolean;
  /** Samples that never came (by the time stamps, or a source's sequence numbers). */
  gaps: GapDetector;
  /** The durable log (a JetStream partition's) of the channel's latest sample; null: none or not durable. */
  log: string | null;
  /** The gap detector took something since its state was last saved. */
  gapsDirty: boolean;
  /** The unit the configuration gives the channel (null: none). */
  configured: string | null;
}

export class Ingest {
  readonly counters: IngestCounters = { messages: 0, accepted: 0, late: 0, rejected: Object.fromEntries(REJECT_REASONS.map((r) => [r, 0])) as Record<RejectReason, number>, ingestLagMs: 0, laggingSource: null, gaps: 0, missingSamples: 0 };
  /** The payload decoders, with the Sparkplug B state of each edge node. */
  readonly decoders = new PayloadDecoders();
  private readonly options: IngestOptions;
  private readonly commandPrefix: string;
  private readonly tracked = new Map<string, Tracked>();
  private active: Tracked[] = [];
  /** Channels whose gap detector changed since the last saveState. */
  private gapsChanged: Tracked[] = [];
  private readonly lastRejectLog = new Map<string, number>();
  /** Refusals per channel (those that name one), by reason, since the daemon started. */
  private readonly refusedBy = new Map<string, Partial<Record<RejectReason, number>>>();
  /** Their totals per channel. */
  private readonly refusedTotal = new Map<string, number>();
  /** Per source (topic), in order of the last sample heard (oldest first). */
  private readonly lags = new Map<string, SourceLag>();
  private lagJudgedMs = Number.NEGATIVE_INFINITY;
  private lagWarned = false;
  /** The durable log of the delivery being ingested (null for a source without durable positions). */
  private currentLog: string | null = null;

  constructor(options: IngestOptions) {
    this.options = options;
    this.commandPrefix = `${options.commandTopic}/`;
  }

  /** The durable log (for example a JetStream partition's) the channel's latest sample came from; null when unknown. */
  logOf(name: string): string | null {
    return this.tracked.get(name)?.log ?? null;
  }

  /**
   * A channel restored elsewhere (a partition's shared checkpoint) takes the place of the one
   * tracked under its name; its samples come from `log`. The store gets it if it does not have it.
   */
  adopt(channel: Channel, log: string): void {
    const tracked = this.track(channel.name, null);
    tracked.channel = channel;
    tracked.log = log;
    if (!tracked.introduced) {
      tracked.introduced = true;
      this.options.batch.addChannel(channel.name, channel.unit);
    }
  }

  /** A channel the store already has (restored at start). */
  known(channel: Channel): void {
    this.track(channel.name, null).introduced = true;
  }

  /** The channels that took samples since the last call (a restored channel rebuilt by a replay counts too). */
  takeActive(): Channel[] {
    const out = this.active.map((t) => {
      t.active = false;
      return t.channel;
    });
    this.active = [];
    return out;
  }

  touch(channel: Channel): void {
    this.activate(this.track(channel.name, null));
  }

  /** Makes sure the store gets the channel: a new one joins the pending batch (its first commit creates it). */
  introduce(channel: Channel): void {
    const tracked = this.track(channel.name, null);
    if (tracked.introduced) return;
    tracked.introduced = true;
    this.options.batch.addChannel(channel.name, channel.unit);
  }

  /**
   * The channel's record, the channel created when new. Its unit: the configuration's when it
   * gives one (it wins over a payload's, e.g. a SenML base unit; a payload naming another unit is
   * noted on the channel, `unitNote`, and logged once), else the first a payload names.
   */
  private track(name: string, unit: string | null): Tracked {
    let tracked = this.tracked.get(name);
    if (tracked === undefined) {
      const configured = this.options.configuredUnit(name);
      const channel = this.options.registry.ensure(name, configured ?? unit);
      if (configured !== null && channel.unit !== configured) channel.unit = configured; // restored with another unit
      tracked = { channel, introduced: false, active: false, lastArrival: Number.NaN, derivedInput: this.options.isDerivedInput(name), gaps: new GapDetector(this.options.expectedIntervalMs?.(name) ?? null), log: null, gapsDirty: false, configured };
      this.tracked.set(name, tracked);
    } else if (unit !== null && tracked.channel.unit === null) tracked.channel.unit = unit;
    if (unit !== null && tracked.configured !== null && tracked.channel.unitNote === null && !sameUnit(unit, tracked.configured)) {
      tracked.channel.unitNote = `the payload gives the unit "${unit}", the configuration "${tracked.configured}": the configuration's is used`;
      this.options.log.warn({ channel: name, payloadUnit: unit, configuredUnit: tracked.configured }, 'unit conflict: the configured unit is used');
    }
    return tracked;
  }

  private activate(tracked: Tracked): void {
    if (tracked.active) return;
    tracked.active = true;
    this.active.push(tracked);
  }

  batch(batch: SourceBatch): void {
    const pending = this.options.batch;
    for (const delivery of batch.deliveries) {
      this.currentLog = delivery.position.durable ? delivery.position.source : null;
      this.message(delivery.topic, delivery.payload, delivery.subscription);
      if (delivery.position.durable) pending.setPosition(delivery.position);
    }
    pending.addToken(batch.token);
    this.options.requestCommit();
  }

  private message(topic: string, payload: Uint8Array, subscription: SubscriptionConfig | null): void {
    const { clock } = this.options;
    const arrival = clock.now();
    this.counters.messages++;
    if (topic.startsWith(this.commandPrefix)) return this.options.command(topic.slice(this.commandPrefix.length), payload);
    if (subscription === null) return this.rejected('unknown-topic', `topic ${topic.slice(0, 80)}: no subscription of this daemon matches it`);
    const decoded = this.decoders.decode(topic, payload, subscription, arrival);
    for (const rejection of decoded.rejections) this.rejected(rejection.reason, rejection.detail, undefined, rejection.channel);
    if (decoded.effects !== undefined && decoded.effects.sequenceGaps.length > 0) this.sequenceGaps(decoded.effects);
    let latestStamp = 0;
    for (const sample of decoded.samples) {
      let tracked: Tracked;
      try {
        tracked = this.track(sample.channel, sample.unit ?? null);
      } catch (error) {
        this.rejected('engine-error', `channel ${sample.channel}: ${(error as Error).message}`, error, sample.channel);
        continue;
      }
      if (this.take(tracked, sample.value, sample.timeMs, sample.stamped, arrival) && sample.stamped && sample.timeMs > latestStamp) latestStamp = sample.timeMs;
    }
    if (decoded.blocks !== undefined) {
      // Binary frames: one channel look-up per block, no object per sample.
      for (const block of decoded.blocks) {
        let tracked: Tracked;
        try {
          tracked = this.track(block.channel, block.unit ?? null);
        } catch (error) {
          this.rejected('engine-error', `channel ${block.channel}: ${(error as Error).message}`, error, block.channel);
          continue;
        }
        const newest = this.takeBlock(tracked, block.times, block.values, block.length, block.stamped, arrival);
        if (newest > latestStamp) latestStamp = newest;
      }
    }
    if (latestStamp > 0) this.noteLag(topic, arrival, arrival - latestStamp);
    if (decoded.effects !== undefined) this.effects(decoded.effects);
  }

  /**
   * Messages a source's sequence numbers say were lost, before the samples of the message that
   * revealed it: each channel of the source counts the gap (and does not judge its next step by
   * the time stamps again).
   */
  private sequenceGaps(effects: DecodeEffects): void {
    for (const lost of effects.sequenceGaps) {
      for (const name of lost.channels) {
        if (this.options.registry.get(name) === undefined) continue;
        const tracked = this.track(name, null);
        if (!tracked.gapsDirty) this.gapsTouched(tracked);
        this.gap(name, null, tracked.gaps.noteSequenceGap(lost.missing, lost.timeMs));
      }
    }
  }

  /** What a message asks besides its samples: messages to send, channels stale at once. */
  private effects(effects: DecodeEffects): void {
    for (const message of effects.publish) {
      const sent = this.options.publish?.(message.topic, message.payload) ?? false;
      this.options.log.info({ topic: message.topic, sent }, sent ? `rebirth request sent on ${message.topic}` : `a rebirth request on ${message.topic} could not be sent: no broker connection`);
    }
    let any = false;
    for (const { channels, cause } of effects.stale) {
      for (const name of channels) {
        if (this.options.registry.get(name) === undefined) continue;
        const tracked = this.track(name, null);
        const silent = Number.isNaN(tracked.lastArrival) ? 0 : (this.options.clock.now() - tracked.lastArrival) / 1000;
        const event = tracked.channel.pipeline.checkStale(silent, true);
        if (event === null) continue;
        const { kind, at, ...rest } = event;
        this.options.raise(name, kind, at, { channel: name, ...rest, cause });
        any = true;
      }
    }
    if (any) this.options.requestCommit();
  }

  /** One sample to its channel's accept path; whether the channel took it. */
  private take(tracked: Tracked, value: number, timeMs: number, stamped: boolean, arrival: number): boolean {
    const channel = tracked.channel;
    let result: AcceptResult;
    try {
      result = channel.accept(value, timeMs, stamped);
    } catch (error) {
      // A defect in the engine must not take the daemon down: the sample is counted and logged (with the stack).
      this.rejected('engine-error', `channel ${channel.name}: ${(error as Error).message}`, error, channel.name);
      return false;
    }
    if (!result.accepted) {
      this.refused(channel, result.reason, timeMs);
      return false;
    }
    this.counters.accepted++;
    if (result.late) this.counters.late++;
    tracked.lastArrival = arrival;
    tracked.log = this.currentLog;
    if (!tracked.introduced) this.introduce(channel);
    this.options.batch.addSample(channel.name, result.seq, result.timeMs, value, stamped);
    // The channel took the sample and then the engine failed on it: the sample is stored (nothing
    // accepted is lost) and the defect counted and logged.
    if (result.engineError !== null) this.rejected('engine-error', `channel ${channel.name}: sample ${result.seq} stored, but the engine failed on it: ${result.engineError.message}`, result.engineError, channel.name);
    if (!tracked.active) this.activate(tracked);
    for (const event of result.events) this.channelEvent(channel, event);
    if (stamped && !result.late) {
      if (!tracked.gapsDirty) this.gapsTouched(tracked);
      const gap = tracked.gaps.push(timeMs);
      if (gap !== null) this.gap(channel.name, result.seq, gap);
    }
    if (tracked.derivedInput) this.options.sampled(channel.name);
    return true;
  }

  /**
   * A block of one channel's samples (binary frames, SenML packs): what `take` does per sample, with
   * the bookkeeping that is the same for every sample of the block (arrival, log, introduction,
   * activity, derived inputs) done once, and the accepted samples written straight into the
   * channel's pending chunk. Returns the newest stamped time taken (0: none).
   */
  private takeBlock(tracked: Tracked, times: Float64Array, values: Float64Array, length: number, stamped: boolean, arrival: number): number {
    const channel = tracked.channel;
    const batch = this.options.batch;
    let taken = 0;
    let latest = 0;
    for (let i = 0; i < length; i++) {
      const value = values[i] as number;
      const timeMs = times[i] as number;
      let result: AcceptResult;
      try {
        result = channel.accept(value, timeMs, stamped);
      } catch (error) {
        this.rejected('engine-error', `channel ${channel.name}: ${(error as Error).message}`, error, channel.name);
        continue;
      }
      if (!result.accepted) {
        this.refused(channel, result.reason, timeMs);
        continue;
      }
      if (taken === 0) {
        tracked.lastArrival = arrival;
        tracked.log = this.currentLog;
        if (!tracked.introduced) this.introduce(channel);
        if (!tracked.active) this.activate(tracked);
      }
      taken++;
      if (result.late) this.counters.late++;
      batch.addSample(channel.name, result.seq, result.timeMs, value, stamped);
      if (result.engineError !== null) this.rejected('engine-error', `channel ${channel.name}: sample ${result.seq} stored, but the engine failed on it: ${result.engineError.message}`, result.engineError, channel.name);
      const events = result.events;
      for (let e = 0; e < events.length; e++) this.channelEvent(channel, events[e] as ChannelEvent);
      if (stamped && !result.late) {
        if (!tracked.gapsDirty) this.gapsTouched(tracked);
        const gap = tracked.gaps.push(timeMs);
        if (gap !== null) this.gap(channel.name, result.seq, gap);
        if (timeMs > latest) latest = timeMs;
      } else if (stamped && timeMs > latest) latest = timeMs;
    }
    this.counters.accepted += taken;
    if (taken > 0 && tracked.derivedInput) this.options.sampled(channel.name);
    return latest;
  }

  private refused(channel: Channel, reason: 'duplicate' | 'out-of-order' | 'redelivered', timeMs: number): void {
    this.rejected(reason, `channel ${channel.name}: sample at ${new Date(timeMs).toISOString()} ${reason === 'duplicate' ? 'repeats an accepted time' : reason === 'redelivered' ? 'was stored before the restart (delivered again)' : 'is older than every remembered one'}`, undefined, channel.name);
  }

  private gapsTouched(tracked: Tracked): void {
    tracked.gapsDirty = true;
    this.gapsChanged.push(tracked);
  }

  /**
   * Before each commit: the state that must survive a restart, as entries of the pending batch, for
   * what changed since the last call. Each gap detector fed since (`gaps/<channel>`, and its list of
   * kept gaps when one was added, `gap-list/<channel>`), and the Sparkplug B decoder's edge nodes
   * and counters (`sparkplug/...`). They are committed with the samples that changed them, so after
   * a restart (or a crash: what the commit did not hold comes again from the broker) the detectors
   * and the edge nodes continue exactly where the committed samples left them.
   */
  saveState(): void {
    const batch = this.options.batch;
    for (const tracked of this.gapsChanged) {
      tracked.gapsDirty = false;
      const name = tracked.channel.name;
      batch.setState(`gaps/${name}`, JSON.stringify(tracked.gaps.saveState()));
      if (tracked.gaps.keptDirty) batch.setState(`gap-list/${name}`, JSON.stringify(tracked.gaps.takeKept()));
    }
    this.gapsChanged = [];
    this.decoders.sparkplug.saveChanges((key, body) => batch.setState(`sparkplug/${key}`, body));
  }

  /**
   * At start, after the channels are restored: the gap detectors and the Sparkplug B edge nodes as
   * the last commit left them. An entry that cannot be read is logged and left out (that detector
   * learns again; that edge node needs a rebirth).
   */
  restoreState(entries: (prefix: string) => { key: string; body: string }[]): { gapDetectors: number; edgeNodes: number } {
    const lists = new Map<string, string>();
    for (const entry of entries('gap-list/')) lists.set(entry.key.slice('gap-list/'.length), entry.body);
    let gapDetectors = 0;
    for (const entry of entries('gaps/')) {
      const name = entry.key.slice('gaps/'.length);
      if (this.options.registry.get(name) === undefined) continue;
      try {
        const list = lists.get(name);
        this.track(name, null).gaps.loadState(JSON.parse(entry.body), list === undefined ? null : JSON.parse(list));
        gapDetectors++;
      } catch (error) {
        this.options.log.warn({ channel: name, err: error }, `the gap detector's saved state could not be read: it learns the interval again`);
      }
    }
    const sparkplug = entries('sparkplug/').map((e) => ({ key: e.key.slice('sparkplug/'.length), body: e.body }));
    for (const problem of this.decoders.sparkplug.restore(sparkplug)) this.options.log.warn({ problem }, 'a Sparkplug B edge node\'s saved state could not be read: it needs a rebirth');
    return { gapDetectors, edgeNodes: sparkplug.filter((e) => e.key.startsWith('node/')).length };
  }

  /** A gap: counted, and an event on the channel at the index of the first sample after it. */
  private gap(name: string, at: number | null, gap: GapRecord): void {
    this.counters.gaps++;
    this.counters.missingSamples += gap.missing;
    this.options.raise(name, 'gap', at, {
      channel: name,
      from: new Date(gap.fromMs).toISOString(),
      to: new Date(gap.toMs).toISOString(),
      missing: gap.missing,
      intervalMs: gap.intervalMs,
      source: gap.source,
      detail: gap.source === 'sequence' ? `${gap.missing} messages lost by the source's sequence numbers` : `${gap.missing} samples missing at ${gap.intervalMs?.toPrecision(4)} ms intervals`,
    });
  }

  /** Gaps of a channel within a window (ISO times), for its test point's record. */
  gapsWithin(name: string, from: string | null, to: string | null): { count: number; missingSamples: number; list: { from: string; to: string; missing: number; source: 'time-stamps' | 'sequence' }[] } {
    const tracked = this.tracked.get(name);
    if (tracked === undefined || from === null || to === null) return { count: 0, missingSamples: 0, list: [] };
    const found = tracked.gaps.within(Date.parse(from), Date.parse(to));
    return { count: found.gaps, missingSamples: found.missing, list: found.list.slice(0, 100).map((g) => ({ from: new Date(g.fromMs).toISOString(), to: new Date(g.toMs).toISOString(), missing: g.missing, source: g.source })) };
  }

  /** Gaps of a channel between two times (ms), in seconds since the epoch, for its trace. */
  gapTrace(name: string, fromMs: number, toMs: number): { from: number; to: number; missing: number; source: 'time-stamps' | 'sequence' }[] {
    const tracked = this.tracked.get(name);
    if (tracked === undefined) return [];
    return tracked.gaps.within(fromMs, toMs).list.map((g) => ({ from: g.fromMs / 1000, to: g.toMs / 1000, missing: g.missing, source: g.source }));
  }

  /** A channel's refusals by reason and its gaps (the newest INTAKE_GAPS_LISTED listed), since the daemon started. */
  intake(name: string): ChannelIntake {
    const byReason = { ...(this.refusedBy.get(name) ?? {}) };
    let total = 0;
    for (const count of Object.values(byReason)) total += count;
    const detector = this.tracked.get(name)?.gaps;
    const stats = detector?.stats() ?? { gaps: 0, missing: 0, sequenceGaps: 0, intervalMs: null, learned: false };
    const kept = detector?.within(Number.NEGATIVE_INFINITY, Number.POSITIVE_INFINITY).list ?? [];
    return {
      refused: { total, byReason },
      gaps: {
        count: stats.gaps,
        missingSamples: stats.missing,
        sequenceGaps: stats.sequenceGaps,
        intervalMs: stats.intervalMs,
        learned: stats.learned,
        recent: kept.slice(-INTAKE_GAPS_LISTED).map((g) => ({ from: new Date(g.fromMs).toISOString(), to: new Date(g.toMs).toISOString(), missing: g.missing, source: g.source })),
      },
    };
  }

  /** The totals of intake(name) in O(1), for the live summaries. */
  intakeBrief(name: string): IntakeBrief {
    const stats = this.tracked.get(name)?.gaps.stats();
    return { refused: this.refusedTotal.get(name) ?? 0, gaps: stats?.gaps ?? 0, missingSamples: stats?.missing ?? 0 };
  }

  /** Channels with gaps: their counts and expected intervals. */
  gapReport(): Record<string, { gaps: number; missing: number; intervalMs: number | null; learned: boolean }> {
    const out: Record<string, { gaps: number; missing: number; intervalMs: number | null; learned: boolean }> = {};
    for (const [name, tracked] of this.tracked) {
      const stats = tracked.gaps.stats();
      if (stats.gaps > 0) out[name] = { gaps: stats.gaps, missing: stats.missing, intervalMs: stats.intervalMs, learned: stats.learned };
    }
    return out;
  }

  /** A channel's event joins the batch, its source the channel. */
  channelEvent(channel: Channel, event: ChannelEvent): void {
    const { kind, at, ...rest } = event;
    this.options.raise(channel.name, kind, at, { channel: channel.name, ...rest });
  }

  /** Counts (and logs, at a limited rate) a refused payload or sample; an engine defect is logged with its error. */
  rejected(reason: RejectReason, detail: string, err?: unknown, channel?: string): void {
    this.counters.rejected[reason]++;
    if (channel !== undefined) {
      let counts = this.refusedBy.get(channel);
      if (counts === undefined && this.refusedBy.size < REFUSED_MAX_CHANNELS) this.refusedBy.set(channel, (counts = {}));
      if (counts !== undefined) {
        counts[reason] = (counts[reason] ?? 0) + 1;
        this.refusedTotal.set(channel, (this.refusedTotal.get(channel) ?? 0) + 1);
      }
    }
    const now = this.options.clock.now();
    const last = this.lastRejectLog.get(reason) ?? Number.NEGATIVE_INFINITY;
    if (now - last >= REJECT_LOG_INTERVAL_MS) {
      this.lastRejectLog.set(reason, now);
      if (err !== undefined) this.options.log.error({ reason, count: this.counters.rejected[reason], err }, `rejected: ${detail}`);
      else this.options.log.warn({ reason, count: this.counters.rejected[reason] }, `rejected: ${detail}`);
    }
  }

  /** Channels silent for their staleSeconds (by the daemon's clock) turn stale; one event each. */
  checkStale(): void {
    const now = this.options.clock.now();
    let any = false;
    for (const channel of this.options.registry.all()) {
      // A channel restored from the store (or created by a test point) counts its silence from the daemon's start.
      const tracked = this.track(channel.name, null);
      if (Number.isNaN(tracked.lastArrival)) tracked.lastArrival = now;
      const event = channel.pipeline.checkStale((now - tracked.lastArrival) / 1000);
      if (event) {
        this.channelEvent(channel, event);
        any = true;
      }
    }
    if (any) this.options.requestCommit();
  }

  /**
   * Ingest lag, judged per source (the topic a delivery came on): how much later than usual its
   * samples are handled, against their own time stamps. The difference arrival - stamp also holds
   * the publisher's clock offset (or a replay's age), so each source's lag is the excess over the
   * smallest difference it showed in the last LAG_BASELINE_SECONDS: a constant offset cancels, and
   * one publisher's clock cannot set the baseline of another. The daemon falls behind when every
   * source is late: its lag is the smallest current lag of the sources heard in the last
   * LAG_RECENT_MS, and only that raises `ingest-lag`. One publisher whose clock slips behind shows
   * as `laggingSource` in the counters, not as the daemon falling behind.
   */
  private noteLag(topic: string, arrivalMs: number, differenceMs: number): void {
    let lag = this.lags.get(topic);
    if (lag === undefined) {
      if (this.lags.size >= LAG_MAX_SOURCES) this.lags.delete(this.lags.keys().next().value as string);
      lag = new SourceLag();
    } else this.lags.delete(topic); // re-inserted: the map stays in order of the last sample heard
    this.lags.set(topic, lag);
    lag.note(arrivalMs, differenceMs);
    // The daemon's lag over every source: at most every LAG_JUDGE_MS (a pass over the sources).
    if (arrivalMs - this.lagJudgedMs < LAG_JUDGE_MS && this.lags.size > 1) return;
    this.lagJudgedMs = arrivalMs;
    let lagMs = Number.POSITIVE_INFINITY;
    let worst: { topic: string; lagMs: number } | null = null;
    for (const [name, source] of this.lags) {
      if (arrivalMs - source.lastArrivalMs > LAG_RECENT_MS) continue;
      if (source.lagMs < lagMs) lagMs = source.lagMs;
      if (source.lagMs > 0 && (worst === null || source.lagMs > worst.lagMs)) worst = { topic: name, lagMs: source.lagMs };
    }
    lagMs = Number.isFinite(lagMs) ? lagMs : 0;
    this.counters.ingestLagMs = lagMs;
    this.counters.laggingSource = worst;
    const warning = this.options.lagWarningMs;
    if (!this.lagWarned && lagMs > warning) {
      this.lagWarned = true;
      this.options.raise('daemon', 'ingest-lag', null, { lagMs, detail: `samples from every source are being handled ${(lagMs / 1000).toFixed(1)} s later than their time stamps allow: the daemon is falling behind and the broker is queueing` });
    } else if (this.lagWarned && lagMs < warning / 2) this.lagWarned = false;
  }
}
