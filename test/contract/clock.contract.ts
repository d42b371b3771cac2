import { describe, expect, it } from 'vitest';
import type { Clock } from '../../src/ports/clock.js';

/**
 * The clock port's contract (src/ports/clock.ts), run against every implementation by
 * test/contract/clock.test.ts. A factory gives a clock and a way to let time pass on it.
 */
export interface ClockUnderTest {
  clock: Clock;
  /** Lets `ms` of time pass (really, or by moving a manual clock). */
  pass(ms: number): Promise<void>;
}

export function clockContract(name: string, make: () => ClockUnderTest): void {
  describe(`the clock port: ${name}`, () => {
    it('now() is epoch milliseconds; monotonicMs() never decreases', async () => {
      const { clock, pass } = make();
      expect(Number.isFinite(clock.now())).toBe(true);
      expect(clock.now()).toBeGreaterThan(Date.UTC(2020, 0, 1));
      let last = clock.monotonicMs();
      for (let i = 0; i < 50; i++) {
        if (i % 10 === 0) await pass(3);
        const now = clock.monotonicMs();
        expect(now).toBeGreaterThanOrEqual(last);
        last = now;
      }
    });

    it('a timer fires once, no earlier than its delay; cancelled before, it never fires; cancelling after is harmless', async () => {
      const { clock, pass } = make();
      const fired: number[] = [];
      const start = clock.monotonicMs();
      clock.setTimer(30, () => fired.push(clock.monotonicMs() - start));
      const cancel = clock.setTimer(30, () => fired.push(-1));
      cancel();
      await pass(10);
      expect(fired).toEqual([]);
      await pass(60);
      expect(fired).toHaveLength(1);
      expect(fired[0] as number).toBeGreaterThanOrEqual(29);
      await pass(60);
      expect(fired).toHaveLength(1);
      expect(() => cancel()).not.toThrow();
    });

    it('timers fire in the order they fall due', async () => {
      const { clock, pass } = make();
      const order: string[] = [];
      clock.setTimer(40, () => order.push('late'));
      clock.setTimer(5, () => order.push('early'));
      clock.setTimer(20, () => order.push('middle'));
      await pass(100);
      expect(order).toEqual(['early', 'middle', 'late']);
    });
  });
}
