import { describe, expect, it } from 'vitest';
import { geweke } from '../../../src/core/stationarity/geweke.js';
import { readCodaFixture, readSeries, relativeDifference } from './fixture-series.js';

const fixture = readCodaFixture();
const TOLERANCE = fixture.tolerance.relative; // 1e-8: deterministic, summation order only

describe('geweke against R coda 0.19-4 geweke.diag (coda-stationarity.json)', () => {
  for (const series of fixture.series) {
    const x = readSeries(series.file);
    for (const expected of series.geweke) {
      const title = `${series.name}, frac1 = ${expected.frac1}, frac2 = ${expected.frac2}`;
      it(`codaExact reproduces z, window bounds, means and S(0): ${title}`, () => {
        const result = geweke(x, { first: expected.frac1, last: expected.frac2, codaExact: true });
        const first = expected.first!;
        const last = expected.last!;
        // Window bounds as coda forms them (REFERENCES.md section 6): exact.
        expect(result.firstCount).toBe(first.n);
        expect(first.startTime).toBe(1);
        expect(result.lastStartIndex).toBe(last.startTime - 1);
        expect(result.lastCount).toBe(last.n);
        expect(result.firstOrder).toBe(first.order);
        expect(result.lastOrder).toBe(last.order);
        expect(relativeDifference(result.firstMean, first.mean)).toBeLessThan(TOLERANCE);
        expect(relativeDifference(result.lastMean, last.mean)).toBeLessThan(TOLERANCE);
        if (expected.z === null || expected.z === undefined) {
          // coda: both windows of the 1e-9 series are "constant" (absolute check), z = NaN.
          expect(result.firstSpectrum).toBe(0);
          expect(result.lastSpectrum).toBe(0);
          expect(result.z).toBeNull();
          expect(result.reliable).toBe(false);
          return;
        }
        expect(relativeDifference(result.firstSpectrum, first.spectrum)).toBeLessThan(TOLERANCE);
        expect(relativeDifference(result.lastSpectrum, last.spectrum)).toBeLessThan(TOLERANCE);
        expect(relativeDifference(result.z as number, expected.z)).toBeLessThan(TOLERANCE);
      });
    }
  }

  it('with the default relative constant check the 1e-9-scale series gets the z of the same series scaled by 1e9', () => {
    const x = readSeries('stationarity-series/white-noise-1e-9-n500.csv');
    const small = geweke(x);
    const large = geweke(x.map((v) => v * 1e9));
    expect(small.reliable).toBe(true);
    // Scaling by 1e9 rounds each value once: z moves by ~1e-15 relative.
    expect(relativeDifference(small.z as number, large.z as number)).toBeLessThan(1e-10);
  });

  it('uses the windows of REFERENCES.md section 6 for n = 10000: times 1-1001 and 5000-10000', () => {
    const x = Float64Array.from({ length: 10000 }, (_, i) => Math.sin(i * 0.37) + 0.001 * (i % 7));
    const result = geweke(x);
    expect(result.firstCount).toBe(1001);
    expect(result.lastStartIndex).toBe(4999);
    expect(result.lastCount).toBe(5001);
  });

  it('rejects overlapping or too-small windows (coda: "start and end sequences are overlapping")', () => {
    const x = new Float64Array(100).map((_, i) => Math.sin(i));
    expect(() => geweke(x, { first: 0.6, last: 0.5 })).toThrow(RangeError);
    expect(() => geweke(x, { first: -0.1 })).toThrow(RangeError);
    expect(() => geweke(new Float64Array(10).map((_, i) => Math.sin(i)))).toThrow(RangeError);
  });
});
