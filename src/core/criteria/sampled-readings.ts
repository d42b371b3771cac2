import { ReadingRing, type ReadingRingState } from './reading-ring.js';
import { gridIndex } from './time-grid.js';

/**
 * Readings taken at a sampling interval, as a procedure says "readings taken every 5 minutes":
 * from a stream of samples, the first sample at or after each tick of a grid of step S, with the
 * grid's origin at the first sample after construction (or `clear`).
 *
 * A reading is the sample itself, with its own time (a reading is read, not interpolated). The
 * ticks stay on the grid, so the spacing does not drift with the sample times: readings are S
 * apart to within one sample interval. After a gap that skips ticks, the first sample after the
 * gap is taken and the next tick is the first grid tick after it.
 *
 * Cost: O(1) per sample. Memory: the ring of readings, 16 bytes each; the owner drops those no
 * window needs (`readings.dropBefore`), or `keep` bounds them.
 */
export interface SampledReadingsState {
  origin: number;
  nextTick: number;
  readings: ReadingRingState;
}

export class SampledReadings {
  readonly seconds: number;
  /** The readings taken, oldest first. */
  readonly readings = new ReadingRing();
  private readonly keep: number;
  private origin = Number.NaN;
  /** Index of the next grid tick. */
  private nextTick = 0;

  constructor(seconds: number, keep = Number.POSITIVE_INFINITY) {
    if (!(seconds > 0) || !Number.isFinite(seconds)) throw new RangeError('sampled readings require an interval above 0 seconds');
    this.seconds = seconds;
    this.keep = keep;
  }

  /** Time of the first reading (NaN before it). */
  get originTime(): number {
    return this.origin;
  }

  /** Earliest time of the next reading (NaN before the first sample). */
  get nextReadingTime(): number {
    return this.origin + this.nextTick * this.seconds;
  }

  /** Offers a sample; returns true when it was taken as a reading. */
  push(time: number, value: number): boolean {
    if (Number.isNaN(this.origin)) {
      this.origin = time;
      this.nextTick = 1;
    } else {
      const tick = gridIndex(time, this.origin, this.seconds);
      if (tick < this.nextTick) return false;
      this.nextTick = tick + 1;
    }
    this.readings.push(time, value);
    if (this.readings.length > this.keep) this.readings.dropBefore(this.readings.nextSeq - this.keep);
    return true;
  }

  clear(): void {
    this.origin = Number.NaN;
    this.nextTick = 0;
    this.readings.clear();
  }

  saveState(): SampledReadingsState {
    return { origin: this.origin, nextTick: this.nextTick, readings: this.readings.saveState() };
  }

  loadState(state: SampledReadingsState): void {
    this.origin = state.origin;
    this.nextTick = state.nextTick;
    this.readings.loadState(state.readings);
  }
}
