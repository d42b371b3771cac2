import { ReadingRing, type ReadingRingState } from '../../core/criteria/reading-ring.js';
import { SubIntervalAverages, type SubIntervalAveragesState } from '../../core/criteria/sub-interval-averages.js';
import { SampledReadings, type SampledReadingsState } from '../../core/criteria/sampled-readings.js';
import { SlidingWindow, type SlidingWindowState, type WindowNeeds } from '../../core/criteria/sliding-window.js';
import { TIME_EPSILON } from '../../core/criteria/time-grid.js';
import { criterionProblems, describeTolerance, statisticMinimum, type Comparison, type CriterionSpec, type StatisticName } from '../../core/criteria/criterion-spec.js';
import { blockingReading, CriterionEvaluator, criterionNeeds, statisticDetail, type StatisticDetail } from '../../core/criteria/criterion-statistic.js';
import type { CriterionEvent } from './criteria-events.js';

/**
 * A channel's stability criteria, evaluated live: per rule, whether its condition is met, since
 * when, whether it has held for its hold duration, its value against its tolerance, the margin, and
 * the earliest time it can hold; events when a rule starts and stops holding.
 *
 * Deterministic given the samples and their times: nothing here reads a clock. Time comes in with
 * each sample; a sample older than the newest (a late delivery the registry accepts) is taken at
 * the newest time, so windows never run backwards. Non-finite values or times are ignored and
 * counted (the ingest refuses them before they get here).
 *
 * Structure: one stream of readings per distinct basis (every sample; averages over sub-intervals
 * of L s; readings taken every S s), each with its ring of readings; one sliding window per
 * distinct (stream, window bound), shared by the rules that use it and keeping only the running
 * statistics they need; the rings are trimmed to what the windows still hold.
 * Cost: O(1) amortised per sample and rule (see bench/criteria.js); a rule is re-evaluated only
 * when its stream produced a reading (or the set point changed). Memory: 16 bytes per reading held
 * per stream (at 10 Hz, 144 KiB for a 15 min window on every sample), plus up to 32 bytes per
 * reading for each window's deques.
 *
 * Set point: a rule takes it from its configuration, from the test point (`setSetPoint`, applied
 * from the next sample on), or has none.
 */
export interface CriterionState {
  name: string;
  statistic: StatisticName;
  preset: string | null;
  /** The public document a preset cites, and the rule's wording there. */
  source: string | null;
  wording: string | null;
  /** The tolerance in words ("at most 3 or 1 % of the reading above -273.15, whichever is greater"). */
  rule: string;
  /** The condition has been met continuously for at least the hold duration. */
  holds: boolean;
  /** The condition is met at the newest sample (the hold may still be running). */
  met: boolean;
  /** Time of the sample from which the condition has been met without a break, or null. */
  since: number | null;
  /** Time from which the rule holds (since + hold), or null. */
  holdsFrom: number | null;
  holdSeconds: number;
  value: number | null;
  tolerance: number | null;
  comparison: Comparison;
  /** tolerance - value: positive inside, negative outside (channel units, or the statistic's). */
  margin: number | null;
  /** Smallest margin since `since` (the evidence for a record), or null. */
  worstMargin: number | null;
  setPoint: number | null;
  /** Readings in the rule's window. */
  readings: number;
  /** Earliest time at which the rule can hold given its window and hold duration; null when it cannot be told. */
  earliestHoldTime: number | null;
  secondsToHold: number | null;
  /** Why the rule does not hold yet, in one line; null when it holds. */
  pending: string | null;
  detail: StatisticDetail;
}

/** Name and version of the saved state; a state of another kind, version or rule set is not restored. */
export const CRITERIA_STATE_KIND = 'plateau/criteria-tracker';
export const CRITERIA_STATE_VERSION = 1;

export interface CriteriaTrackerState {
  kind: typeof CRITERIA_STATE_KIND;
  version: number;
  /** The rules the state belongs to (their specs as JSON). */
  fingerprint: string;
  received: number;
  ignored: number;
  late: number;
  lastTime: number | null;
  testPointSetPoint: number | null;
  streams: StreamState[];
  windows: SlidingWindowState[];
  rules: RuleRuntimeState[];
}

type StreamState =
  | { kind: 'readings'; origin: number | null; ring: ReadingRingState }
  | { kind: 'averages'; state: SubIntervalAveragesState }
  | { kind: 'sampled'; state: SampledReadingsState };

