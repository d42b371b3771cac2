import { expectRecord, type StateRecord } from '../state/record.js';

/**
 * Block history: the means of equal blocks of every sample since a start index, at a resolution
 * that halves whenever the record outgrows the capacity (neighbouring blocks are merged in pairs).
 *
 * Why: a growing window drops its warm-up, but the warm-up is exactly what tells how long the
 * transient lasts. The transient fit (core/stationarity/transient-fit.ts) reads this history, so
 * the samples already cut still inform where the cut belongs as the record grows.
 * Numerics: values enter shifted by the first sample, so an offset costs no digits; a block mean is
 *   a plain sum over at most 2^k samples (k the number of merges).
 * Cost: O(1) amortised per sample (a merge touches every block, once per doubling of the record).
 * Memory: `capacity` doubles (4 KiB at the default 512).
 */
export interface BlockHistoryState extends StateRecord<'block-history', 1> {
  start: number;
  shift: number;
  blockSize: number;
  count: number;
  sums: Float64Array;
  partialSum: number;
  partialCount: number;
}

export class BlockHistory {
  readonly capacity: number;
  /** Absolute index of the first sample. */
  start = 0;
  /** Value subtracted from every sample (the first one). */
  shift = Number.NaN;
  /** Samples per complete block. */
  blockSize = 1;
  /** Complete blocks. */
  count = 0;
  private sums: Float64Array;
  private partialSum = 0;
  private partialCount = 0;

  constructor(capacity = 512) {
    if (!Number.isInteger(capacity) || capacity < 16 || capacity % 2 !== 0) throw new RangeError('block history capacity must be an even integer of at least 16');
    this.capacity = capacity;
    this.sums = new Float64Array(capacity);
  }

  /** Forgets everything; the next sample gets absolute index `start`. */
  clear(start: number): void {
    this.start = start;
    this.shift = Number.NaN;
    this.blockSize = 1;
    this.count = 0;
    this.partialSum = 0;
    this.partialCount = 0;
  }

  /** Samples recorded (complete blocks and the partial one). */
  get length(): number {
    return this.count * this.blockSize + this.partialCount;
  }

  push(value: number): void {
    if (Number.isNaN(this.shift)) this.shift = value;
    this.partialSum += value - this.shift;
    if (++this.partialCount < this.blockSize) return;
    if (this.count === this.capacity) {
      // The block just completed becomes the first half of a block of the doubled size.
      this.merge();
      return;
    }
    this.sums[this.count++] = this.partialSum;
    this.partialSum = 0;
    this.partialCount = 0;
  }

  /** Rebuilds from a record of values that begins at absolute index `start`. O(values). */
  rebuild(values: ArrayLike<number>, start: number): void {
    this.clear(start);
    for (let i = 0; i < values.length; i++) this.push(values[i] as number);
  }

  /** Means of the complete blocks (a copy, unshifted). */
  means(): Float64Array {
    const out = new Float64Array(this.count);
    for (let k = 0; k < this.count; k++) out[k] = (this.sums[k] as number) / this.blockSize + this.shift;
    return out;
  }

  saveState(): BlockHistoryState {
    return { record: 'block-history', version: 1, start: this.start, shift: this.shift, blockSize: this.blockSize, count: this.count, sums: this.sums.slice(0, this.count), partialSum: this.partialSum, partialCount: this.partialCount };
  }

  /** @throws RangeError for a record of another name or version. */
  loadState(state: BlockHistoryState): void {
    expectRecord(state, 'block-history', 1);
    this.start = state.start;
    this.shift = state.shift;
    this.blockSize = state.blockSize;
    this.count = state.count;
    this.sums.fill(0);
    this.sums.set(state.sums);
    this.partialSum = state.partialSum;
    this.partialCount = state.partialCount;
  }

  /** Halves the resolution: pairs of blocks become one; the partial block keeps its samples. */
  private merge(): void {
    const half = this.count / 2;
    for (let k = 0; k < half; k++) this.sums[k] = (this.sums[2 * k] as number) + (this.sums[2 * k + 1] as number);
    this.count = half;
    this.blockSize *= 2;
  }
}
