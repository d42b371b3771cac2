import { describe, expect, it } from 'vitest';
import { targetStatus } from '../../../src/core/uncertainty/target-precision.js';

// The progress towards a target is a plain fraction a person reads correctly: samples taken over
// samples needed. With u = s_tau / sqrt(n) and a target on u, the samples needed are
// n (u / bound)^2 (the 1/sqrt(n) law of a mean's standard uncertainty, JCGM 100:2008, 4.2.3).

const base = { mean: 20, confidence: 0.95, rate: 2, capacity: Number.POSITIVE_INFINITY };

describe('target progress', () => {
  it('on u: needed = n (u / bound)^2, progress = n / needed, time = samples to go / rate', () => {
    const status = targetStatus({ value: 0.01, relative: false, on: 'u' }, { ...base, n: 400, standardUncertainty: 0.02, dof: 100 });
    expect(status.reached).toBe(false);
    expect(status.samplesNeeded).toBe(1600);
    expect(status.samplesToTarget).toBe(1200);
    expect(status.progress).toBeCloseTo(0.25, 12);
    expect(status.secondsToTarget).toBe(600);
  });

  it('reached: progress 1 and samples needed = n', () => {
    const status = targetStatus({ value: 0.05, relative: false, on: 'u' }, { ...base, n: 400, standardUncertainty: 0.02, dof: 100 });
    expect(status.reached).toBe(true);
    expect(status.progress).toBe(1);
    expect(status.samplesNeeded).toBe(400);
  });

  it('on U: more samples also raise nu, so needed lies below n (U / bound)^2 and above n (u k_inf / bound)^2', () => {
    const status = targetStatus({ value: 0.02, relative: false, on: 'U' }, { ...base, n: 400, standardUncertainty: 0.02, dof: 10 });
    const needed = status.samplesNeeded as number;
    // k at nu = 10, 95 %: 2.228 (Student t tables, e.g. JCGM 100:2008 table G.2); at infinity 1.960.
    expect(needed).toBeLessThan(400 * (0.02 * 2.228 / 0.02) ** 2);
    expect(needed).toBeGreaterThan(400 * (0.02 * 1.96 / 0.02) ** 2);
    expect(status.progress).toBeCloseTo(400 / needed, 12);
  });
});