interface RuleRuntimeState {
  value: number | null;
  tolerance: number | null;
  covered: boolean;
  met: boolean;
  since: number | null;
  holds: boolean;
  worstMargin: number | null;
  dirty: boolean;
}

const NO_EVENTS: readonly CriterionEvent[] = Object.freeze([]);

/** One basis of readings: every sample, sub-interval averages, or readings at a sampling interval. */
abstract class Stream {
  readonly windows: SlidingWindow[] = [];
  /** Set by `push`: the sample produced a reading. */
  changed = false;
  /** Time from which the stream has observed the channel (NaN before the first sample). */
  origin = Number.NaN;
  abstract readonly ring: ReadingRing;
  /** Offers a sample; true when it produced a reading (and keeps `origin` up to date). */
  abstract take(time: number, value: number): boolean;
  /** Earliest time of the reading `ahead` readings from now (1 = the next); null when unknown. */
  abstract readingTime(ahead: number): number | null;
  /** The earliest time at or after `time` when a reading can arrive. */
  abstract readingAtOrAfter(time: number): number;
  abstract clear(): void;
  abstract saveState(): StreamState;
  abstract loadState(state: StreamState): void;

  push(time: number, value: number): void {
    this.changed = this.take(time, value);
    if (!this.changed) return;
    const windows = this.windows;
    // A whole number throughout (no Infinity), so the call below passes it unboxed.
    let oldest = this.ring.nextSeq;
    for (let i = 0; i < windows.length; i++) {
      const w = windows[i] as SlidingWindow;
      w.push();
      if (w.start < oldest) oldest = w.start;
    }
    this.ring.dropBefore(oldest);
  }
}

class SampleStream extends Stream {
  readonly ring = new ReadingRing(256);
  take(time: number, value: number): boolean {
    if (Number.isNaN(this.origin)) this.origin = time;
    this.ring.push(time, value);
    return true;
  }
  readingTime(): number | null {
    return null; // the sample rate is not the tracker's to assume
  }
  readingAtOrAfter(time: number): number {
    return time;
  }
  clear(): void {
    this.origin = Number.NaN;
    this.ring.clear();
  }
  saveState(): StreamState {
    return { kind: 'readings', origin: Number.isNaN(this.origin) ? null : this.origin, ring: this.ring.saveState() };
  }
  loadState(state: StreamState): void {
    if (state.kind !== 'readings') return;
    this.origin = state.origin ?? Number.NaN;
    this.ring.loadState(state.ring);
  }
}

class AverageStream extends Stream {
  readonly averager: SubIntervalAverages;
  readonly ring: ReadingRing;
  constructor(seconds: number) {
    super();
    this.averager = new SubIntervalAverages(seconds);
    this.ring = this.averager.averages;
  }
  take(time: number, value: number): boolean {
    const closed = this.averager.push(time, value);
    this.origin = this.averager.originTime;
    return closed;
  }
  readingTime(ahead: number): number | null {
    const next = this.averager.nextAverageTime;
    return Number.isNaN(next) ? null : next + (ahead - 1) * this.averager.seconds;
  }
  readingAtOrAfter(time: number): number {
    const next = this.averager.nextAverageTime;
    if (Number.isNaN(next) || time <= next) return Number.isNaN(next) ? time : next;
    return next + Math.ceil((time - next - TIME_EPSILON) / this.averager.seconds) * this.averager.seconds;
  }
  clear(): void {
    this.averager.clear();
    this.origin = Number.NaN;
  }
  saveState(): StreamState {
    return { kind: 'averages', state: this.averager.saveState() };
  }
  loadState(state: StreamState): void {
    if (state.kind !== 'averages') return;
    this.averager.loadState(state.state);
    this.origin = this.averager.originTime;
  }
}

class SampledStream extends Stream {
  readonly sampler: SampledReadings;
  readonly ring: ReadingRing;
  constructor(seconds: number) {
    super();
    this.sampler = new SampledReadings(seconds);
    this.ring = this.sampler.readings;
  }
  take(time: number, value: number): boolean {
    const taken = this.sampler.push(time, value);
    this.origin = this.sampler.originTime;
    return taken;
  }
  readingTime(ahead: number): number | null {
    const next = this.sampler.nextReadingTime;
    return Number.isNaN(next) ? null : next + (ahead - 1) * this.sampler.seconds;
  }
  readingAtOrAfter(time: number): number {
    const next = this.sampler.nextReadingTime;
    if (Number.isNaN(next) || time <= next) return Number.isNaN(next) ? time : next;
    return next + Math.ceil((time - next - TIME_EPSILON) / this.sampler.seconds) * this.sampler.seconds;
  }
  clear(): void {
    this.sampler.clear();
    this.origin = Number.NaN;
  }
  saveState(): StreamState {
    return { kind: 'sampled', state: this.sampler.saveState() };
  }
  loadState(state: StreamState): void {
    if (state.kind !== 'sampled') return;
    this.sampler.loadState(state.state);
    this.origin = this.sampler.originTime;
  }
}

