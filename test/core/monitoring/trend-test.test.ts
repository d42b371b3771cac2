import { describe, expect, it } from 'vitest';
import {
  andrewsBartlettLags,
  consecutiveIndexSums,
  shiftIndexOrigin,
  slopeFromSums,
  trendSums,
  trendTest,
} from '../../../src/core/stationarity/trend-test.js';
import { SeededRandom, ar1Series } from '../../../src/core/random/seeded-random.js';
import { readFixture, readSharedJson, sharedReferenceAvailable } from '../../helpers/reference.js';

interface HacFixture {
  source: { tool: string; version: Record<string, string>; call: string; script: string };
  tolerance: { relative: number };
  series: {
    name: string;
    values: number[];
    andrewsLags: number;
    olsStandardError: number;
    fits: { lags: number; slope: number; standardError: number; statistic: number; pValue: number }[];
  }[];
}

interface SharedTheory {
  theory: Record<string, { spectral_density_at_zero_coda_convention: { value: number } }>;
}

const fixture = readFixture<HacFixture>('hac-trend.json');

function relativeError(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe('trendTest', () => {
  // Reference: statsmodels 0.13.5 OLS(...).fit(cov_type='HAC', maxlags=L, kernel='bartlett',
  // use_correction=False), run by test/fixtures/reference/scripts/hac-trend.py.
  for (const series of fixture.series) {
    it(`matches ${fixture.source.tool} ${fixture.source.version.statsmodels} on ${series.name} at every fixed lag`, () => {
      for (const fit of series.fits) {
        const result = trendTest(series.values, { lags: fit.lags });
        expect(result.lags).toBe(fit.lags);
        // Tolerance 1e-9 relative (fixture): the same formula in double precision; only the
        // summation order differs (measured agreement is about 1e-12).
        expect(relativeError(result.slope, fit.slope)).toBeLessThan(fixture.tolerance.relative);
        expect(relativeError(result.standardError, fit.standardError)).toBeLessThan(fixture.tolerance.relative);
        expect(relativeError(result.statistic, fit.statistic)).toBeLessThan(fixture.tolerance.relative);
        // p-values down to 1e-31: relative 1e-6 covers the amplification of the statistic's
        // 1e-12 error by the normal tail (d ln p / d z ~ z, z up to 11.5).
        expect(relativeError(result.pValue, fit.pValue)).toBeLessThan(1e-6);
        expect(result.reliable).toBe(true);
      }
    });

    it(`default lag rule (Andrews 1991 AR(1) plug-in) gives the lags an independent Python re-implementation gives on ${series.name}`, () => {
      const result = trendTest(series.values);
      expect(result.lags).toBe(series.andrewsLags);
      const auto = series.fits.find((fit) => fit.lags === series.andrewsLags);
      expect(auto).toBeDefined();
      expect(relativeError(result.standardError, auto!.standardError)).toBeLessThan(fixture.tolerance.relative);
    });
  }

  it('andrewsBartlettLags is 0 for zero residuals and capped at n / 2 for near-unit-root residuals', () => {
    expect(andrewsBartlettLags(new Float64Array(50))).toBe(0);
    const walk = Float64Array.from({ length: 40 }, (_, i) => i * i);
    expect(andrewsBartlettLags(walk)).toBeLessThanOrEqual(20);
  });

  it('flags a constant series and an exact line instead of returning NaN', () => {
    const constant = trendTest([3, 3, 3, 3, 3]);
    expect(constant).toMatchObject({ slope: 0, standardError: 0, statistic: 0, pValue: 1, reliable: false });
    const line = trendTest([0, 2, 4, 6, 8, 10].map((v) => v + 1e6), { lags: 2 });
    expect(line.slope).toBeCloseTo(2, 9);
    expect(line.pValue).toBeLessThan(1e-6);
    expect(Number.isNaN(line.statistic)).toBe(false);
    expect(() => trendTest([1, 2])).toThrow(RangeError);
    expect(() => trendTest([1, 2, 3], { lags: -1 })).toThrow(RangeError);
  });
});

describe('slopeFromSums', () => {
  it('gives the batch OLS slope from shifted window sums, whatever the index origin and value anchor', () => {
    const series = fixture.series[0]!;
    const batch = trendTest(series.values, { lags: 0 });
    const sums = trendSums(series.values, 1_000_000, 10);
    const result = slopeFromSums(sums, 4);
    expect(relativeError(result.slope, batch.slope)).toBeLessThan(1e-9);
    // SE = sqrt(sigma_inf^2 / S_tt), S_tt = n (n^2 - 1) / 12.
    const n = series.values.length;
    expect(result.standardError).toBeCloseTo(Math.sqrt(4 / ((n * (n * n - 1)) / 12)), 15);
    const moved = slopeFromSums(shiftIndexOrigin(sums, 1_000_000), 4);
    expect(relativeError(moved.slope, batch.slope)).toBeLessThan(1e-9);
    expect(relativeError(moved.standardError, result.standardError)).toBeLessThan(1e-12);
  });

  it('consecutiveIndexSums equals direct summation (closed form)', () => {
    for (const [count, first] of [[1, 0], [7, 3], [1000, -250], [4096, 123456]] as const) {
      let sum = 0;
      let squares = 0;
      for (let t = first; t < first + count; t++) {
        sum += t;
        squares += t * t;
      }
      const closed = consecutiveIndexSums(count, first);
      expect(closed.sumIndex).toBeCloseTo(sum, 6);
      expect(Math.abs(closed.sumIndexSquares - squares) / Math.max(1, squares)).toBeLessThan(1e-13);
    }
  });

  it('returns flagged values, not NaN, for too few samples or a non-positive long-run variance', () => {
    expect(slopeFromSums(trendSums([1]), 1)).toMatchObject({ slope: 0, reliable: false });
    const two = slopeFromSums(trendSums([1, 3]), 1);
    expect(two).toMatchObject({ slope: 2, reliable: false, pValue: 1 });
    expect(slopeFromSums(trendSums([1, 2, 4, 3]), 0)).toMatchObject({ reliable: false, pValue: 1 });
  });

  // Size under autocorrelation. AR(1) phi = 0.9, unit innovations: long-run variance
  // sigma_e^2 / (1 - phi)^2 = 100 (AR(1) theory; reference-values.json theory.AR1_phi_0.9_unit_innovations).
  // n = 2000 (about 105 tau_int); the exact variance of the OLS slope is 0.986 times the large-sample
  // sigma_inf^2 / S_tt at this n (computed from the AR(1) autocovariances), so the expected size is 4.8 %.
  // 4000 replicates: Monte Carlo SE of a 5 % rate is 0.34 %; band 5 % +- 1.5 % (about 4.4 SE).
  it('AR(1) phi = 0.9: rejects about 5 % at the 5 % level with the long-run variance, the naive OLS SE far more (AR(1) theory, Monte Carlo)', () => {
    const n = 2000;
    const replicates = 4000;
    const phi = 0.9;
    const longRunVariance = 1 / (1 - phi) ** 2;
    if (sharedReferenceAvailable()) {
      const reference = readSharedJson<SharedTheory>('reference-values.json');
      expect(longRunVariance).toBeCloseTo(reference.theory['AR1_phi_0.9_unit_innovations']!.spectral_density_at_zero_coda_convention.value, 9);
    }
    const random = new SeededRandom(20240607);
    const x = new Float64Array(n);
    const indexSpread = (n * (n * n - 1)) / 12;
    let rejectedLongRun = 0;
    let rejectedNaive = 0;
    for (let r = 0; r < replicates; r++) {
      ar1Series(random, phi, n, 1, x);
      const result = slopeFromSums(trendSums(x, 0, x[0]), longRunVariance);
      if (result.pValue < 0.05) rejectedLongRun++;
      // Naive OLS: SE^2 = residual variance / S_tt, as if the data were independent.
      let mean = 0;
      for (let i = 0; i < n; i++) mean += x[i] as number;
      mean /= n;
      let residualSquares = 0;
      for (let i = 0; i < n; i++) residualSquares += ((x[i] as number) - mean - result.slope * (i - (n - 1) / 2)) ** 2;
      const naiveStatistic = result.slope / Math.sqrt(residualSquares / (n - 2) / indexSpread);
      if (Math.abs(naiveStatistic) > 1.959963984540054) rejectedNaive++;
    }
    const sizeLongRun = rejectedLongRun / replicates;
    const sizeNaive = rejectedNaive / replicates;
    expect(sizeLongRun).toBeGreaterThan(0.035);
    expect(sizeLongRun).toBeLessThan(0.065);
    // The naive SE is too small by about sqrt(tau_int) = sqrt(19): expected size P(|Z| > 1.96 / 4.36) = 65 %.
    expect(sizeNaive).toBeGreaterThan(0.5);
  });

  // The batch HAC test with its automatic lags on the same process. Bartlett HAC variances are
  // biased low at this n / tau_int (about 105) and noisy, a known finite-sample over-rejection
  // (N. M. Kiefer & T. J. Vogelsang (2005), Econometric Theory 21(6), 1130-1164; from memory):
  // measured 10 % with 2000 replicates. 800 replicates (SE about 1.1 %): the band 5 % .. 16 %
  // tells a working HAC (well below the naive 65 %) from a broken one.
  it('AR(1) phi = 0.9: the batch Newey-West test with Andrews lags over-rejects only mildly (Monte Carlo, band stated)', () => {
    const n = 2000;
    const replicates = 800;
    const random = new SeededRandom(77);
    const x = new Float64Array(n);
    let rejected = 0;
    for (let r = 0; r < replicates; r++) {
      ar1Series(random, 0.9, n, 1, x);
      if (trendTest(x).pValue < 0.05) rejected++;
    }
    expect(rejected / replicates).toBeGreaterThan(0.05);
    expect(rejected / replicates).toBeLessThan(0.16);
  });
});
