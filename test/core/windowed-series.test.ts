import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { WindowedSeries } from '../../src/core/window/windowed-series.js';
import { naiveAutocovariance, naiveMean, naiveVariance } from '../helpers/naive.js';

// Properties: the streaming sums equal a naive two-pass recomputation over the same samples,
// for growing windows, sliding windows and front truncation (common practice for streaming code).

const sampleArrays = fc.array(fc.double({ min: -1e3, max: 1e3, noNaN: true, noDefaultInfinity: true }), { minLength: 2, maxLength: 400 });

function closeTo(a: number, b: number, scale: number): boolean {
  return Math.abs(a - b) <= 1e-9 * Math.max(1, scale);
}

describe('WindowedSeries', () => {
  it('growing window: mean, variance and autocovariance equal a batch recomputation', () => {
    fc.assert(
      fc.property(sampleArrays, fc.integer({ min: 1, max: 40 }), (values, maxLag) => {
        const series = new WindowedSeries({ maxSamples: 1 << 16, maxLag });
        values.forEach((v, i) => series.push(v, i));
        const scale = Math.max(...values.map(Math.abs)) ** 2;
        expect(closeTo(series.mean, naiveMean(values), Math.sqrt(scale))).toBe(true);
        expect(closeTo(series.variance, naiveVariance(values), scale)).toBe(true);
        const gamma = series.autocovariance();
        const expected = naiveAutocovariance(values, maxLag);
        expect(gamma.length).toBe(expected.length);
        expected.forEach((g, k) => expect(closeTo(gamma[k] as number, g, scale)).toBe(true));
      }),
      { numRuns: 200 },
    );
  });

  it('sliding window equals a fresh computation over the same last W samples', () => {
    fc.assert(
      fc.property(sampleArrays, fc.integer({ min: 4, max: 90 }), fc.integer({ min: 1, max: 30 }), (values, width, maxLag) => {
        const series = new WindowedSeries({ maxSamples: width, maxLag, preallocate: true });
        values.forEach((v, i) => series.push(v, i));
        const tail = values.slice(-width);
        const scale = Math.max(1, ...values.map(Math.abs)) ** 2;
        expect(series.length).toBe(tail.length);
        expect(series.firstIndex).toBe(values.length - tail.length);
        expect(closeTo(series.mean, naiveMean(tail), Math.sqrt(scale))).toBe(true);
        if (tail.length > 1) expect(closeTo(series.variance, naiveVariance(tail), scale)).toBe(true);
        const gamma = series.autocovariance();
        naiveAutocovariance(tail, maxLag).forEach((g, k) => expect(closeTo(gamma[k] as number, g, scale)).toBe(true));
      }),
      { numRuns: 300 },
    );
  });

  it('reading the sums never changes them: snapshots at any moment give the same final state', () => {
    fc.assert(
      fc.property(sampleArrays, fc.array(fc.integer({ min: 0, max: 399 }), { maxLength: 20 }), (values, readAt) => {
        const quiet = new WindowedSeries({ maxSamples: 50, maxLag: 8, preallocate: true });
        const noisy = new WindowedSeries({ maxSamples: 50, maxLag: 8, preallocate: true });
        const reads = new Set(readAt);
        values.forEach((v, i) => {
          quiet.push(v, i);
          noisy.push(v, i);
          if (reads.has(i)) noisy.autocovariance();
        });
        expect(Array.from(noisy.autocovariance())).toEqual(Array.from(quiet.autocovariance()));
      }),
      { numRuns: 100 },
    );
  });

  it('dropping the front (warm-up cut) equals a fresh window over the remaining samples', () => {
    fc.assert(
      fc.property(sampleArrays, fc.integer({ min: 0, max: 399 }), (values, cut) => {
        const series = new WindowedSeries({ maxSamples: 1 << 12, maxLag: 10 });
        values.forEach((v, i) => series.push(v, i));
        const at = Math.min(cut, values.length - 2);
        series.dropBefore(at);
        const rest = values.slice(at);
        const scale = Math.max(1, ...values.map(Math.abs)) ** 2;
        expect(series.length).toBe(rest.length);
        expect(closeTo(series.variance, naiveVariance(rest), scale)).toBe(true);
        const gamma = series.autocovariance();
        naiveAutocovariance(rest, 10).forEach((g, k) => expect(closeTo(gamma[k] as number, g, scale)).toBe(true));
      }),
      { numRuns: 200 },
    );
  });

  it('block pyramid levels hold the means of aligned complete blocks inside a sliding window', () => {
    fc.assert(
      fc.property(sampleArrays, fc.integer({ min: 8, max: 64 }), (values, width) => {
        const series = new WindowedSeries({ maxSamples: width, maxLag: 4, preallocate: true });
        values.forEach((v, i) => series.push(v, i));
        const first = series.firstIndex;
        for (let j = 1; 2 ** j <= width / 2; j++) {
          const b = 2 ** j;
          const expected: number[] = [];
          for (let q = Math.ceil(first / b); (q + 1) * b <= values.length; q++) {
            expected.push(naiveMean(values.slice(q * b, (q + 1) * b)) - series.anchor);
          }
          const got = Array.from(series.pyramid.blockMeans(j));
          expect(got.length).toBe(expected.length);
          got.forEach((m, i) => expect(Math.abs(m - (expected[i] as number))).toBeLessThan(1e-9 * Math.max(1, Math.abs(series.anchor))));
        }
      }),
      { numRuns: 200 },
    );
  });

  it('save, restore into a fresh series, continue: bit-identical to never stopping (persistence)', () => {
    fc.assert(
      fc.property(sampleArrays, fc.integer({ min: 0, max: 399 }), fc.boolean(), fc.integer({ min: 4, max: 70 }), (values, cutAt, sliding, width) => {
        const options = sliding ? { maxSamples: width, maxLag: 9, preallocate: true } : { maxSamples: 1 << 12, maxLag: 9 };
        const straight = new WindowedSeries(options);
        const first = new WindowedSeries(options);
        const split = Math.min(cutAt, values.length);
        values.forEach((v, i) => straight.push(v * 3 + (i % 7), i));
        values.slice(0, split).forEach((v, i) => first.push(v * 3 + (i % 7), i));
        const state = structuredClone(first.saveState());
        const resumed = new WindowedSeries(options);
        resumed.loadState(state);
        values.slice(split).forEach((v, j) => resumed.push(v * 3 + ((split + j) % 7), split + j));
        expect(resumed.mean).toBe(straight.mean);
        expect(resumed.variance).toBe(straight.variance);
        expect(Array.from(resumed.autocovariance())).toEqual(Array.from(straight.autocovariance()));
        for (let j = 1; j < 6; j++) expect(resumed.pyramid.stats(j)).toEqual(straight.pyramid.stats(j));
      }),
      { numRuns: 300 },
    );
  });
});
