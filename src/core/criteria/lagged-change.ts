import { SlidingExtremes, type SlidingExtremesState } from './monotonic-deque.js';
import type { ReadingRing } from './reading-ring.js';

/**
 * Change between readings k intervals apart, the largest over a sliding window.
 *
 * For readings r_0, r_1, ... (individual samples, readings taken at a sampling interval, or
 * sub-interval averages) the changes are d_i = r_i - r_(i-k). A window from reading s holds the
 * changes whose both readings are inside it (i - k >= s); their maximum (largest rise) and minimum
 * (largest fall) come from a monotonic deque pair over the d_i (see monotonic-deque.ts), so the
 * largest change is O(1) amortised per reading. With k = 1 on sub-interval averages this is the
 * change between successive averages; on readings taken every 15 min with a window of two
 * readings it is "the change between two readings 15 min apart"; over a window of three readings
 * with direction "rise" it answers "no upward change over three successive readings".
 *
 * Cost: O(1) amortised per reading; memory: at most 32 bytes per reading of the window.
 */
export type ChangeDirection = 'any' | 'rise' | 'fall';

export class LaggedChange {
  readonly lag: number;
  private readonly changes = new SlidingExtremes();

  constructor(lag: number) {
    if (!Number.isInteger(lag) || lag < 1) throw new RangeError('lagged change requires a whole lag of at least 1');
    this.lag = lag;
  }

  /** Adds the change ending at reading `seq` when its earlier reading is still in the window. */
  push(ring: ReadingRing, seq: number, windowStart: number): void {
    const earlier = seq - this.lag;
    if (earlier < windowStart) return;
    this.changes.push(seq, ring.valueAt(seq) - ring.valueAt(earlier));
  }

  /** The window now starts at reading `windowStart`: changes reaching before it leave. */
  expire(windowStart: number): void {
    this.changes.expireBefore(windowStart + this.lag);
  }

  /** Largest change in the direction asked (a rise is positive, a fall is positive for 'fall'); -Infinity when no pair. */
  largest(direction: ChangeDirection): number {
    if (direction === 'rise') return this.changes.max;
    if (direction === 'fall') return -this.changes.min + 0;
    const up = this.changes.max;
    const down = -this.changes.min + 0;
    return up > down ? up : down;
  }

  /**
   * The earlier reading of the newest pair whose change exceeds `limit` in the direction asked
   * (-1 if none): the largest change cannot come within `limit` before that reading has left.
   */
  newestOffendingStart(direction: ChangeDirection, limit: number): number {
    const above = direction === 'fall' ? -1 : this.changes.newestAbove(limit);
    const below = direction === 'rise' ? -1 : this.changes.newestBelow(-limit);
    const newest = above > below ? above : below;
    return newest < 0 ? -1 : newest - this.lag;
  }

  clear(): void {
    this.changes.clear();
  }

  saveState(): SlidingExtremesState {
    return this.changes.saveState();
  }

  loadState(state: SlidingExtremesState): void {
    this.changes.loadState(state);
  }
}
