import { describe, expect, it } from 'vitest';
import { fDistributionCdf, fDistributionTails, varianceChangeTest } from '../../../src/core/stationarity/variance-change.js';
import { SeededRandom, ar1Series } from '../../../src/core/random/seeded-random.js';
import { readFixture } from '../../helpers/reference.js';

interface FFixture {
  source: { tool: string; version: Record<string, string>; script: string };
  tolerance: { relative: number };
  cases: { f: number; d1: number; d2: number; cdf: number; sf: number }[];
}

const fixture = readFixture<FFixture>('f-distribution.json');

/** Sample variance (n - 1) of x[from .. to). */
function sampleVariance(x: Float64Array, from: number, to: number): number {
  let mean = 0;
  for (let i = from; i < to; i++) mean += x[i] as number;
  mean /= to - from;
  let squares = 0;
  for (let i = from; i < to; i++) squares += ((x[i] as number) - mean) ** 2;
  return squares / (to - from - 1);
}

/** Batch-means long-run variance of x[from .. to) with `batches` batches: batch size * variance of batch means, dof batches - 1. */
function batchMeansLongRunVariance(x: Float64Array, from: number, to: number, batches: number): { longRunVariance: number; dof: number } {
  const size = Math.floor((to - from) / batches);
  const means = new Float64Array(batches);
  for (let b = 0; b < batches; b++) {
    let sum = 0;
    for (let i = 0; i < size; i++) sum += x[from + b * size + i] as number;
    means[b] = sum / size;
  }
  return { longRunVariance: size * sampleVariance(means, 0, batches), dof: batches - 1 };
}

describe('F distribution function', () => {
  it(`matches the incomplete beta at 50 digits (mpmath ${fixture.source.version.mpmath}, ${fixture.source.script}) in both tails, dofs 0.5 .. 1e6`, () => {
    let worst = 0;
    for (const c of fixture.cases) {
      const { lower, upper } = fDistributionTails(c.f, c.d1, c.d2);
      // Tolerance 1e-9 relative on each tail (fixture), down to tail probabilities of 1e-10.
      const errorLower = Math.abs(lower - c.cdf) / c.cdf;
      const errorUpper = Math.abs(upper - c.sf) / c.sf;
      worst = Math.max(worst, errorLower, errorUpper);
      expect(errorLower, `cdf(${c.f}; ${c.d1}, ${c.d2})`).toBeLessThan(fixture.tolerance.relative);
      expect(errorUpper, `sf(${c.f}; ${c.d1}, ${c.d2})`).toBeLessThan(fixture.tolerance.relative);
    }
    expect(worst).toBeLessThan(fixture.tolerance.relative);
  });

  it('F(1, d) is the square of t(d): P(F <= t^2) = 2 P(T <= t) - 1 (closed form for d = 2)', () => {
    // Student t with 2 dof: P(T <= t) = 1/2 + t / (2 sqrt(2 + t^2)) (closed form, common knowledge of the t family).
    for (const t of [0.1, 0.7, 1.5, 4, 30]) {
      const expected = t / Math.sqrt(2 + t * t);
      expect(Math.abs(fDistributionCdf(t * t, 1, 2) / expected - 1)).toBeLessThan(1e-13);
    }
    expect(fDistributionTails(0, 3, 4)).toEqual({ lower: 0, upper: 1 });
    expect(fDistributionTails(Infinity, 3, 4)).toEqual({ lower: 1, upper: 0 });
  });
});

