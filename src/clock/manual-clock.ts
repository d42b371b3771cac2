import type { Clock } from '../ports/clock.js';

/**
 * A clock that moves only when told (tests): `advance(ms)` moves both times and fires the timers
 * that fall due, in order of their due time (then of setting), each at its own due time.
 */
export class ManualClock implements Clock {
  private readonly wallMs: number;
  private elapsedMs = 0;
  private timers: { dueMs: number; order: number; callback: () => void }[] = [];
  private order = 0;

  constructor(startMs = 1_790_000_000_000) {
    this.wallMs = startMs;
  }

  now(): number {
    return this.wallMs + this.elapsedMs;
  }

  monotonicMs(): number {
    return this.elapsedMs;
  }

  setTimer(delayMs: number, callback: () => void): () => void {
    const timer = { dueMs: this.elapsedMs + Math.max(0, delayMs), order: this.order++, callback };
    this.timers.push(timer);
    return () => {
      this.timers = this.timers.filter((t) => t !== timer);
    };
  }

  /** Moves time forward by `ms`, firing what falls due (timers set by a callback fire too when due). */
  advance(ms: number): void {
    const end = this.elapsedMs + Math.max(0, ms);
    for (;;) {
      let next: (typeof this.timers)[number] | undefined;
      for (const timer of this.timers) if (timer.dueMs <= end && (next === undefined || timer.dueMs < next.dueMs || (timer.dueMs === next.dueMs && timer.order < next.order))) next = timer;
      if (next === undefined) break;
      this.timers = this.timers.filter((t) => t !== next);
      this.elapsedMs = Math.max(this.elapsedMs, next.dueMs);
      next.callback();
    }
    this.elapsedMs = end;
  }

}
