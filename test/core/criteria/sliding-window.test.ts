import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { ReadingRing } from '../../../src/core/criteria/reading-ring.js';
import { SlidingWindow, type WindowBound } from '../../../src/core/criteria/sliding-window.js';
import { SlidingExtremes } from '../../../src/core/criteria/monotonic-deque.js';
import { SubIntervalAverages } from '../../../src/core/criteria/sub-interval-averages.js';
import { SampledReadings } from '../../../src/core/criteria/sampled-readings.js';
import { naiveAverages, naiveLaggedChange, naiveMax, naiveMean, naiveMin, naiveSampled, naiveSlope, naiveVariance, pick, windowIndices } from '../../helpers/naive-criteria.js';

// Properties: every running statistic of a sliding window equals a naive recomputation over the
// same readings (test/helpers/naive-criteria.ts), for duration and count windows, irregular and
// repeated times, ties and large offsets (common practice for streaming code; no outside source).

/** Irregular, non-decreasing times: gaps of 0 (equal times), short, long. */
const gaps = fc.array(fc.constantFrom(0, 0.1, 0.1, 0.1, 0.25, 1, 3.7), { minLength: 1, maxLength: 300 });
/** Values with ties (small integers) or spread doubles. */
const valuesFor = (n: number) =>
  fc.oneof(
    fc.array(fc.integer({ min: -5, max: 5 }), { minLength: n, maxLength: n }),
    fc.array(fc.double({ min: -1e3, max: 1e3, noNaN: true, noDefaultInfinity: true }), { minLength: n, maxLength: n }),
  );
const series = gaps.chain((g) => valuesFor(g.length).map((values) => ({ times: cumulative(g, 1_700_000_000), values })));
const bounds: fc.Arbitrary<WindowBound> = fc.oneof(
  fc.double({ min: 0.05, max: 40, noNaN: true }).map((seconds) => ({ kind: 'seconds' as const, seconds })),
  fc.integer({ min: 1, max: 40 }).map((readings) => ({ kind: 'readings' as const, readings })),
);

function cumulative(steps: readonly number[], start: number): number[] {
  const out: number[] = [];
  let t = start;
  for (const s of steps) {
    t += s;
    out.push(Math.round(t * 1000) / 1000);
  }
  return out;
}

function close(actual: number, expected: number, scale: number, relative = 1e-9): boolean {
  return Math.abs(actual - expected) <= relative * Math.max(1, Math.abs(scale));
}