class RuleRuntime extends CriterionEvaluator {
  readonly stream: Stream;
  readonly strict: boolean;
  /** Duration of the window, NaN for a count window. */
  readonly windowSeconds: number;
  /** Length of a count window, 0 for a duration window. */
  readonly windowReadings: number;
  readonly minReadings: number;
  readonly holdSeconds: number;
  covered = false;
  met = false;
  since = Number.NaN;
  holds = false;
  worstMargin = Number.NaN;
  dirty = false;

  constructor(spec: CriterionSpec, stream: Stream, window: SlidingWindow) {
    super(spec, window);
    this.stream = stream;
    this.strict = spec.comparison === 'less-than';
    this.windowSeconds = spec.window.kind === 'seconds' ? spec.window.seconds : Number.NaN;
    this.windowReadings = spec.window.kind === 'readings' ? spec.window.readings : 0;
    this.minReadings = spec.minReadings;
    this.holdSeconds = spec.holdSeconds;
  }

  saveState(): RuleRuntimeState {
    return {
      value: nullIfNaN(this.value),
      tolerance: nullIfNaN(this.tolerance),
      covered: this.covered,
      met: this.met,
      since: nullIfNaN(this.since),
      holds: this.holds,
      worstMargin: nullIfNaN(this.worstMargin),
      dirty: this.dirty,
    };
  }

  loadState(state: RuleRuntimeState): void {
    this.value = state.value ?? Number.NaN;
    this.tolerance = state.tolerance ?? Number.NaN;
    this.covered = state.covered;
    this.met = state.met;
    this.since = state.since ?? Number.NaN;
    this.holds = state.holds;
    this.worstMargin = state.worstMargin ?? Number.NaN;
    this.dirty = state.dirty;
  }
}

export class CriteriaTracker {
  readonly specs: readonly CriterionSpec[];
  private readonly streams: Stream[] = [];
  private readonly windows: SlidingWindow[] = [];
  private readonly rules: RuleRuntime[] = [];
  private readonly fingerprint: string;
  private testPointSetPoint: number | null;
  private received = 0;
  private ignoredCount = 0;
  private lateCount = 0;
  private lastTime = Number.NaN;

  /**
   * Throws a RangeError naming every problem when a spec is unusable or two share a name (the
   * configuration reader reports those per key path before a tracker is built).
   */
  constructor(specs: readonly CriterionSpec[], options: { setPoint?: number | null } = {}) {
    const problems: string[] = [];
    const names = new Set<string>();
    for (const spec of specs) {
      for (const p of criterionProblems(spec)) problems.push(`${spec.name}: ${p.key}: ${p.message}`);
      if (names.has(spec.name)) problems.push(`${spec.name}: the name is used twice`);
      names.add(spec.name);
    }
    if (problems.length > 0) throw new RangeError(`criteria tracker: ${problems.join('; ')}`);
    this.specs = specs.map((spec) => ({ ...spec }));
    this.fingerprint = JSON.stringify(this.specs);
    this.testPointSetPoint = options.setPoint ?? null;
    const streamsByKey = new Map<string, Stream>();
    const windowsByKey = new Map<string, { stream: Stream; spec: CriterionSpec; needs: WindowNeeds }>();
    for (const spec of this.specs) {
      const streamKey = streamKeyOf(spec);
      let stream = streamsByKey.get(streamKey);
      if (!stream) {
        stream = spec.basis.kind === 'readings' ? new SampleStream() : spec.basis.kind === 'averages' ? new AverageStream(spec.basis.seconds) : new SampledStream(spec.basis.seconds);
        streamsByKey.set(streamKey, stream);
        this.streams.push(stream);
      }
      const windowKey = windowKeyOf(spec);
      const needs = criterionNeeds(spec);
      const entry = windowsByKey.get(windowKey);
      if (entry) entry.needs = mergeNeeds(entry.needs, needs);
      else windowsByKey.set(windowKey, { stream, spec, needs });
    }
    const windowFor = new Map<string, SlidingWindow>();
    for (const [key, entry] of windowsByKey) {
      const span = entry.spec.basis.kind === 'averages' ? entry.spec.basis.seconds : 0;
      const window = new SlidingWindow(entry.stream.ring, entry.spec.window, entry.needs, span);
      entry.stream.windows.push(window);
      this.windows.push(window);
      windowFor.set(key, window);
    }
    for (const spec of this.specs) {
      this.rules.push(new RuleRuntime(spec, streamsByKey.get(streamKeyOf(spec)) as Stream, windowFor.get(windowKeyOf(spec)) as SlidingWindow));
    }
    this.refreshSetPoints();
  }

