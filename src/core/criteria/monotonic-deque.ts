/**
 * Monotonic deque: the running maximum of a sliding window in O(1) amortised per reading.
 *
 * Method: the deque holds, oldest first, the readings that can still become the window's maximum:
 * each one is larger than every reading after it. A new reading first removes from the back every
 * held reading that is not larger than it (they can never be the maximum again while it stays), then
 * joins at the back; readings that leave the window leave from the front. The front is the maximum.
 * Each reading enters and leaves once, so the cost is O(1) amortised per reading and O(window) in
 * the worst case for a single one (a long falling run then a high value). D. Lemire (2006),
 * "Streaming maximum-minimum filter using no more than three comparisons per element", Nordic
 * Journal of Computing 13(4), 328-339 (arXiv cs/0610046), gives this wedge and its comparison
 * count. The minimum is the maximum of the negated readings (`SlidingExtremes` keeps both).
 *
 * Ties: a new reading removes held readings equal to it, so among equal values the newest is kept.
 * That makes `newestAbove` exact: the newest reading above a threshold is always held.
 *
 * Memory: two Float64Arrays (sequence numbers, values) used as a circular buffer that doubles
 * when full: 16 bytes per held reading, at most the window's length.
 */
export interface MonotonicDequeState {
  seqs: Float64Array;
  values: Float64Array;
}

export class MonotonicDeque {
  private seqSlots: Float64Array;
  private valueSlots: Float64Array;
  private head = 0;
  private count = 0;
  private mask: number;

  constructor(initialCapacity = 16) {
    let capacity = 4;
    while (capacity < initialCapacity) capacity *= 2;
    this.seqSlots = new Float64Array(capacity);
    this.valueSlots = new Float64Array(capacity);
    this.mask = capacity - 1;
  }

  get length(): number {
    return this.count;
  }

  /** Adds the reading `seq` (sequence numbers must increase). */
  push(seq: number, value: number): void {
    // Pop from the back every held value not larger than the new one.
    while (this.count > 0 && (this.valueSlots[(this.head + this.count - 1) & this.mask] as number) <= value) this.count--;
    if (this.count === this.seqSlots.length) this.grow();
    const slot = (this.head + this.count) & this.mask;
    this.seqSlots[slot] = seq;
    this.valueSlots[slot] = value;
    this.count++;
  }

  /** Drops held readings with sequence numbers below `seq` (they left the window). */
  expireBefore(seq: number): void {
    while (this.count > 0 && (this.seqSlots[this.head] as number) < seq) {
      this.head = (this.head + 1) & this.mask;
      this.count--;
    }
  }

  /** The window's maximum (-Infinity when empty). */
  get max(): number {
    return this.count > 0 ? (this.valueSlots[this.head] as number) : Number.NEGATIVE_INFINITY;
  }

  /** Sequence number of the maximum (the newest among equal maxima); -1 when empty. */
  get maxSeq(): number {
    return this.count > 0 ? (this.seqSlots[this.head] as number) : -1;
  }

  /** Held element i, 0 = oldest (the maximum); values decrease with i. */
  seqAt(i: number): number {
    return this.seqSlots[(this.head + i) & this.mask] as number;
  }

  valueAt(i: number): number {
    return this.valueSlots[(this.head + i) & this.mask] as number;
  }

  /**
   * Sequence number of the newest reading in the window whose value is above `threshold`, or -1.
   * Walks from the back: O(held readings) at most, O(1) when the newest reading is above.
   */
  newestAbove(threshold: number): number {
    for (let i = this.count - 1; i >= 0; i--) {
      if (this.valueAt(i) > threshold) return this.seqAt(i);
    }
    return -1;
  }

  clear(): void {
    this.head = 0;
    this.count = 0;
  }

  saveState(): MonotonicDequeState {
    const seqs = new Float64Array(this.count);
    const values = new Float64Array(this.count);
    for (let i = 0; i < this.count; i++) {
      seqs[i] = this.seqAt(i);
      values[i] = this.valueAt(i);
    }
    return { seqs, values };
  }

  loadState(state: MonotonicDequeState): void {
    let capacity = 4;
    while (capacity < state.seqs.length) capacity *= 2;
    this.seqSlots = new Float64Array(capacity);
    this.valueSlots = new Float64Array(capacity);
    this.mask = capacity - 1;
    this.seqSlots.set(state.seqs);
    this.valueSlots.set(state.values);
    this.head = 0;
    this.count = state.seqs.length;
  }

  private grow(): void {
    const size = this.seqSlots.length * 2;
    const seqs = new Float64Array(size);
    const values = new Float64Array(size);
    for (let i = 0; i < this.count; i++) {
      seqs[i] = this.seqAt(i);
      values[i] = this.valueAt(i);
    }
    this.seqSlots = seqs;
    this.valueSlots = values;
    this.mask = size - 1;
    this.head = 0;
  }
}

/**
 * Sliding minimum and maximum of a window: one monotonic deque over the readings, one over their
 * negations. O(1) amortised per reading; see `MonotonicDeque`.
 */
export interface SlidingExtremesState {
  upper: MonotonicDequeState;
  lower: MonotonicDequeState;
}

export class SlidingExtremes {
  private readonly upper = new MonotonicDeque();
  /** Holds the negated readings, so its maximum is minus the window's minimum. */
  private readonly lower = new MonotonicDeque();

  push(seq: number, value: number): void {
    this.upper.push(seq, value);
    this.lower.push(seq, -value);
  }

  expireBefore(seq: number): void {
    this.upper.expireBefore(seq);
    this.lower.expireBefore(seq);
  }

  get max(): number {
    return this.upper.max;
  }

  get min(): number {
    return -this.lower.max + 0; // + 0: no -0 for a minimum of 0
  }

  get maxSeq(): number {
    return this.upper.maxSeq;
  }

  get minSeq(): number {
    return this.lower.maxSeq;
  }

  /** Newest reading above `threshold` (-1 if none). */
  newestAbove(threshold: number): number {
    return this.upper.newestAbove(threshold);
  }

  /** Newest reading below `threshold` (-1 if none). */
  newestBelow(threshold: number): number {
    return this.lower.newestAbove(-threshold);
  }

  /**
   * The newest reading s such that the readings from s to the newest span more than `limit`
   * (max - min > limit), or -1 when the whole window spans no more than `limit`. The window's range
   * cannot come within `limit` before that reading has left. Walks both deques from the back,
   * O(held readings): each held reading is where a suffix maximum or minimum changes.
   */
  newestSpanBreak(limit: number): number {
    let i = this.upper.length - 1;
    let j = this.lower.length - 1;
    let suffixMax = Number.NEGATIVE_INFINITY;
    let suffixMin = Number.POSITIVE_INFINITY;
    while (i >= 0 || j >= 0) {
      const a = i >= 0 ? this.upper.seqAt(i) : -1;
      const b = j >= 0 ? this.lower.seqAt(j) : -1;
      const s = a > b ? a : b;
      if (a === s) {
        suffixMax = this.upper.valueAt(i);
        i--;
      }
      if (b === s) {
        suffixMin = -this.lower.valueAt(j);
        j--;
      }
      if (suffixMax - suffixMin > limit) return s;
    }
    return -1;
  }

  clear(): void {
    this.upper.clear();
    this.lower.clear();
  }

  saveState(): SlidingExtremesState {
    return { upper: this.upper.saveState(), lower: this.lower.saveState() };
  }

  loadState(state: SlidingExtremesState): void {
    this.upper.loadState(state.upper);
    this.lower.loadState(state.lower);
  }
}
