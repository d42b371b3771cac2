import { LaggedChange } from './lagged-change.js';
import { SlidingExtremes, type SlidingExtremesState } from './monotonic-deque.js';
import type { ReadingRing } from './reading-ring.js';
import { TIME_EPSILON } from './time-grid.js';
import { WindowSums, type WindowSumsState } from './window-sums.js';

/**
 * Sliding window over a reading ring, bounded by a duration or by a number of readings, with the
 * running statistics its rules need: minimum and maximum (monotonic deques), mean and variance
 * (shifted compensated sums), least-squares slope against time, and the largest change between
 * readings k apart.
 *
 * A duration window holds the readings no older than `seconds` before the newest reading: it is
 * anchored at the newest reading, not at a clock, so it changes only when a reading arrives and the
 * result depends on the readings alone. A reading that stands for an interval (a sub-interval
 * average, stamped with the interval's end) is inside only when its whole interval is (`span`).
 * A count window holds the newest `readings` readings.
 *
 * After each reading the window's figures (first and newest reading, min, max, mean, variance,
 * slope, as kept) are worked out once and held in fields, so the rules sharing the window read
 * them without recomputing (and without calls that would box numbers in V8).
 *
 * Round-off: the sums are rebuilt exactly from the ring after four window lengths of removals (this
 * also moves the time anchor along, so times stay within a few windows of it), when the mean has drifted more than 1024 standard deviations
 * from the anchor (checked every 64 readings in windows of 512 or more), and when a reading that carried more than half the
 * sum of squares has left; the last two at most once per eighth of a window of readings, so
 * rebuilding stays O(1) amortised.
 *
 * Cost: O(1) amortised per reading. Memory: the deques and sums; the readings stay in the ring,
 * which the owner trims to the oldest `start` of the windows sharing it.
 */
export type WindowBound = { kind: 'seconds'; seconds: number } | { kind: 'readings'; readings: number };

export interface WindowNeeds {
  extremes?: boolean;
  /** The mean. */
  moments?: boolean;
  /** The variance as well (with moments or regression). */
  spread?: boolean;
  /** The mean and the least-squares slope. */
  regression?: boolean;
  /** Lags of the changes between readings k apart to keep. */
  lags?: readonly number[];
}

export interface SlidingWindowState {
  start: number;
  end: number;
  removals: number;
  pushes: number;
  extremes: SlidingExtremesState | null;
  sums: WindowSumsState | null;
  lagged: SlidingExtremesState[];
}

/** Smallest number of removals between two scheduled exact rebuilds of the sums. */
const MIN_REBUILD_REMOVALS = 64;

export class SlidingWindow {
  readonly ring: ReadingRing;
  readonly bound: WindowBound;
  /** Length of the interval each reading stands for (sub-interval averages), else 0. */
  readonly span: number;
  readonly extremes: SlidingExtremes | null;
  readonly sums: WindowSums | null;
  readonly lagged: readonly LaggedChange[];
  /** Sequence number of the oldest reading in the window. */
  start: number;
  /** One past the newest reading's sequence number. */
  end: number;
  // The window's figures after the last change (NaN when empty or not kept).
  firstTime = Number.NaN;
  firstValue = Number.NaN;
  newestTime = Number.NaN;
  newestValue = Number.NaN;
  min = Number.NaN;
  max = Number.NaN;
  mean = Number.NaN;
  /** Sample variance (divisor n - 1; 0 below two readings), when the window keeps it (`spread`). */
  variance = Number.NaN;
  /** Least-squares slope, value units per second (NaN below two readings or with one time). */
  slopePerSecond = Number.NaN;
  private readonly durationSeconds: number;
  private readonly countLimit: number;
  private readonly hasLags: boolean;
  private readonly keepsVariance: boolean;
  private removals = 0;
  private pushes = 0;
  private rebuildWanted = false;

  constructor(ring: ReadingRing, bound: WindowBound, needs: WindowNeeds, span = 0) {
    if (bound.kind === 'seconds' && !(bound.seconds > 0)) throw new RangeError('a duration window needs seconds above 0');
    if (bound.kind === 'readings' && !(Number.isInteger(bound.readings) && bound.readings >= 1)) throw new RangeError('a count window needs at least one reading');
    this.ring = ring;
    this.bound = bound;
    this.span = span;
    this.durationSeconds = bound.kind === 'seconds' ? bound.seconds : Number.NaN;
    this.countLimit = bound.kind === 'readings' ? bound.readings : 0;
    this.extremes = needs.extremes ? new SlidingExtremes() : null;
    this.sums = needs.moments || needs.regression ? new WindowSums(needs.regression === true) : null;
    this.lagged = [...new Set(needs.lags ?? [])].map((k) => new LaggedChange(k));
    this.hasLags = this.lagged.length > 0;
    this.keepsVariance = this.sums !== null && needs.spread === true;
    this.start = ring.nextSeq;
    this.end = ring.nextSeq;
  }

  /** Readings in the window. */
  get count(): number {
    return this.end - this.start;
  }