describe('SlidingWindow', () => {
  it('min, max, mean and variance over duration and count windows equal a naive recomputation', () => {
    fc.assert(
      fc.property(series, bounds, ({ times, values }, bound) => {
        const ring = new ReadingRing(4);
        const w = new SlidingWindow(ring, bound, { extremes: true, moments: true });
        const scale = Math.max(1, ...values.map(Math.abs));
        for (let i = 0; i < times.length; i++) {
          ring.push(times[i] as number, values[i] as number);
          w.push();
          ring.dropBefore(w.start);
          const x = pick(values, windowIndices(times, i, bound));
          expect(w.count).toBe(x.length);
          // === rather than toBe: -0 and +0 are the same reading.
          expect(w.extremes!.min === naiveMin(x)).toBe(true);
          expect(w.extremes!.max === naiveMax(x)).toBe(true);
          expect(close(w.sums!.mean, naiveMean(x), scale)).toBe(true);
          if (x.length > 1) expect(close(w.sums!.variance, naiveVariance(x), scale * scale)).toBe(true);
        }
      }),
      { numRuns: 300 },
    );
  });

  it('least-squares slope and its standard error equal a two-pass fit over the window', () => {
    fc.assert(
      fc.property(series, bounds, ({ times, values }, bound) => {
        const ring = new ReadingRing(4);
        const w = new SlidingWindow(ring, bound, { regression: true });
        for (let i = 0; i < times.length; i++) {
          ring.push(times[i] as number, values[i] as number);
          w.push();
          ring.dropBefore(w.start);
          const idx = windowIndices(times, i, bound);
          const t = pick(times, idx);
          const y = pick(values, idx);
          const expected = naiveSlope(t, y);
          const fit = w.sums!.slope();
          if (!expected) {
            if (fit && y.length >= 3) expect(Number.isFinite(fit.perSecond)).toBe(true);
            continue;
          }
          expect(fit).not.toBeNull();
          // Scale of a slope: value spread over time spread, both of this window.
          const spread = Math.max(1e-9, naiveMax(t) - naiveMin(t));
          const slopeScale = Math.max(1, naiveMax(y.map(Math.abs))) / spread;
          expect(close(fit!.perSecond, expected.slope, slopeScale, 1e-7)).toBe(true);
          expect(close(fit!.standardError ?? Number.NaN, expected.standardError, slopeScale, 1e-6)).toBe(true);
        }
      }),
      { numRuns: 300 },
    );
  });

  it('largest change between readings k apart equals a naive pass over the pairs inside the window', () => {
    fc.assert(
      fc.property(series, bounds, fc.integer({ min: 1, max: 6 }), ({ times, values }, bound, lag) => {
        const ring = new ReadingRing(4);
        const w = new SlidingWindow(ring, bound, { lags: [lag] });
        const change = w.lagged[0]!;
        for (let i = 0; i < times.length; i++) {
          ring.push(times[i] as number, values[i] as number);
          w.push();
          ring.dropBefore(w.start);
          const expected = naiveLaggedChange(values, windowIndices(times, i, bound), lag);
          if (!expected) {
            expect(change.largest('rise')).toBe(-Infinity);
            continue;
          }
          expect(change.largest('rise') === expected.rise).toBe(true);
          expect(change.largest('fall') === expected.fall).toBe(true);
          expect(change.largest('any') === Math.max(expected.rise, expected.fall)).toBe(true);
        }
      }),
      { numRuns: 300 },
    );
  });

  it('a window of sub-interval averages holds only averages whose whole interval lies inside it', () => {
    fc.assert(
      fc.property(series, fc.constantFrom(0.5, 1, 2.5), fc.double({ min: 2.5, max: 30, noNaN: true }), ({ times, values }, length, seconds) => {
        const averager = new SubIntervalAverages(length);
        const w = new SlidingWindow(averager.averages, { kind: 'seconds', seconds }, { extremes: true, moments: true }, length);
        const expectedAll = naiveAverages(times, values, length);
        for (let i = 0; i < times.length; i++) {
          if (averager.push(times[i] as number, values[i] as number)) w.push();
          const known = expectedAll[i]!;
          if (known.length === 0) continue;
          const newest = known[known.length - 1]!.time;
          const inside = known.filter((a) => a.time - length >= newest - seconds - 1e-6);
          expect(w.count).toBe(inside.length);
          expect(w.extremes!.max).toBeCloseTo(naiveMax(inside.map((a) => a.value)), 9);
          expect(w.extremes!.min).toBeCloseTo(naiveMin(inside.map((a) => a.value)), 9);
        }
      }),
      { numRuns: 200 },
    );
  });

  it('keeps its digits on values near 1e7 with a spread of 0.1 sliding for many window lengths', () => {
    // The NIST StRD NumAcc4 pattern (values 1e7 + 0.x): the shifted, compensated, rebuilt sums must
    // match a two-pass computation after many thousands of additions and removals.
    const ring = new ReadingRing();
    const w = new SlidingWindow(ring, { kind: 'seconds', seconds: 10 }, { moments: true, regression: true });
    const values: number[] = [];
    const times: number[] = [];
    for (let i = 0; i < 20_000; i++) {
      const v = 10_000_000.2 + (i % 3 === 0 ? 0.1 : i % 3 === 1 ? -0.1 : 0) + (i > 15_000 ? 1e6 : 0);
      const t = 1_700_000_000 + i * 0.1;
      values.push(v);
      times.push(t);
      ring.push(t, v);
      w.push();
      ring.dropBefore(w.start);
    }
    const idx = windowIndices(times, times.length - 1, { kind: 'seconds', seconds: 10 });
    const x = pick(values, idx);
    expect(w.sums!.variance).toBeCloseTo(naiveVariance(x), 12);
    expect(w.sums!.mean).toBeCloseTo(naiveMean(x), 6);
    expect(w.sums!.slope()!.perSecond).toBeCloseTo(naiveSlope(pick(times, idx), x)!.slope, 9);
  });
});

