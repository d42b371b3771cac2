import type { Clock } from '../ports/clock.js';

/**
 * The machine's clock: Date.now for wall-clock time, performance.now for durations, Node timers
 * (unreferenced: a pending retry or a flush never keeps the process alive on its own).
 */
export class SystemClock implements Clock {
  now(): number {
    return Date.now();
  }

  monotonicMs(): number {
    return performance.now();
  }

  setTimer(delayMs: number, callback: () => void): () => void {
    const timer = setTimeout(callback, Math.max(0, delayMs));
    timer.unref();
    return () => clearTimeout(timer);
  }
}
