import { LaggedChange } from './lagged-change.js';
import { SlidingExtremes, type SlidingExtremesState } from './monotonic-deque.js';
import type { ReadingRing } from './reading-ring.js';
import { TIME_EPSILON } from './time-grid.js';
import { WindowSums, type WindowSumsState } from './window-sums.js';

/**
 * Sliding window over a reading ring, bounded by a duration or by a number of readings, with the
 * running statistics a rule needs: minimum and maximum (monotonic deques), mean and variance
 * (shifted compensated sums), least-squares slope against time, and the largest change between
 * readings k apart.
 *
 * A duration window holds the readings no older than `seconds` before the newest reading: it is
 * anchored at the newest reading, not at a clock, so it changes only when a reading arrives and the
 * result depends on the readings alone. A reading that stands for an interval (a sub-interval
 * average, stamped with the interval's end) is inside only when its whole interval is (`span`).
 * A count window holds the newest `readings` readings.
 *
 * Round-off: the sums are rebuilt exactly from the ring after a window's length of removals (this
 * also moves the time anchor along), when the mean has drifted more than 1024 standard deviations
 * from the anchor, and when a reading that dominated the sum of squares leaves; the last two at
 * most once per eighth of a window of readings, so rebuilding stays O(1) amortised.
 *
 * Cost: O(1) amortised per reading. Memory: the deques and sums; the readings stay in the ring,
 * which the owner trims to the oldest `start` of the windows sharing it.
 */
export type WindowBound = { kind: 'seconds'; seconds: number } | { kind: 'readings'; readings: number };

export interface WindowNeeds {
  extremes?: boolean;
  /** Mean and variance. */
  moments?: boolean;
  /** Mean, variance and the least-squares slope. */
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
  lagged: ReturnType<LaggedChange['saveState']>[];
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
  private removals = 0;
  private pushes = 0;
  private rebuildWanted = false;

  constructor(ring: ReadingRing, bound: WindowBound, needs: WindowNeeds, span = 0) {
    if (bound.kind === 'seconds' && !(bound.seconds > 0)) throw new RangeError('a duration window needs seconds above 0');
    if (bound.kind === 'readings' && !(Number.isInteger(bound.readings) && bound.readings >= 1)) throw new RangeError('a count window needs at least one reading');
    this.ring = ring;
    this.bound = bound;
    this.span = span;
    this.extremes = needs.extremes ? new SlidingExtremes() : null;
    this.sums = needs.moments || needs.regression ? new WindowSums(needs.regression === true) : null;
    this.lagged = [...new Set(needs.lags ?? [])].map((k) => new LaggedChange(k));
    this.start = ring.nextSeq;
    this.end = ring.nextSeq;
  }

  /** Readings in the window. */
  get count(): number {
    return this.end - this.start;
  }

  get firstTime(): number {
    return this.ring.timeAt(this.start);
  }

  get newestTime(): number {
    return this.ring.timeAt(this.end - 1);
  }

  get firstValue(): number {
    return this.ring.valueAt(this.start);
  }

  get newestValue(): number {
    return this.ring.valueAt(this.end - 1);
  }

  /** Time at which the reading `seq` leaves a duration window (the newest time that still holds it). */
  exitTime(seq: number): number {
    return this.bound.kind === 'seconds' ? this.ring.timeAt(seq) - this.span + this.bound.seconds : Number.NaN;
  }

  /** Takes in the ring's newest reading (pushed just before) and lets old readings leave. */
  push(): void {
    const seq = this.end++;
    const time = this.ring.timeAt(seq);
    const value = this.ring.valueAt(seq);
    const sums = this.sums;
    if (sums) sums.add(time, value);
    if (this.extremes) this.extremes.push(seq, value);
    // Let old readings leave before the new changes are paired, so no pair reaches outside.
    const before = this.start;
    if (this.bound.kind === 'seconds') {
      const oldest = time - this.bound.seconds - TIME_EPSILON + this.span;
      while (this.start < seq && this.ring.timeAt(this.start) < oldest) this.leave();
    } else {
      while (this.end - this.start > this.bound.readings) this.leave();
    }
    if (this.start !== before) {
      if (this.extremes) this.extremes.expireBefore(this.start);
      for (const change of this.lagged) change.expire(this.start);
    }
    for (const change of this.lagged) change.push(this.ring, seq, this.start);
    if (sums) {
      this.pushes++;
      const count = this.end - this.start;
      if (this.removals >= Math.max(count, MIN_REBUILD_REMOVALS)) this.rebuild();
      else if (this.pushes * 8 >= count && (this.rebuildWanted || sums.drifted)) this.rebuild();
    }
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
  }

  private leave(): void {
    const seq = this.start++;
    const sums = this.sums;
    if (sums) {
      const time = this.ring.timeAt(seq);
      const value = this.ring.valueAt(seq);
      // A reading that carries most of the sum of squares leaving: its round-off stays behind.
      if (!this.rebuildWanted && sums.count > 2) {
        const deviation = value - sums.mean;
        if (deviation * deviation * 2 > sums.squaredDeviations) this.rebuildWanted = true;
      }
      sums.remove(time, value);
      this.removals++;
    }
  }

  /** Recomputes the sums from the window's readings, anchored at its first time and its mean. */
  private rebuild(): void {
    const sums = this.sums as WindowSums;
    // The mean keeps its digits when the centred sums do not (first-order sum): a good anchor.
    const mean = sums.mean;
    const anchor = Number.isFinite(mean) ? mean : this.newestValue;
    sums.reset(this.firstTime, anchor);
    for (let seq = this.start; seq < this.end; seq++) sums.add(this.ring.timeAt(seq), this.ring.valueAt(seq));
    this.removals = 0;
    this.pushes = 0;
    this.rebuildWanted = false;
  }
}