describe('varianceChangeTest', () => {
  // Calibration (F test theory: for independent normal samples the ratio of sample variances is
  // exactly F(n1 - 1, n2 - 1)). 4000 replicates: Monte Carlo SE of a 5 % rate is 0.34 %, band
  // 5 % +- 1.4 % (about 4 SE).
  it('equal variances, i.i.d. normal samples: rejects about alpha = 5 % (F test theory, Monte Carlo)', () => {
    const random = new SeededRandom(31);
    const replicates = 4000;
    const x = new Float64Array(120);
    let rejected = 0;
    for (let r = 0; r < replicates; r++) {
      for (let i = 0; i < x.length; i++) x[i] = random.normal();
      const recent = { longRunVariance: sampleVariance(x, 0, 40), dof: 39 };
      const reference = { longRunVariance: sampleVariance(x, 40, 120), dof: 79 };
      if (varianceChangeTest(recent, reference, 0.05).changed) rejected++;
    }
    expect(rejected / replicates).toBeGreaterThan(0.036);
    expect(rejected / replicates).toBeLessThan(0.064);
  });

  // Calibration as the pipeline will use it: long-run variances of AR(1) phi = 0.9 data (tau_int = 19)
  // from 20 batch means of 200 samples (about 10 tau_int each). Batch means of that size are nearly
  // independent and normal, so the F reference holds approximately; batch-means bias (a few % of
  // the long-run variance, the same in both windows) cancels in the ratio. 2000 replicates
  // (SE 0.5 %); band 2.5 % .. 8 % allows for the approximation.
  it('equal variances, AR(1) phi = 0.9 with batch-means long-run variances: rejects about 5 % (Monte Carlo, band stated)', () => {
    const random = new SeededRandom(32);
    const replicates = 2000;
    const x = new Float64Array(8000);
    let rejected = 0;
    for (let r = 0; r < replicates; r++) {
      ar1Series(random, 0.9, x.length, 1, x);
      const reference = batchMeansLongRunVariance(x, 0, 4000, 20);
      const recent = batchMeansLongRunVariance(x, 4000, 8000, 20);
      if (varianceChangeTest(recent, reference, 0.05).changed) rejected++;
    }
    expect(rejected / replicates).toBeGreaterThan(0.025);
    expect(rejected / replicates).toBeLessThan(0.08);
  });

  // Power: with 200 dof each, a doubling of the variance is an F ratio of 2 against critical
  // values near 1.32 (F(200, 200) upper 2.5 % point), so the theoretical power is about 0.9999
  // (P(F(200,200) > 1.32 / 2) from the F cdf). 1000 replicates; require at least 99 %.
  it('detects a doubling of the variance with 200 dof each, direction up (F test theory, Monte Carlo)', () => {
    const random = new SeededRandom(33);
    const replicates = 1000;
    const x = new Float64Array(402);
    let detected = 0;
    let upward = 0;
    for (let r = 0; r < replicates; r++) {
      for (let i = 0; i < 201; i++) x[i] = random.normal();
      for (let i = 201; i < 402; i++) x[i] = Math.SQRT2 * random.normal();
      const result = varianceChangeTest({ longRunVariance: sampleVariance(x, 201, 402), dof: 200 }, { longRunVariance: sampleVariance(x, 0, 201), dof: 200 }, 0.05);
      if (result.changed) detected++;
      if (result.direction === 'up') upward++;
    }
    expect(detected / replicates).toBeGreaterThan(0.99);
    expect(upward).toBe(detected);
  });

  it('a halving is reported as down; equal estimates give p = 1', () => {
    const down = varianceChangeTest({ longRunVariance: 1, dof: 300 }, { longRunVariance: 2, dof: 300 });
    expect(down.changed).toBe(true);
    expect(down.direction).toBe('down');
    expect(down.ratio).toBe(0.5);
    const same = varianceChangeTest({ longRunVariance: 3, dof: 10 }, { longRunVariance: 3, dof: 10 });
    // Equal dofs: the F distribution of (d, d) has median 1 (the reciprocal of F(d, d) is F(d, d)).
    expect(same.pValue).toBeCloseTo(1, 12);
    expect(same.changed).toBe(false);
  });

  it('returns flagged values, not NaN, when a variance is zero or a dof is not positive', () => {
    expect(varianceChangeTest({ longRunVariance: 0, dof: 10 }, { longRunVariance: 1, dof: 10 })).toMatchObject({ ratio: null, pValue: null, changed: false, reliable: false });
    expect(varianceChangeTest({ longRunVariance: 1, dof: 0 }, { longRunVariance: 1, dof: 10 })).toMatchObject({ pValue: null, reliable: false });
    expect(() => varianceChangeTest({ longRunVariance: -1, dof: 10 }, { longRunVariance: 1, dof: 10 })).toThrow(RangeError);
    expect(() => varianceChangeTest({ longRunVariance: 1, dof: 10 }, { longRunVariance: 1, dof: 10 }, 1)).toThrow(RangeError);
  });
});