  /** Samples taken (ignored ones included): the index of the next sample. */
  get totalReceived(): number {
    return this.received;
  }

  /** Samples ignored for a non-finite value or time. */
  get ignored(): number {
    return this.ignoredCount;
  }

  /** Samples older than the newest, taken at the newest time. */
  get late(): number {
    return this.lateCount;
  }

  /** True when there is at least one rule and every rule holds. */
  get allHold(): boolean {
    return this.rules.length > 0 && this.rules.every((rule) => rule.holds);
  }

  /** The test point's set point, for rules that take it from there (null: none given). */
  get setPoint(): number | null {
    return this.testPointSetPoint;
  }

  /** Sets the test point's set point; rules that use it are re-evaluated at the next sample. */
  setSetPoint(value: number | null): void {
    const next = value !== null && Number.isFinite(value) ? value : null;
    if (next === this.testPointSetPoint) return;
    this.testPointSetPoint = next;
    this.refreshSetPoints();
    for (const rule of this.rules) if (rule.spec.setPoint.kind === 'test-point') rule.dirty = true;
  }

  /** Takes one sample; returns the events it caused (a shared empty array when none). */
  push(value: number, time: number): readonly CriterionEvent[] {
    const at = this.received++;
    if (!Number.isFinite(value) || !Number.isFinite(time)) {
      this.ignoredCount++;
      return NO_EVENTS;
    }
    if (time < this.lastTime) {
      time = this.lastTime;
      this.lateCount++;
    }
    this.lastTime = time;
    const streams = this.streams;
    for (let i = 0; i < streams.length; i++) (streams[i] as Stream).push(time, value);
    let events: CriterionEvent[] | null = null;
    const rules = this.rules;
    for (let i = 0; i < rules.length; i++) {
      const rule = rules[i] as RuleRuntime;
      if (rule.stream.changed || rule.dirty) {
        this.evaluate(rule);
        if (rule.met) {
          const margin = rule.tolerance - rule.value;
          if (Number.isNaN(rule.since)) {
            rule.since = time;
            rule.worstMargin = margin;
          } else if (margin < rule.worstMargin) rule.worstMargin = margin;
        }
      }
      if (rule.met) {
        if (!rule.holds && time - rule.since >= rule.holdSeconds - TIME_EPSILON) {
          rule.holds = true;
          (events ??= []).push({ kind: 'criterion-holds', at, time, rule: rule.spec.name, since: rule.since, value: rule.value, tolerance: rule.tolerance, margin: rule.tolerance - rule.value });
        }
      } else if (!Number.isNaN(rule.since)) {
        if (rule.holds) (events ??= []).push(this.lostEvent(rule, at, time, this.lostReason(rule)));
        rule.holds = false;
        rule.since = Number.NaN;
        rule.worstMargin = Number.NaN;
      }
    }
    return events ?? NO_EVENTS;
  }

  /**
   * Starts every rule afresh (a test point restarting the channel's window), from the next sample
   * on. Returns a criterion-lost event (at the next sample's index) for each rule that held.
   */
  restart(): readonly CriterionEvent[] {
    const events: CriterionEvent[] = [];
    const time = Number.isNaN(this.lastTime) ? 0 : this.lastTime;
    for (const rule of this.rules) {
      if (rule.holds) events.push(this.lostEvent(rule, this.received, time, 'restarted'));
      rule.value = Number.NaN;
      rule.tolerance = Number.NaN;
      rule.covered = false;
      rule.met = false;
      rule.since = Number.NaN;
      rule.holds = false;
      rule.worstMargin = Number.NaN;
      rule.dirty = false;
    }
    for (const stream of this.streams) stream.clear();
    for (const window of this.windows) window.clear();
    return events.length ? events : NO_EVENTS;
  }

  /** Live state of every rule, in configuration order. Reading it never changes the tracker. */
  states(): CriterionState[] {
    return this.rules.map((rule) => this.describe(rule));
  }