  /** Time at which the reading `seq` leaves a duration window (the newest time that still holds it). */
  exitTime(seq: number): number {
    return this.bound.kind === 'seconds' ? this.ring.timeAt(seq) - this.span + this.bound.seconds : Number.NaN;
  }

  /** Takes in the ring's newest reading (pushed just before) and lets old readings leave. */
  push(): void {
    const ring = this.ring;
    const seq = this.end++;
    const time = ring.timeAt(seq);
    const value = ring.valueAt(seq);
    const sums = this.sums;
    if (sums !== null) sums.add(time, value);
    if (this.extremes !== null) this.extremes.push(seq, value);
    // Old readings leave before the new change is paired, so no pair reaches outside.
    const before = this.start;
    const seconds = this.durationSeconds;
    let start = before;
    if (!Number.isNaN(seconds)) {
      const oldest = time - seconds - TIME_EPSILON + this.span;
      while (start < seq && ring.timeAt(start) < oldest) start++;
    } else if (seq + 1 - start > this.countLimit) start = seq + 1 - this.countLimit;
    if (sums !== null) for (let leaving = before; leaving < start; leaving++) this.leave(sums, leaving);
    this.start = start;
    if (this.start !== before && this.extremes !== null) this.extremes.expireBefore(this.start);
    if (this.hasLags) {
      for (let i = 0; i < this.lagged.length; i++) {
        const change = this.lagged[i] as LaggedChange;
        if (this.start !== before) change.expire(this.start);
        change.push(ring, seq, this.start);
      }
    }
    if (sums !== null) {
      const pushes = ++this.pushes;
      const count = this.end - this.start;
      if (this.removals >= 4 * count && this.removals >= MIN_REBUILD_REMOVALS) this.rebuild();
      // The drift test costs a division: in long windows every 64 readings is often enough.
      else if (pushes * 8 >= count && (this.rebuildWanted || ((count < 512 || (pushes & 63) === 0) && sums.drifted))) this.rebuild();
    }
    this.refresh();
  }

  /** Empties the window (the ring's readings stay until the owner drops them). */
  clear(): void {
    this.start = this.ring.nextSeq;
    this.end = this.ring.nextSeq;
    this.extremes?.clear();
    this.sums?.clear();
    for (const change of this.lagged) change.clear();
    this.removals = 0;
    this.pushes = 0;
    this.rebuildWanted = false;
    this.refresh();
  }

  saveState(): SlidingWindowState {
    return {
      start: this.start,
      end: this.end,
      removals: this.removals,
      pushes: this.pushes,
      extremes: this.extremes ? this.extremes.saveState() : null,
      sums: this.sums ? this.sums.saveState() : null,
      lagged: this.lagged.map((change) => change.saveState()),
    };
  }

  loadState(state: SlidingWindowState): void {
    this.start = state.start;
    this.end = state.end;
    this.removals = state.removals;
    this.pushes = state.pushes;
    this.rebuildWanted = false;
    if (this.extremes && state.extremes) this.extremes.loadState(state.extremes);
    if (this.sums && state.sums) this.sums.loadState(state.sums);
    this.lagged.forEach((change, i) => {
      const saved = state.lagged[i];
      if (saved) change.loadState(saved);
    });
    this.refresh();
  }

  private leave(sums: WindowSums, seq: number): void {
    const value = this.ring.valueAt(seq);
    // A reading that carries most of the sum of squares leaving: its round-off stays behind.
    if (sums.count > 2 && sums.dominates(value)) this.rebuildWanted = true;
    sums.remove(this.ring.timeAt(seq), value);
    this.removals++;
  }

  /** Recomputes the sums from the window's readings, anchored at its first time and its mean. */
  private rebuild(): void {
    const sums = this.sums as WindowSums;
    // The mean keeps its digits when the centred sums do not (a first-order sum): a good anchor.
    const mean = sums.mean;
    sums.reset(this.ring.timeAt(this.start), Number.isFinite(mean) ? mean : this.ring.valueAt(this.end - 1));
    for (let seq = this.start; seq < this.end; seq++) sums.add(this.ring.timeAt(seq), this.ring.valueAt(seq));
    this.removals = 0;
    this.pushes = 0;
    this.rebuildWanted = false;
  }

  private refresh(): void {
    const n = this.end - this.start;
    if (n === 0) {
      this.firstTime = this.firstValue = this.newestTime = this.newestValue = Number.NaN;
      this.min = this.max = this.mean = this.variance = this.slopePerSecond = Number.NaN;
      return;
    }
    const ring = this.ring;
    this.firstTime = ring.timeAt(this.start);
    this.firstValue = ring.valueAt(this.start);
    this.newestTime = ring.timeAt(this.end - 1);
    this.newestValue = ring.valueAt(this.end - 1);
    const extremes = this.extremes;
    if (extremes !== null) {
      this.min = extremes.min;
      this.max = extremes.max;
    }
    const sums = this.sums;
    if (sums !== null) {
      sums.settle(this.keepsVariance);
      this.mean = sums.settledMean;
      this.variance = sums.settledVariance;
      this.slopePerSecond = sums.settledSlope;
    }
  }
}
