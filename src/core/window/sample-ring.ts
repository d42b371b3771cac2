import { expectRecord, type StateRecord } from '../state/record.js';

/**
 * Sample ring: the samples of one channel's averaging window, oldest first, with their times.
 *
 * A double-ended store over two Float64Arrays (values and times) used as circular buffers.
 * Samples enter at the back and leave from the front (sliding windows, warm-up truncation).
 * Capacity grows by doubling up to `maxCapacity`; a sliding window of W samples is created
 * with `initialCapacity = maxCapacity = W` so it never reallocates.
 *
 * Cost: push and shift are O(1) (amortised O(1) while growing); `at(i)` is O(1).
 * Memory: 16 bytes per slot (8 for the value, 8 for the time).
 */
export interface SampleRingState extends StateRecord<'sample-ring', 1> {
  values: Float64Array;
  times: Float64Array;
}

export class SampleRing {
  private valueSlots: Float64Array;
  private timeSlots: Float64Array;
  private head = 0; // slot of the oldest sample
  private count = 0;
  readonly maxCapacity: number;

  constructor(initialCapacity: number, maxCapacity: number) {
    if (!(maxCapacity >= 1) || !Number.isInteger(maxCapacity)) {
      throw new RangeError('sample ring requires an integer maxCapacity of at least 1');
    }
    const start = Math.max(1, Math.min(initialCapacity, maxCapacity));
    this.valueSlots = new Float64Array(start);
    this.timeSlots = new Float64Array(start);
    this.maxCapacity = maxCapacity;
  }

  get length(): number {
    return this.count;
  }

  get capacity(): number {
    return this.valueSlots.length;
  }

  get isFull(): boolean {
    return this.count === this.maxCapacity;
  }

  /** Appends a sample; the caller must shift first when the ring is full. */
  push(value: number, time: number): void {
    if (this.count === this.valueSlots.length) this.grow();
    let slot = this.head + this.count;
    if (slot >= this.valueSlots.length) slot -= this.valueSlots.length;
    this.valueSlots[slot] = value;
    this.timeSlots[slot] = time;
    this.count++;
  }

  /** Drops the oldest sample. */
  shift(): void {
    if (this.count === 0) return;
    this.head++;
    if (this.head === this.valueSlots.length) this.head = 0;
    this.count--;
  }

  /** Value of the i-th oldest sample (0 = oldest). No bounds check on the hot path. */
  at(i: number): number {
    let slot = this.head + i;
    if (slot >= this.valueSlots.length) slot -= this.valueSlots.length;
    return this.valueSlots[slot] as number;
  }

  /** Time of the i-th oldest sample. */
  timeAt(i: number): number {
    let slot = this.head + i;
    if (slot >= this.timeSlots.length) slot -= this.timeSlots.length;
    return this.timeSlots[slot] as number;
  }

  /** Copies the values, oldest first, into a new array (or `out` when given and large enough). */
  copyValues(out?: Float64Array): Float64Array {
    const target = out && out.length >= this.count ? out : new Float64Array(this.count);
    copyRing(this.valueSlots, this.head, this.count, target);
    return target.length === this.count ? target : target.subarray(0, this.count);
  }

  /** Copies the times, oldest first. */
  copyTimes(): Float64Array {
    const target = new Float64Array(this.count);
    copyRing(this.timeSlots, this.head, this.count, target);
    return target;
  }

  /** Removes every sample. */
  clear(): void {
    this.head = 0;
    this.count = 0;
  }

  /** The newest `count` values (all when fewer), oldest first (a copy). O(count). */
  copyNewestValues(count: number): Float64Array {
    const n = Math.min(count, this.count);
    const out = new Float64Array(n);
    let start = this.head + this.count - n;
    if (start >= this.valueSlots.length) start -= this.valueSlots.length;
    copyRing(this.valueSlots, start, n, out);
    return out;
  }

  /** Plain-data state (live samples only), for persistence. */
  saveState(): SampleRingState {
    return { record: 'sample-ring', version: 1, values: this.copyValues(), times: this.copyTimes() };
  }

  /** Restores a saved state; the ring then holds exactly those samples, oldest first. */
  loadState(state: SampleRingState): void {
    expectRecord(state, 'sample-ring', 1);
    const count = state.values.length;
    if (count > this.maxCapacity) throw new RangeError('sample ring state holds more samples than the ring can');
    const size = Math.max(this.valueSlots.length, Math.min(this.maxCapacity, Math.max(1, count)));
    if (size !== this.valueSlots.length) {
      this.valueSlots = new Float64Array(size);
      this.timeSlots = new Float64Array(size);
    }
    this.valueSlots.set(state.values);
    this.timeSlots.set(state.times);
    this.head = 0;
    this.count = count;
  }

  private grow(): void {
    const size = this.valueSlots.length;
    if (size >= this.maxCapacity) {
      throw new RangeError('sample ring is full: shift before push');
    }
    const next = Math.min(this.maxCapacity, size * 2);
    const values = new Float64Array(next);
    const times = new Float64Array(next);
    copyRing(this.valueSlots, this.head, this.count, values);
    copyRing(this.timeSlots, this.head, this.count, times);
    this.valueSlots = values;
    this.timeSlots = times;
    this.head = 0;
  }
}

function copyRing(source: Float64Array, head: number, count: number, target: Float64Array): void {
  const firstRun = Math.min(count, source.length - head);
  target.set(source.subarray(head, head + firstRun), 0);
  if (firstRun < count) target.set(source.subarray(0, count - firstRun), firstRun);
}