  state(name: string): CriterionState | undefined {
    const rule = this.rules.find((r) => r.spec.name === name);
    return rule ? this.describe(rule) : undefined;
  }

  saveState(): CriteriaTrackerState {
    return {
      kind: CRITERIA_STATE_KIND,
      version: CRITERIA_STATE_VERSION,
      fingerprint: this.fingerprint,
      received: this.received,
      ignored: this.ignoredCount,
      late: this.lateCount,
      lastTime: nullIfNaN(this.lastTime),
      testPointSetPoint: this.testPointSetPoint,
      streams: this.streams.map((stream) => stream.saveState()),
      windows: this.windows.map((window) => window.saveState()),
      rules: this.rules.map((rule) => rule.saveState()),
    };
  }

  /**
   * Restores a saved state. Returns false, and leaves the tracker as it was, when the state is of
   * another kind or version or belongs to other rules (the caller then replays the samples).
   */
  loadState(state: CriteriaTrackerState): boolean {
    if (!state || state.kind !== CRITERIA_STATE_KIND || state.version !== CRITERIA_STATE_VERSION || state.fingerprint !== this.fingerprint) return false;
    if (state.streams.length !== this.streams.length || state.windows.length !== this.windows.length || state.rules.length !== this.rules.length) return false;
    this.received = state.received;
    this.ignoredCount = state.ignored;
    this.lateCount = state.late;
    this.lastTime = state.lastTime ?? Number.NaN;
    this.testPointSetPoint = state.testPointSetPoint;
    this.refreshSetPoints();
    this.streams.forEach((stream, i) => stream.loadState(state.streams[i] as StreamState));
    this.windows.forEach((window, i) => window.loadState(state.windows[i] as SlidingWindowState));
    this.rules.forEach((rule, i) => rule.loadState(state.rules[i] as RuleRuntimeState));
    return true;
  }

  private refreshSetPoints(): void {
    for (const rule of this.rules) rule.setPoint = this.setPointOf(rule.spec) ?? Number.NaN;
  }

  private setPointOf(spec: CriterionSpec): number | null {
    const source = spec.setPoint;
    return source.kind === 'config' ? source.value : source.kind === 'test-point' ? this.testPointSetPoint : null;
  }

  private evaluate(rule: RuleRuntime): void {
    rule.dirty = false;
    const window = rule.window;
    const n = window.end - window.start;
    const seconds = rule.windowSeconds;
    rule.covered =
      n >= rule.minReadings && (!Number.isNaN(seconds) ? n > 0 && window.newestTime - rule.stream.origin >= seconds - TIME_EPSILON : n >= rule.windowReadings);
    rule.update();
    // NaN compares false: an undefined value or tolerance never meets the condition.
    rule.met = rule.covered && (rule.strict ? rule.value < rule.tolerance : rule.value <= rule.tolerance);
  }

  private lostReason(rule: RuleRuntime): string {
    if (Number.isNaN(rule.tolerance) && rule.spec.tolerance.relativeTo === 'setpoint' && this.setPointOf(rule.spec) === null) return 'no set point';
    if (Number.isNaN(rule.value)) return 'the statistic is undefined for the window';
    return `${format(rule.value)} ${rule.strict ? 'reached' : 'exceeds'} the tolerance ${format(rule.tolerance)}`;
  }

  private lostEvent(rule: RuleRuntime, at: number, time: number, reason: string): CriterionEvent {
    return {
      kind: 'criterion-lost',
      at,
      time,
      rule: rule.spec.name,
      heldSince: rule.since,
      value: nullIfNaN(rule.value),
      tolerance: nullIfNaN(rule.tolerance),
      margin: nullIfNaN(rule.tolerance - rule.value),
      reason,
    };
  }

  private describe(rule: RuleRuntime): CriterionState {
    const spec = rule.spec;
    const window = rule.window;
    const setPoint = this.setPointOf(spec);
    const since = nullIfNaN(rule.since);
    const holdsFrom = since === null ? null : since + spec.holdSeconds;
    const { earliest, pending } = this.outlook(rule, setPoint);
    const now = nullIfNaN(this.lastTime);
    return {
      name: spec.name,
      statistic: spec.statistic,
      preset: spec.preset,
      source: spec.source,
      wording: spec.wording,
      rule: `${spec.statistic} ${describeTolerance(spec)}`,
      holds: rule.holds,
      met: rule.met,
      since,
      holdsFrom,
      holdSeconds: spec.holdSeconds,
      value: nullIfNaN(rule.value),
      tolerance: nullIfNaN(rule.tolerance),
      comparison: spec.comparison,
      margin: nullIfNaN(rule.tolerance - rule.value),
      worstMargin: nullIfNaN(rule.worstMargin),
      setPoint,
      readings: window.count,
      earliestHoldTime: earliest,
      secondsToHold: earliest === null || now === null ? null : Math.max(0, earliest - now),
      pending,
      detail: statisticDetail(spec, window),
    };
  }

