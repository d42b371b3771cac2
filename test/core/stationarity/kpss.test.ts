import { describe, expect, it } from 'vitest';
import {
  KPSS_LEVEL_CRITICAL_VALUES,
  KPSS_TREND_CRITICAL_VALUES,
  kpss,
  kpssPValue,
} from '../../../src/core/stationarity/kpss.js';
import { readFixture, readSharedJson, sharedReferenceAvailable } from '../../helpers/reference.js';
import { readSeries, relativeDifference } from './fixture-series.js';

interface TseriesFixture {
  tolerance: { relative: number };
  series: { name: string; file: string; n: number; tests: { null: 'Level' | 'Trend'; lshort: boolean; statistic: number; lags: number; pValue: number; warning: string }[] }[];
}
interface StatsmodelsFixture {
  tolerance: { relative: number };
  series: {
    name: string; file: string; n: number;
    tests: { regression: 'c' | 'ct'; nlags: 'auto' | 'legacy'; statistic: number; pValue: number; lags: number; criticalValues: Record<string, number>; clipped: boolean }[];
  }[];
}

const tseries = readFixture<TseriesFixture>('kpss-tseries.json');
const statsmodels = readFixture<StatsmodelsFixture>('kpss-statsmodels.json');
const shared = sharedReferenceAvailable();

describe('kpss against R tseries 0.10-53 kpss.test (kpss-tseries.json)', () => {
  for (const series of tseries.series) {
    const x = readSeries(series.file);
    for (const expected of series.tests) {
      it(`${series.name}: kpss.test(x, null = "${expected.null}", lshort = ${expected.lshort})`, () => {
        const result = kpss(x, { trend: expected.null === 'Trend', lags: expected.lshort ? 'short' : 'long' });
        expect(result.lags).toBe(expected.lags);
        // Deterministic; R and this code differ in summation order only (measured ~1e-14).
        expect(relativeDifference(result.statistic, expected.statistic)).toBeLessThan(tseries.tolerance.relative);
        expect(Math.abs(result.pValue - expected.pValue)).toBeLessThan(1e-12);
        // tseries warns exactly when it clips: "p-value smaller/greater than printed p-value".
        const bound = expected.warning.includes('smaller') ? 'smaller' : expected.warning.includes('greater') ? 'greater' : 'exact';
        expect(result.pValueBound).toBe(bound);
      });
    }
  }
});

describe('kpss against statsmodels 0.13.5 kpss (kpss-statsmodels.json)', () => {
  for (const series of statsmodels.series) {
    const x = readSeries(series.file);
    for (const expected of series.tests) {
      it(`${series.name}: kpss(x, regression = "${expected.regression}", nlags = "${expected.nlags}")`, () => {
        const result = kpss(x, { trend: expected.regression === 'ct', lags: expected.nlags });
        expect(result.lags).toBe(expected.lags);
        expect(relativeDifference(result.statistic, expected.statistic)).toBeLessThan(statsmodels.tolerance.relative);
        expect(Math.abs(result.pValue - expected.pValue)).toBeLessThan(1e-12);
        expect(result.pValueBound !== 'exact').toBe(expected.clipped);
        expect(result.criticalValues).toEqual({
          '0.1': expected.criticalValues['10%'], '0.05': expected.criticalValues['5%'],
          '0.025': expected.criticalValues['2.5%'], '0.01': expected.criticalValues['1%'],
        });
      });
    }
  }
});

describe('KPSS critical values and p-value', () => {
  it.skipIf(!shared)('uses KPSS (1992) Table 1, as recorded in reference-values.json kpss_critical_values', () => {
    const reference = readSharedJson<{ kpss_critical_values: Record<string, { value: Record<string, number> }> }>('reference-values.json').kpss_critical_values;
    const asTable = (v: Record<string, number>) => ({ '0.1': v['10%'], '0.05': v['5%'], '0.025': v['2.5%'], '0.01': v['1%'] });
    expect(KPSS_LEVEL_CRITICAL_VALUES).toEqual(asTable(reference.level_stationary_eta_mu!.value));
    expect(KPSS_TREND_CRITICAL_VALUES).toEqual(asTable(reference.trend_stationary_eta_tau!.value));
  });

  it('interpolates linearly between table entries and clips at 0.10 (greater) and 0.01 (smaller), as tseries approx(rule = 2)', () => {
    const table = KPSS_LEVEL_CRITICAL_VALUES;
    expect(kpssPValue(table['0.05'], table)).toEqual({ pValue: 0.05, bound: 'exact' });
    // Midway between the 5 % (0.463) and 2.5 % (0.574) values: p = 0.0375.
    expect(kpssPValue((0.463 + 0.574) / 2, table).pValue).toBeCloseTo(0.0375, 15);
    expect(kpssPValue(0.1, table)).toEqual({ pValue: 0.1, bound: 'greater' });
    expect(kpssPValue(5, table)).toEqual({ pValue: 0.01, bound: 'smaller' });
  });

  it('flags a constant series instead of returning NaN (0/0)', () => {
    const result = kpss(new Float64Array(300).fill(10000000.1));
    expect(result).toMatchObject({ statistic: 0, reliable: false, stationaryAt5Percent: true });
    expect(Number.isNaN(result.pValue)).toBe(false);
  });

  it('validates its arguments', () => {
    expect(() => kpss(new Float64Array(2))).toThrow(RangeError);
    expect(() => kpss(new Float64Array(50).map((_, i) => Math.sin(i)), { lags: 50 })).toThrow(RangeError);
    expect(() => kpss(new Float64Array(50).map((_, i) => Math.sin(i)), { lags: 1.5 })).toThrow(RangeError);
  });

  it('decides as the references do: white noise stationary at 5 %, the random walk not (statsmodels fixture)', () => {
    expect(kpss(readSeries('stationarity-series/white-noise-n2005.csv')).stationaryAt5Percent).toBe(true);
    expect(kpss(readSeries('stationarity-series/random-walk-n500.csv')).stationaryAt5Percent).toBe(false);
  });
});
