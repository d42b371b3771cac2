import { describe, expect, it } from 'vitest';
import { spectrum0Ar, isConstantSeries } from '../../../src/core/stationarity/spectrum0-ar.js';
import { SeededRandom, ar1Series } from '../../../src/core/random/seeded-random.js';
import { readCodaFixture, readSeries, relativeDifference } from './fixture-series.js';

const fixture = readCodaFixture();
// Deterministic algorithm: R and this code differ only in summation order (R accumulates some sums
// in long double), so agreement is expected near 1e-13; 1e-8 relative is the stated bound.
const TOLERANCE = fixture.tolerance.relative;

describe('spectrum0Ar', () => {
  for (const series of fixture.series) {
    const x = readSeries(series.file);
    const expected = series.spectrum0;
    const codaConstant = expected.spectrum === 0;

    it(`matches R coda 0.19-4 spectrum0.ar(x) and ar(x, aic = TRUE) on ${series.name} (coda-stationarity.json)`, () => {
      const result = spectrum0Ar(x, { constantCheck: 'absolute' });
      expect(result.orderMax).toBe(expected.orderMax);
      if (codaConstant) {
        // coda's all.equal(sd(residuals), 0) fires: spec = 0, order = 0.
        expect(result.constant).toBe(true);
        expect(result.spectrum).toBe(0);
        expect(result.order).toBe(0);
        return;
      }
      expect(result.order).toBe(expected.order);
      expect(result.order).toBe(expected.arOrder);
      expect(relativeDifference(result.spectrum, expected.spectrum)).toBeLessThan(TOLERANCE);
      expect(relativeDifference(result.varPred, expected.varPred)).toBeLessThan(TOLERANCE);
      expect(result.coefficients.length).toBe(expected.coefficients.length);
      expected.coefficients.forEach((c, j) => {
        expect(relativeDifference(result.coefficients[j] as number, c, 1e-3)).toBeLessThan(TOLERANCE);
      });
    });

    it(`default relative constant check agrees with coda on ${series.name} wherever coda's spectrum is nonzero`, () => {
      const result = spectrum0Ar(x);
      if (codaConstant) {
        // coda's absolute threshold (2^-26) declares this 1e-9-scale white noise constant; the
        // relative check does not, and S(0) is close to the white-noise variance (sigma = 1e-9).
        expect(result.constant).toBe(false);
        expect(result.spectrum).toBeGreaterThan(0.5e-18);
        expect(result.spectrum).toBeLessThan(2e-18);
        return;
      }
      expect(relativeDifference(result.spectrum, expected.spectrum)).toBeLessThan(TOLERANCE);
    });
  }

  it('is scale-equivariant with the relative check: S(0) of c x is c^2 S(0) of x, down to c = 1e-12', () => {
    const x = ar1Series(new SeededRandom(7), 0.5, 1000);
    const reference = spectrum0Ar(x).spectrum;
    for (const c of [1e-12, 1e-9, 1e3]) {
      const scaled = x.map((v) => v * c);
      // Scaling by a power of ten rounds each value once (relative 1.1e-16): the AR fit moves by ~1e-14.
      expect(relativeDifference(spectrum0Ar(scaled).spectrum / (c * c), reference)).toBeLessThan(1e-10);
    }
  });

  it('treats an exactly constant series and an exactly linear series as constant (spectrum 0), as coda does', () => {
    const constant = new Float64Array(500).fill(10000000.1);
    expect(spectrum0Ar(constant)).toMatchObject({ spectrum: 0, order: 0, constant: true });
    const line = Float64Array.from({ length: 500 }, (_, i) => 3 + 0.25 * i);
    expect(isConstantSeries(line)).toBe(true);
    // The same line plus one-ulp-scale noise far above the relative threshold is not constant.
    const noisy = line.map((v, i) => v + (i % 2 === 0 ? 1e-9 : -1e-9));
    expect(isConstantSeries(noisy)).toBe(false);
  });

  it('recovers the AR(1) theory value S(0) = sigma^2 / (1 - phi)^2 = 100 for phi = 0.9 (reference-values.json theory; statistical check)', () => {
    const x = ar1Series(new SeededRandom(2024), 0.9, 200_000);
    const result = spectrum0Ar(x);
    // The relative standard error of an AR(1) S(0) estimate is about sqrt(2 tau_int / n) ~ 0.014 at
    // n = 2e5 (tau_int = 19); 6 % is more than 4 standard errors.
    expect(Math.abs(result.spectrum - 100) / 100).toBeLessThan(0.06);
  });

  it('throws a RangeError for fewer than 2 samples', () => {
    expect(() => spectrum0Ar(new Float64Array(1))).toThrow(RangeError);
  });
});
