import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  compareWithAnalytic,
  medianInPlace,
  selectInPlace,
  stationaryBootstrap,
  stationaryBootstrapVarianceOfMean,
  trimmedMeanInPlace,
} from '../../../src/core/bootstrap/stationary-bootstrap.js';
import { automaticBlockLength } from '../../../src/core/bootstrap/block-length.js';
import { AutocovarianceFft } from '../../../src/core/acf/autocovariance-fft.js';
import { sokalWindow } from '../../../src/core/tau/sokal-window.js';
import type { TauEstimate } from '../../../src/core/tau/tau-estimate.js';
import { SeededRandom, ar1Series } from '../../../src/core/random/seeded-random.js';
import { naiveVariance } from '../../helpers/naive.js';
import { readFixture } from '../../helpers/reference.js';

interface BootFixture {
  input: { values: number[]; blockLength: number; replicates: number; trim: number };
  expected: { statistic: 'median' | 'mean' | 'trimmed-mean'; t0: number; standardError: number; bootstrapMean: number; kurtosis: number }[];
}

const boot = readFixture<BootFixture>('stationary-bootstrap-boot.json');
const x = Float64Array.from(boot.input.values);

/**
 * Relative Monte Carlo sd of a bootstrap standard error from R replicates whose distribution has
 * kurtosis k: sd(s) / sigma = sqrt((k - 1) / (4 R)) (delta method for the sample sd; common practice).
 */
function relativeSdOfSe(replicates: number, kurtosis: number): number {
  return Math.sqrt((kurtosis - 1) / (4 * replicates));
}

