import { ReadingRing, type ReadingRingState } from './reading-ring.js';
import { gridIndex } from './time-grid.js';

/**
 * Sub-interval averages: the mean of the readings in each sub-interval of a given length, kept as a
 * ring, for rules such as "average values over successive periods of 30 s compared with the mean of
 * the test period".
 *
 * The sub-intervals are [origin + jL, origin + (j + 1)L), with the origin at the first sample after
 * construction (or `clear`), so a test point's averages start with it. A sub-interval's average is
 * known, and pushed to `averages` with the time of the sub-interval's end, when the first sample at
 * or after that end arrives (nothing here reads a clock). A sub-interval without samples (a gap)
 * has no average: the next average follows the previous one in the ring regardless. Within a
 * sub-interval the sum is kept shifted by its first sample, so large offsets cost no digits.
 *
 * Cost: O(1) per sample. Memory: the ring of averages, 16 bytes each; the owner drops those no
 * window needs (`averages.dropBefore`), or `keep` bounds them.
 */
export interface SubIntervalAveragesState {
  origin: number;
  index: number;
  shift: number;
  sum: number;
  count: number;
  averages: ReadingRingState;
}

export class SubIntervalAverages {
  readonly seconds: number;
  /** Closed averages, oldest first; time = the end of the sub-interval. */
  readonly averages = new ReadingRing();
  private readonly keep: number;
  private origin = Number.NaN;
  private index = 0;
  private shift = 0;
  private sum = 0;
  private count = 0;

  /** `keep`: most averages held (older ones are dropped); unbounded when the owner trims. */
  constructor(seconds: number, keep = Number.POSITIVE_INFINITY) {
    if (!(seconds > 0) || !Number.isFinite(seconds)) throw new RangeError('sub-interval averages require a length above 0 seconds');
    this.seconds = seconds;
    this.keep = keep;
  }

  /** Start of the first sub-interval (NaN before the first sample). */
  get originTime(): number {
    return this.origin;
  }

  /** End of the sub-interval now filling: the time of the next average (NaN before the first sample). */
  get nextAverageTime(): number {
    return this.origin + (this.index + 1) * this.seconds;
  }

  /** Samples in the sub-interval now filling. */
  get pendingCount(): number {
    return this.count;
  }

  /** Adds a sample; returns true when it closed a sub-interval and a new average entered the ring. */
  push(time: number, value: number): boolean {
    if (Number.isNaN(this.origin)) {
      this.origin = time;
      this.index = 0;
      this.start(value);
      return false;
    }
    const j = gridIndex(time, this.origin, this.seconds);
    if (j <= this.index) {
      this.sum += value - this.shift;
      this.count++;
      return false;
    }
    let closed = false;
    if (this.count > 0) {
      this.averages.push(this.origin + (this.index + 1) * this.seconds, this.shift + this.sum / this.count);
      if (this.averages.length > this.keep) this.averages.dropBefore(this.averages.nextSeq - this.keep);
      closed = true;
    }
    this.index = j;
    this.start(value);
    return closed;
  }

  clear(): void {
    this.origin = Number.NaN;
    this.index = 0;
    this.count = 0;
    this.sum = 0;
    this.averages.clear();
  }

  saveState(): SubIntervalAveragesState {
    return { origin: this.origin, index: this.index, shift: this.shift, sum: this.sum, count: this.count, averages: this.averages.saveState() };
  }

  loadState(state: SubIntervalAveragesState): void {
    this.origin = state.origin;
    this.index = state.index;
    this.shift = state.shift;
    this.sum = state.sum;
    this.count = state.count;
    this.averages.loadState(state.averages);
  }

  private start(value: number): void {
    this.shift = value;
    this.sum = 0;
    this.count = 1;
  }
}
