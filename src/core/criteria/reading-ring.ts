/**
 * Reading ring: the readings of one stream (individual samples, sub-interval averages or readings
 * taken at a sampling interval), oldest first, each with its time, addressed by a sequence number.
 *
 * Every reading gets the next sequence number (0, 1, 2, ...) when it is pushed, and keeps it while
 * it stays in the ring; windows and monotonic deques refer to readings by that number, so several
 * windows of different lengths can share one ring. The owner drops the readings no window needs any
 * more with `dropBefore`. Times must not decrease (the criteria tracker clamps a late sample to the
 * newest time before it gets here).
 *
 * Storage: two Float64Arrays (times, values) used as one circular buffer that doubles when full.
 * Cost: push, dropBefore (per dropped reading), timeAt and valueAt are O(1); growing is amortised
 * O(1). Memory: 16 bytes per slot.
 */
export interface ReadingRingState {
  /** Sequence number of the oldest reading held. */
  firstSeq: number;
  times: Float64Array;
  values: Float64Array;
}

export class ReadingRing {
  private timeSlots: Float64Array;
  private valueSlots: Float64Array;
  /** Slot of the oldest reading. */
  private head = 0;
  private count = 0;
  /** Sequence number of the oldest reading held (the next one's when empty). */
  private first = 0;
  /** Slot mask: capacity is a power of two. */
  private mask: number;

  constructor(initialCapacity = 64) {
    const capacity = powerOfTwoAtLeast(Math.max(4, initialCapacity));
    this.timeSlots = new Float64Array(capacity);
    this.valueSlots = new Float64Array(capacity);
    this.mask = capacity - 1;
  }

  /** Readings held. */
  get length(): number {
    return this.count;
  }

  /** Sequence number of the oldest reading held. */
  get firstSeq(): number {
    return this.first;
  }

  /** Sequence number the next pushed reading will get (one past the newest). */
  get nextSeq(): number {
    return this.first + this.count;
  }

  /** Appends a reading and returns its sequence number. */
  push(time: number, value: number): number {
    if (this.count === this.timeSlots.length) this.grow();
    const slot = (this.head + this.count) & this.mask;
    this.timeSlots[slot] = time;
    this.valueSlots[slot] = value;
    this.count++;
    return this.first + this.count - 1;
  }

  /** Time of the reading with sequence number `seq` (no bounds check on the hot path). */
  timeAt(seq: number): number {
    return this.timeSlots[(this.head + seq - this.first) & this.mask] as number;
  }

  /** Value of the reading with sequence number `seq` (no bounds check on the hot path). */
  valueAt(seq: number): number {
    return this.valueSlots[(this.head + seq - this.first) & this.mask] as number;
  }

  /** Time of the newest reading (NaN when empty). */
  get newestTime(): number {
    return this.count > 0 ? this.timeAt(this.first + this.count - 1) : Number.NaN;
  }

  /** Drops every reading with a sequence number below `seq`. */
  dropBefore(seq: number): void {
    const drop = Math.min(seq - this.first, this.count);
    if (drop <= 0) return;
    this.head = (this.head + drop) & this.mask;
    this.count -= drop;
    this.first += drop;
  }

  /** Removes every reading; sequence numbers continue from where they were. */
  clear(): void {
    this.first += this.count;
    this.head = 0;
    this.count = 0;
  }

  /** Plain-data state: the readings held, oldest first, and the oldest one's sequence number. */
  saveState(): ReadingRingState {
    const times = new Float64Array(this.count);
    const values = new Float64Array(this.count);
    for (let i = 0; i < this.count; i++) {
      times[i] = this.timeAt(this.first + i);
      values[i] = this.valueAt(this.first + i);
    }
    return { firstSeq: this.first, times, values };
  }

  loadState(state: ReadingRingState): void {
    const count = state.times.length;
    const capacity = powerOfTwoAtLeast(Math.max(4, count, this.timeSlots.length));
    this.timeSlots = new Float64Array(capacity);
    this.valueSlots = new Float64Array(capacity);
    this.mask = capacity - 1;
    this.timeSlots.set(state.times);
    this.valueSlots.set(state.values);
    this.head = 0;
    this.count = count;
    this.first = state.firstSeq;
  }

  private grow(): void {
    const size = this.timeSlots.length * 2;
    const times = new Float64Array(size);
    const values = new Float64Array(size);
    for (let i = 0; i < this.count; i++) {
      const slot = (this.head + i) & this.mask;
      times[i] = this.timeSlots[slot] as number;
      values[i] = this.valueSlots[slot] as number;
    }
    this.timeSlots = times;
    this.valueSlots = values;
    this.mask = size - 1;
    this.head = 0;
  }
}

function powerOfTwoAtLeast(n: number): number {
  let size = 1;
  while (size < n) size *= 2;
  return size;
}
