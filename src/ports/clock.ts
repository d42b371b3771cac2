/**
 * The clock port: wall-clock time and timers. Implementations: SystemClock (src/clock) and
 * ManualClock (src/clock, tests: time moves only when the test says); the same contract suite
 * (test/contract/clock.contract.ts) runs against both. Nothing in src/core or src/engine reads a
 * clock: the daemon passes times in.
 *
 * Contract: `now()` is epoch milliseconds; `monotonicMs()` never decreases; a timer set for d ms
 * fires once, no earlier than d ms of monotonic time after it was set, unless cancelled first.
 */
export interface Clock {
  now(): number;
  monotonicMs(): number;
  /** Calls `callback` once after `delayMs`; the returned function cancels it (harmless after it fired). */
  setTimer(delayMs: number, callback: () => void): () => void;
}
