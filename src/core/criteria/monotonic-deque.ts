/**
 * Sliding minimum and maximum of a window in O(1) amortised per reading: two monotonic deques.
 *
 * Method: the upper deque holds, oldest first, the readings that can still become the window's
 * maximum: each is larger than every reading after it. A new reading first removes from the back
 * every held reading not larger than it (they can never be the maximum again while it stays), then
 * joins at the back; readings that leave the window leave from the front, and the front is the
 * maximum. The lower deque does the same for the minimum. Each reading enters and leaves each deque
 * once, so the cost is O(1) amortised per reading, O(window) at worst for a single one (a long
 * falling run, then a high value). D. Lemire (2006), "Streaming maximum-minimum filter using no
 * more than three comparisons per element", Nordic Journal of Computing 13(4), 328-339
 * (arXiv cs/0610046), gives this wedge and its comparison count.
 *
 * Ties: a new reading removes held readings equal to it, so among equal values the newest is
 * kept. That makes `newestAbove` and `newestBelow` exact: the newest reading beyond a threshold is
 * always held.
 *
 * Both deques live in one object over typed arrays (circular buffers that double when full): one
 * call per reading instead of two, measured about twice as fast as two deque objects in V8.
 * Memory: 16 bytes per held reading and deque, at most the window's length each.
 */
export interface SlidingExtremesState {
  upperSeqs: Float64Array;
  upperValues: Float64Array;
  lowerSeqs: Float64Array;
  lowerValues: Float64Array;
}

export class SlidingExtremes {
  /** The window's maximum (-Infinity when empty); a field, kept by push and expireBefore. */
  max = Number.NEGATIVE_INFINITY;
  /** The window's minimum (+Infinity when empty). */
  min = Number.POSITIVE_INFINITY;
  private upperSeqs: Float64Array;
  private upperValues: Float64Array;
  private upperHead = 0;
  private upperCount = 0;
  private upperMask: number;
  private lowerSeqs: Float64Array;
  private lowerValues: Float64Array;
  private lowerHead = 0;
  private lowerCount = 0;
  private lowerMask: number;

  constructor(initialCapacity = 16) {
    let capacity = 4;
    while (capacity < initialCapacity) capacity *= 2;
    this.upperSeqs = new Float64Array(capacity);
    this.upperValues = new Float64Array(capacity);
    this.upperMask = capacity - 1;
    this.lowerSeqs = new Float64Array(capacity);
    this.lowerValues = new Float64Array(capacity);
    this.lowerMask = capacity - 1;
  }

  /** Adds reading `seq` (sequence numbers must increase). */
  push(seq: number, value: number): void {
    let n = this.upperCount;
    let head = this.upperHead;
    let mask = this.upperMask;
    let values = this.upperValues;
    while (n > 0 && (values[(head + n - 1) & mask] as number) <= value) n--;
    if (n === values.length) {
      this.growUpper();
      head = 0;
      mask = this.upperMask;
      values = this.upperValues;
    }
    let slot = (head + n) & mask;
    this.upperSeqs[slot] = seq;
    values[slot] = value;
    this.upperCount = n + 1;

    n = this.lowerCount;
    head = this.lowerHead;
    mask = this.lowerMask;
    values = this.lowerValues;
    while (n > 0 && (values[(head + n - 1) & mask] as number) >= value) n--;
    if (n === values.length) {
      this.growLower();
      head = 0;
      mask = this.lowerMask;
      values = this.lowerValues;
    }
    slot = (head + n) & mask;
    this.lowerSeqs[slot] = seq;
    values[slot] = value;
    this.lowerCount = n + 1;
    this.settle();
  }

  /** Drops held readings with sequence numbers below `seq` (they left the window). */
  expireBefore(seq: number): void {
    while (this.upperCount > 0 && (this.upperSeqs[this.upperHead] as number) < seq) {
      this.upperHead = (this.upperHead + 1) & this.upperMask;
      this.upperCount--;
    }
    while (this.lowerCount > 0 && (this.lowerSeqs[this.lowerHead] as number) < seq) {
      this.lowerHead = (this.lowerHead + 1) & this.lowerMask;
      this.lowerCount--;
    }
    this.settle();
  }

  /** Sequence number of the maximum (the newest among equal maxima); -1 when empty. */
  get maxSeq(): number {
    return this.upperCount > 0 ? (this.upperSeqs[this.upperHead] as number) : -1;
  }

  /** Sequence number of the minimum (the newest among equal minima); -1 when empty. */
  get minSeq(): number {
    return this.lowerCount > 0 ? (this.lowerSeqs[this.lowerHead] as number) : -1;
  }

  /** Newest reading of the window above `threshold` (-1 if none). O(held readings) at most. */
  newestAbove(threshold: number): number {
    for (let i = this.upperCount - 1; i >= 0; i--) {
      const slot = (this.upperHead + i) & this.upperMask;
      if ((this.upperValues[slot] as number) > threshold) return this.upperSeqs[slot] as number;
    }
    return -1;
  }