describe('stationaryBootstrap', () => {
  // Source: R boot 1.3-28.1 tsboot(x, statistic, R = 20000, l = 8, sim = "geom") on the committed
  // series (test/fixtures/reference/scripts/stationary_bootstrap_boot.R). Both sides draw from the
  // same resampling law with different random numbers, so the comparison is statistical: the two
  // standard errors differ by Monte Carlo error only, with relative sd sqrt((k - 1) / (4 R)) on each
  // side (k the kurtosis of the replicates, from the fixture for R's side; the same k is used for
  // ours, which draws from the same law). Tolerance: 4 sd of the difference (a false failure about
  // 6e-5 per comparison). The statistic of the series itself is deterministic: 1e-12 relative.
  const ours = stationaryBootstrap(x, {
    blockLength: boot.input.blockLength,
    replicates: 10000,
    random: new SeededRandom(2024),
    statistics: ['mean', 'median', 'trimmed-mean'],
    trim: boot.input.trim,
  });
  const field = { median: 'median', mean: 'mean', 'trimmed-mean': 'trimmedMean' } as const;
  for (const expected of boot.expected) {
    it(`standard error of the ${expected.statistic} agrees with R boot tsboot(sim = "geom") within 4 Monte Carlo sd`, () => {
      const mine = ours[field[expected.statistic]];
      expect(mine).toBeDefined();
      const estimate = mine as { estimate: number; standardError: number };
      expect(Math.abs(estimate.estimate - expected.t0) / Math.abs(expected.t0)).toBeLessThan(1e-12);
      const sd = Math.hypot(relativeSdOfSe(boot.input.replicates, expected.kurtosis), relativeSdOfSe(ours.replicates, expected.kurtosis));
      expect(Math.abs(estimate.standardError / expected.standardError - 1)).toBeLessThan(4 * sd);
    });
  }

  // The closed form (DERIVED-REFERENCES.md section 5, Politis & Romano 1994) against R boot's
  // simulation of the mean: an independent implementation on both sides. Tolerance: 4 Monte Carlo
  // sd of R's standard error (R = 20000, kurtosis from the fixture): about 2 %.
  it('closed-form stationary-bootstrap variance of the mean agrees with R boot tsboot(mean, sim = "geom") within 4 Monte Carlo sd', () => {
    const expected = boot.expected.find((e) => e.statistic === 'mean');
    expect(expected).toBeDefined();
    const closed = Math.sqrt(stationaryBootstrapVarianceOfMean(x, boot.input.blockLength));
    const { standardError, kurtosis } = expected as { standardError: number; kurtosis: number };
    expect(Math.abs(closed / standardError - 1)).toBeLessThan(4 * relativeSdOfSe(boot.input.replicates, kurtosis));
  });

  // Our Monte Carlo against the closed form on AR(1) series, for short, long and unit blocks
  // (b = 1 is the ordinary bootstrap: R(0) / n exactly). The mean's bootstrap distribution is
  // close to normal (R's replicates of the mean above: kurtosis 3.00), so the relative Monte Carlo sd
  // of the standard error is sqrt(2 / (4 R)) = 0.5 % at R = 20000; tolerance 4 of those (2 %),
  // and compareWithAnalytic with only R given (its Monte Carlo rule) must call them in agreement.
  for (const [phi, blockLength] of [[0.7, 20], [0.7, 5], [0.3, 1], [0.95, 60]] as const) {
    it(`Monte Carlo standard error of the mean matches the closed form within 4 Monte Carlo sd (AR(1) phi = ${phi}, block ${blockLength}, R = 20000)`, () => {
      const random = new SeededRandom(Math.round(phi * 1000) + blockLength);
      const series = ar1Series(random, phi, 500);
      for (let i = 0; i < series.length; i++) series[i] = (series[i] as number) + 250;
      const replicates = 20000;
      const result = stationaryBootstrap(series, { blockLength, replicates, random });
      const closed = Math.sqrt(stationaryBootstrapVarianceOfMean(series, blockLength));
      const se = (result.mean as { standardError: number }).standardError;
      expect(Math.abs(se / closed - 1)).toBeLessThan(4 * relativeSdOfSe(replicates, 3));
      expect(compareWithAnalytic(se, closed, replicates).agrees).toBe(true);
      if (blockLength === 1) expect(closed).toBeCloseTo(Math.sqrt((naiveVariance(series) * (series.length - 1)) / series.length / series.length), 12);
    });
  }

  // Against the analytic (autocorrelation-aware) uncertainty of the project (Sokal's window on the
  // FFT autocovariance, src/core/tau/sokal-window.ts) on AR(1) series: compareWithAnalytic with the
  // bootstrap's own sampling error (Monte Carlo 1 / (2 (R - 1)) plus the estimator's b / (2 n) on the
  // standard error, Politis & White 2004 / 2009) must call nearly all of them in agreement, and
  // the naive s / sqrt(n), which understates u by sqrt(tau) = 2.4 here, must be flagged every time.
  // 40 series of n = 2000, phi = 0.7, automatic block length (about 25), R = 400: the allowed sd of
  // ln(ratio) is then about 0.087 and a disagreement needs |ln ratio| > 0.26. Measured with this
  // seed: ratios 0.84 ... 1.09 (median 0.96), so the largest z is about 2; the two estimates share
  // the data, so ln(ratio) spreads less (about 0.05) than the independent-error rule allows. The
  // bound of at most 1 disagreement in 40 leaves room for that; 2 would take a 4-sd excursion.
  // Adding the analytic dof (Sokal's n / (2M + 1)) only widens the rule.
  it('agrees with the Sokal-window analytic uncertainty on AR(1) series and flags the naive s / sqrt(n) (compareWithAnalytic)', () => {
    const random = new SeededRandom(77);
    const fft = new AutocovarianceFft();
    const n = 2000;
    const replicates = 400;
    let disagreements = 0;
    let naiveFlagged = 0;
    const series = new Float64Array(n);
    const ratios: number[] = [];
    for (let r = 0; r < 40; r++) {
      ar1Series(random, 0.7, n, 1, series);
      const gamma = fft.compute(series, n - 1);
      const variance = naiveVariance(series);
      const sokal = sokalWindow(gamma, n, variance, true) as TauEstimate;
      const analytic = Math.sqrt(sokal.varianceOfMean);
      const result = stationaryBootstrap(series, { replicates, random });
      const se = (result.mean as { standardError: number }).standardError;
      const comparison = compareWithAnalytic(se, analytic, replicates, { sampleCount: n, blockLength: result.blockLength });
      if (!comparison.agrees) disagreements++;
      ratios.push(comparison.ratio as number);
      const wider = compareWithAnalytic(se, analytic, replicates, { sampleCount: n, blockLength: result.blockLength, analyticDof: sokal.dof });
      expect(wider.logRatioStandardDeviation).toBeGreaterThan(comparison.logRatioStandardDeviation);
      if (comparison.agrees) expect(wider.agrees).toBe(true);
      const naive = compareWithAnalytic(se, Math.sqrt(variance / n), replicates, { sampleCount: n, blockLength: result.blockLength, analyticDof: n - 1 });
      if (!naive.agrees) naiveFlagged++;
    }
    expect(disagreements).toBeLessThanOrEqual(1);
    expect(naiveFlagged).toBe(40);
    // The stationary bootstrap's variance is biased low by about G / (b g(0)) = 2 phi / ((1 - phi^2) b)
    // (Politis & White 2004), 11 % at b near 25, i.e. 5.5 % on the standard error: the median ratio
    // must lie in 0.85 ... 1.05.
    ratios.sort((a, b) => a - b);
    const median = ((ratios[19] as number) + (ratios[20] as number)) / 2;
    expect(median).toBeGreaterThan(0.85);
    expect(median).toBeLessThan(1.05);
  });

  it('defaults to the automatic Politis-White block length and the mean only', () => {
    const result = stationaryBootstrap(x, { replicates: 50, random: new SeededRandom(1) });
    expect(result.blockLengthSource).toBe('automatic');
    expect(result.blockLength).toBeCloseTo(Math.max(1, automaticBlockLength(x).stationary), 12);
    expect(result.mean).toBeDefined();
    expect(result.median).toBeUndefined();
    expect(result.trimmedMean).toBeUndefined();
  });

  it('is deterministic given the seed, and the statistics do not change each other s random stream', () => {
    const a = stationaryBootstrap(x, { blockLength: 6, replicates: 200, random: new SeededRandom(9), statistics: ['mean'] });
    const b = stationaryBootstrap(x, { blockLength: 6, replicates: 200, random: new SeededRandom(9), statistics: ['median', 'mean'] });
    expect(b.mean).toEqual(a.mean);
  });

  it('rejects programmer errors', () => {
    const random = new SeededRandom(1);
    expect(() => stationaryBootstrap([1, 2], { replicates: 10, random })).toThrow(RangeError);
    expect(() => stationaryBootstrap(x, { replicates: 1, random })).toThrow(RangeError);
    expect(() => stationaryBootstrap(x, { replicates: 10, random, blockLength: 0.5 })).toThrow(RangeError);
    expect(() => stationaryBootstrap(x, { replicates: 10, random, trim: 0.5 })).toThrow(RangeError);
  });
});