  /** The earliest time the rule can hold (a lower bound: the readings to come may not oblige), and why it does not hold yet. */
  private outlook(rule: RuleRuntime, setPoint: number | null): { earliest: number | null; pending: string | null } {
    const spec = rule.spec;
    const hold = spec.holdSeconds;
    const now = this.lastTime;
    if (rule.holds) return { earliest: now, pending: null };
    if (rule.met) return { earliest: rule.since + hold, pending: `met since ${format(rule.since)}; holds after ${format(hold)} s` };
    if (Number.isNaN(now)) return { earliest: null, pending: 'no readings yet' };
    const window = rule.window;
    const stream = rule.stream;
    const n = window.count;
    let earliest: number | null = now;
    const later = (time: number | null) => {
      if (earliest === null) return;
      earliest = time === null ? null : Math.max(earliest, time);
    };
    let pending: string | null = null;
    const bound = spec.window;
    if (bound.kind === 'seconds') {
      const covered = n > 0 ? window.newestTime - stream.origin : 0;
      if (n === 0 || covered < bound.seconds - TIME_EPSILON) {
        later(Number.isNaN(stream.origin) ? null : stream.origin + bound.seconds);
        pending = `the window covers ${format(Math.max(0, covered))} s of ${format(bound.seconds)} s`;
      }
    } else if (n < bound.readings) {
      later(stream.readingTime(bound.readings - n));
      pending = `${n} of ${bound.readings} readings`;
    }
    if (n < spec.minReadings) {
      later(stream.readingTime(spec.minReadings - n));
      pending ??= `${n} readings, ${spec.minReadings} needed`;
    }
    const tolerance = rule.tolerance;
    if (Number.isNaN(tolerance) && spec.tolerance.relativeTo === 'setpoint' && setPoint === null) return { earliest: null, pending: pending ?? 'no set point from the test point' };
    if (spec.setPoint.kind !== 'none' && setPoint === null && (spec.statistic === 'mean-deviation' || spec.statistic === 'setpoint-deviation')) return { earliest: null, pending: pending ?? 'no set point from the test point' };
    if (Number.isFinite(rule.value) && Number.isFinite(tolerance) && !(rule.strict ? rule.value < tolerance : rule.value <= tolerance)) {
      pending ??= `${format(rule.value)} ${rule.strict ? 'is not below' : 'exceeds'} the tolerance ${format(tolerance)}`;
      const seq = blockingReading(spec, window, setPoint, tolerance);
      if (seq >= 0) later(bound.kind === 'seconds' ? window.exitTime(seq) : stream.readingTime(seq - window.start + 1));
    } else if (!Number.isFinite(rule.value) && n >= statisticMinimum(spec)) pending ??= 'the statistic is undefined for the window';
    pending ??= 'waiting for the next reading';
    const met: number | null = earliest;
    if (met === null) return { earliest: null, pending };
    return { earliest: stream.readingAtOrAfter(met) + hold, pending };
  }
}

/** Rules on the same readings share a stream; rules on the same readings and window bound share a window. */
function streamKeyOf(spec: CriterionSpec): string {
  return spec.basis.kind === 'readings' ? 'readings' : `${spec.basis.kind}:${spec.basis.seconds}`;
}

function windowKeyOf(spec: CriterionSpec): string {
  return `${streamKeyOf(spec)}|${spec.window.kind}:${spec.window.kind === 'seconds' ? spec.window.seconds : spec.window.readings}`;
}

function mergeNeeds(a: WindowNeeds, b: WindowNeeds): WindowNeeds {
  return {
    extremes: a.extremes || b.extremes,
    moments: a.moments || b.moments,
    spread: a.spread || b.spread,
    regression: a.regression || b.regression,
    lags: [...new Set([...(a.lags ?? []), ...(b.lags ?? [])])],
  };
}

function nullIfNaN(x: number): number | null {
  return Number.isFinite(x) ? x : null;
}

function format(x: number): string {
  return Number.isFinite(x) ? String(+x.toPrecision(4)) : 'n/a';
}