  /** Newest reading of the window below `threshold` (-1 if none). O(held readings) at most. */
  newestBelow(threshold: number): number {
    for (let i = this.lowerCount - 1; i >= 0; i--) {
      const slot = (this.lowerHead + i) & this.lowerMask;
      if ((this.lowerValues[slot] as number) < threshold) return this.lowerSeqs[slot] as number;
    }
    return -1;
  }

  /**
   * The newest reading s such that the readings from s to the newest span more than `limit`
   * (max - min > limit), or -1 when the whole window spans no more than `limit`: the window's range
   * cannot come within `limit` before that reading has left. Walks both deques from the back,
   * O(held readings): each held reading is where a suffix maximum or minimum changes.
   */
  newestSpanBreak(limit: number): number {
    let i = this.upperCount - 1;
    let j = this.lowerCount - 1;
    let suffixMax = Number.NEGATIVE_INFINITY;
    let suffixMin = Number.POSITIVE_INFINITY;
    while (i >= 0 || j >= 0) {
      const upperSlot = (this.upperHead + i) & this.upperMask;
      const lowerSlot = (this.lowerHead + j) & this.lowerMask;
      const a = i >= 0 ? (this.upperSeqs[upperSlot] as number) : -1;
      const b = j >= 0 ? (this.lowerSeqs[lowerSlot] as number) : -1;
      const s = a > b ? a : b;
      if (a === s) {
        suffixMax = this.upperValues[upperSlot] as number;
        i--;
      }
      if (b === s) {
        suffixMin = this.lowerValues[lowerSlot] as number;
        j--;
      }
      if (suffixMax - suffixMin > limit) return s;
    }
    return -1;
  }

  clear(): void {
    this.upperHead = this.upperCount = 0;
    this.lowerHead = this.lowerCount = 0;
    this.settle();
  }

  /** Keeps `max` and `min` as fields: reading them on the hot path is a load, not a call. */
  private settle(): void {
    this.max = this.upperCount > 0 ? (this.upperValues[this.upperHead] as number) : Number.NEGATIVE_INFINITY;
    this.min = this.lowerCount > 0 ? (this.lowerValues[this.lowerHead] as number) : Number.POSITIVE_INFINITY;
  }

  saveState(): SlidingExtremesState {
    const copy = (seqs: Float64Array, values: Float64Array, head: number, count: number, mask: number) => {
      const s = new Float64Array(count);
      const v = new Float64Array(count);
      for (let i = 0; i < count; i++) {
        s[i] = seqs[(head + i) & mask] as number;
        v[i] = values[(head + i) & mask] as number;
      }
      return [s, v] as const;
    };
    const [upperSeqs, upperValues] = copy(this.upperSeqs, this.upperValues, this.upperHead, this.upperCount, this.upperMask);
    const [lowerSeqs, lowerValues] = copy(this.lowerSeqs, this.lowerValues, this.lowerHead, this.lowerCount, this.lowerMask);
    return { upperSeqs, upperValues, lowerSeqs, lowerValues };
  }

  loadState(state: SlidingExtremesState): void {
    const size = (n: number) => {
      let capacity = 4;
      while (capacity < n) capacity *= 2;
      return capacity;
    };
    const upper = size(state.upperSeqs.length);
    this.upperSeqs = new Float64Array(upper);
    this.upperValues = new Float64Array(upper);
    this.upperSeqs.set(state.upperSeqs);
    this.upperValues.set(state.upperValues);
    this.upperMask = upper - 1;
    this.upperHead = 0;
    this.upperCount = state.upperSeqs.length;
    const lower = size(state.lowerSeqs.length);
    this.lowerSeqs = new Float64Array(lower);
    this.lowerValues = new Float64Array(lower);
    this.lowerSeqs.set(state.lowerSeqs);
    this.lowerValues.set(state.lowerValues);
    this.lowerMask = lower - 1;
    this.lowerHead = 0;
    this.lowerCount = state.lowerSeqs.length;
    this.settle();
  }

  private growUpper(): void {
    const size = this.upperSeqs.length * 2;
    const seqs = new Float64Array(size);
    const values = new Float64Array(size);
    for (let i = 0; i < this.upperCount; i++) {
      seqs[i] = this.upperSeqs[(this.upperHead + i) & this.upperMask] as number;
      values[i] = this.upperValues[(this.upperHead + i) & this.upperMask] as number;
    }
    this.upperSeqs = seqs;
    this.upperValues = values;
    this.upperMask = size - 1;
    this.upperHead = 0;
  }

  private growLower(): void {
    const size = this.lowerSeqs.length * 2;
    const seqs = new Float64Array(size);
    const values = new Float64Array(size);
    for (let i = 0; i < this.lowerCount; i++) {
      seqs[i] = this.lowerSeqs[(this.lowerHead + i) & this.lowerMask] as number;
      values[i] = this.lowerValues[(this.lowerHead + i) & this.lowerMask] as number;
    }
    this.lowerSeqs = seqs;
    this.lowerValues = values;
    this.lowerMask = size - 1;
    this.lowerHead = 0;
  }
}