describe('SlidingExtremes', () => {
  it('newestAbove and newestBelow find the newest reading of the window beyond a threshold', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: -4, max: 4 }), { minLength: 1, maxLength: 80 }), fc.integer({ min: 1, max: 20 }), fc.integer({ min: -5, max: 5 }), (values, width, threshold) => {
        const e = new SlidingExtremes(2);
        values.forEach((v, i) => {
          e.push(i, v);
          e.expireBefore(i - width + 1);
        });
        const first = Math.max(0, values.length - width);
        const newest = (test: (v: number) => boolean) => {
          for (let i = values.length - 1; i >= first; i--) if (test(values[i] as number)) return i;
          return -1;
        };
        expect(e.newestAbove(threshold)).toBe(newest((v) => v > threshold));
        expect(e.newestBelow(threshold)).toBe(newest((v) => v < threshold));
        const window = values.slice(first);
        expect(e.max).toBe(naiveMax(window));
        expect(e.min).toBe(naiveMin(window));
      }),
    );
  });

  it('newestSpanBreak is the newest reading whose suffix spans more than the limit', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: -6, max: 6 }), { minLength: 1, maxLength: 60 }), fc.integer({ min: 0, max: 8 }), (values, limit) => {
        const e = new SlidingExtremes();
        values.forEach((v, i) => e.push(i, v));
        let expected = -1;
        for (let s = values.length - 1; s >= 0; s--) {
          const suffix = values.slice(s);
          if (naiveMax(suffix) - naiveMin(suffix) > limit) {
            expected = s;
            break;
          }
        }
        expect(e.newestSpanBreak(limit)).toBe(expected);
      }),
    );
  });
});

describe('SampledReadings and SubIntervalAverages', () => {
  it('readings taken every S seconds are the first samples at or after each grid tick', () => {
    fc.assert(
      fc.property(series, fc.constantFrom(0.3, 1, 2, 5), ({ times, values }, interval) => {
        const sampler = new SampledReadings(interval);
        const taken: number[] = [];
        times.forEach((t, i) => {
          if (sampler.push(t, values[i] as number)) taken.push(i);
        });
        expect(taken).toEqual(naiveSampled(times, interval));
        expect(sampler.readings.length).toBe(taken.length);
        if (taken.length) expect(sampler.readings.valueAt(sampler.readings.nextSeq - 1)).toBe(values[taken[taken.length - 1]!]);
      }),
      { numRuns: 300 },
    );
  });

  it('sub-interval averages equal the bucket means, known once a later bucket has begun', () => {
    fc.assert(
      fc.property(series, fc.constantFrom(0.3, 1, 2.5), ({ times, values }, length) => {
        const averager = new SubIntervalAverages(length, 1000);
        const expected = naiveAverages(times, values, length);
        times.forEach((t, i) => {
          averager.push(t, values[i] as number);
          const known = expected[i]!;
          const ring = averager.averages;
          expect(ring.length).toBe(known.length);
          known.forEach((a, k) => {
            expect(ring.timeAt(ring.firstSeq + k)).toBeCloseTo(a.time, 6);
            expect(ring.valueAt(ring.firstSeq + k)).toBeCloseTo(a.value, 9);
          });
        });
      }),
      { numRuns: 300 },
    );
  });
});