describe('order statistics used by the bootstrap (common practice: equal to a full sort)', () => {
  const arrays = fc.array(fc.integer({ min: -5, max: 5 }), { minLength: 1, maxLength: 60 });
  it('selectInPlace puts the rank-k value at k, smaller left and larger right, with many ties', () => {
    fc.assert(
      fc.property(arrays, fc.nat(), (values, pick) => {
        const a = Float64Array.from(values);
        const k = pick % a.length;
        const sorted = Float64Array.from(values).sort();
        expect(selectInPlace(a, k, 0, a.length - 1)).toBe(sorted[k]);
        for (let i = 0; i < k; i++) expect(a[i] as number).toBeLessThanOrEqual(a[k] as number);
        for (let i = k + 1; i < a.length; i++) expect(a[i] as number).toBeGreaterThanOrEqual(a[k] as number);
        expect(Array.from(a).sort((u, v) => u - v)).toEqual(Array.from(sorted));
      }),
      { numRuns: 500 },
    );
  });

  it('median and trimmed mean equal the sort-based definitions (R median and mean(x, trim))', () => {
    fc.assert(
      fc.property(fc.array(fc.double({ min: -100, max: 100, noNaN: true }), { minLength: 1, maxLength: 80 }), fc.double({ min: 0, max: 0.49, noNaN: true }), (values, trim) => {
        const sorted = Float64Array.from(values).sort();
        const n = sorted.length;
        const median = n % 2 === 1 ? (sorted[(n - 1) / 2] as number) : ((sorted[n / 2 - 1] as number) + (sorted[n / 2] as number)) / 2;
        expect(medianInPlace(Float64Array.from(values))).toBeCloseTo(median, 12);
        const g = Math.floor(n * trim);
        const kept = sorted.subarray(g, n - g);
        const trimmed = kept.reduce((s, v) => s + v, 0) / kept.length;
        expect(trimmedMeanInPlace(Float64Array.from(values), trim)).toBeCloseTo(trimmed, 10);
      }),
      { numRuns: 500 },
    );
  });
});

describe('compareWithAnalytic', () => {
  it('the allowed spread grows with each source of error given, and zero uncertainties are reported', () => {
    const mcOnly = compareWithAnalytic(1.1, 1, 1000);
    expect(mcOnly.logRatioStandardDeviation).toBeCloseTo(Math.sqrt(1 / (2 * 999)), 15);
    expect(mcOnly.agrees).toBe(false); // ln 1.1 = 0.095 is 4.3 Monte Carlo sd at R = 1000
    const all = compareWithAnalytic(1.1, 1, 1000, { sampleCount: 2000, blockLength: 20, analyticDof: 50 });
    expect(all.logRatioStandardDeviation).toBeCloseTo(Math.sqrt(1 / 1998 + 20 / 4000 + 1 / 100), 15);
    expect(all.agrees).toBe(true);
    expect(compareWithAnalytic(0, 0, 100).agrees).toBe(true);
    const zero = compareWithAnalytic(0.1, 0, 100);
    expect(zero.agrees).toBe(false);
    expect(zero.ratio).toBeNull();
  });
});
