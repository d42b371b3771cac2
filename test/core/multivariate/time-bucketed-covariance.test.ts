import { describe, expect, it } from 'vitest';
import { TimeBucketedCovariance, type TimeBucketedSnapshot } from '../../../src/core/multivariate/time-bucketed-covariance.js';
import { multivariateBatchMeans, multivariateEss } from '../../../src/core/multivariate/multivariate-batch-means.js';
import { sampleCovariance } from '../../../src/core/multivariate/sample-covariance.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import { relativeDifference } from '../../helpers/reference.js';

// The streaming accumulator is checked against the batch computation (multivariateBatchMeans, itself
// checked against the numpy mcmcse re-implementation) applied to bucket means formed naively here:
// streaming == batch is common practice for streaming code. Tolerance 1e-12 relative: the stream
// works on anchored values and running cross-products, the batch code on shifted two-pass
// deviations; both in double precision, where the offsets below (up to 2e5 with unit spread) cost
// about 5 of the 16 digits in the naive bucket sums. Measured: about 1e-14.

interface Sample {
  channel: number;
  timeSeconds: number;
  value: number;
}

const RATES_HZ = [10, 4, 2, 5];
const OFFSETS = [1000, -50, 2e5, 3];

/**
 * Channels 0-2 observe one AR(1) process on a 20 Hz grid (tau about 10 s) at 10, 4 and 2 Hz, with
 * gains, offsets and their own white noise; channel 3 is an independent AR(1) sampled at 5 Hz.
 * Samples come in time order.
 */
function rigSamples(seconds: number, seed: number): Sample[] {
  const random = new SeededRandom(seed);
  const gridHz = 20;
  const phi = 0.995;
  const gains = [1, -0.5, 2];
  let common = random.normal() / Math.sqrt(1 - phi * phi);
  let independent = random.normal() / Math.sqrt(1 - 0.9 * 0.9);
  const out: Sample[] = [];
  for (let k = 0; k < seconds * gridHz; k++) {
    const timeSeconds = k / gridHz;
    for (let c = 0; c < 4; c++) {
      if (k % (gridHz / (RATES_HZ[c] as number)) !== 0) continue;
      const signal = c < 3 ? (gains[c] as number) * common : 3 * independent;
      out.push({ channel: c, timeSeconds, value: (OFFSETS[c] as number) + signal + 0.3 * random.normal() });
    }
    common = phi * common + random.normal() * 0.1;
    independent = 0.9 * independent + random.normal();
  }
  return out;
}

/** Bucket means, naively: complete buckets only, in bucket order. */
function naiveBucketRows(samples: Sample[], p: number, bucketSeconds: number): { rows: Float64Array; m: number; indices: number[] } {
  const buckets = new Map<number, { sums: number[]; counts: number[] }>();
  for (const s of samples) {
    const index = Math.floor(s.timeSeconds / bucketSeconds);
    let bucket = buckets.get(index);
    if (!bucket) {
      bucket = { sums: new Array<number>(p).fill(0), counts: new Array<number>(p).fill(0) };
      buckets.set(index, bucket);
    }
    bucket.sums[s.channel] = (bucket.sums[s.channel] as number) + s.value;
    bucket.counts[s.channel] = (bucket.counts[s.channel] as number) + 1;
  }
  const indices = [...buckets.keys()].sort((a, b) => a - b).filter((i) => (buckets.get(i) as { counts: number[] }).counts.every((c) => c > 0));
  const rows = new Float64Array(indices.length * p);
  indices.forEach((index, t) => {
    const bucket = buckets.get(index) as { sums: number[]; counts: number[] };
    for (let c = 0; c < p; c++) rows[t * p + c] = (bucket.sums[c] as number) / (bucket.counts[c] as number);
  });
  return { rows, m: indices.length, indices };
}

/**
 * Batch means over the last `window` rows with blocks aligned to the absolute row index (block k =
 * rows k b ... (k + 1) b - 1 counted from the first row ever), mean over all rows in the window: the
 * sliding-window convention of the stream, written out directly.
 */
function naiveAlignedBatchMeans(rows: Float64Array, m: number, p: number, window: number, b: number): Float64Array {
  const first = Math.max(0, m - window);
  // Values shifted by the window's first row, so that the 2e5 offset does not round the mean.
  const shift = rows.slice(first * p, first * p + p);
  const value = (t: number, i: number) => (rows[t * p + i] as number) - (shift[i] as number);
  const mean = new Float64Array(p);
  for (let t = first; t < m; t++) for (let i = 0; i < p; i++) mean[i] = (mean[i] as number) + value(t, i) / (m - first);
  const out = new Float64Array(p * p);
  const firstBatch = Math.ceil(first / b);
  const endBatch = Math.floor(m / b);
  for (let k = firstBatch; k < endBatch; k++) {
    const d = new Float64Array(p);
    for (let t = k * b; t < (k + 1) * b; t++) for (let i = 0; i < p; i++) d[i] = (d[i] as number) + (value(t, i) - (mean[i] as number)) / b;
    for (let i = 0; i < p; i++) for (let j = 0; j < p; j++) out[i * p + j] = (out[i * p + j] as number) + (d[i] as number) * (d[j] as number);
  }
  const a = endBatch - firstBatch;
  return out.map((v) => (v * b) / (a - 1));
}

function ready(snapshot: ReturnType<TimeBucketedCovariance['snapshot']>): TimeBucketedSnapshot {
  if (!snapshot.ready) throw new Error(`snapshot not ready: ${snapshot.note}`);
  return snapshot;
}

function feed(stream: TimeBucketedCovariance, samples: Sample[]): void {
  for (const s of samples) stream.add(s.channel, s.timeSeconds, s.value);
}

const P = 4;
const TOLERANCE = 1e-12;
const SECONDS = 600;
const samples = rigSamples(SECONDS, 11);
const naive = naiveBucketRows(samples, P, 1);

describe('TimeBucketedCovariance', () => {
  it('channels at 10, 4, 2 and 5 Hz pair up in 1 s buckets: every bucket complete', () => {
    const stream = new TimeBucketedCovariance(P, { bucketSeconds: 1, maxBuckets: 4096 });
    feed(stream, samples);
    stream.flush();
    expect(naive.m).toBe(SECONDS);
    expect(stream.buckets).toBe(SECONDS);
    const snap = ready(stream.snapshot());
    expect(snap.counts).toEqual({ completedBuckets: SECONDS, incompleteBuckets: 0, emptyBuckets: 0, lateSamples: 0, rejectedSamples: 0, evictedBuckets: 0 });
  });

  it('growing window: covariance of the means equals multivariateBatchMeans on the bucket means (automatic, dyadic, non-dyadic and lugsail r = 2 batch sizes)', () => {
    const stream = new TimeBucketedCovariance(P, { bucketSeconds: 1, maxBuckets: 4096 });
    feed(stream, samples);
    stream.flush();
    const auto = ready(stream.snapshot());
    // Dyadic size nearest sqrt(600) = 24.5 on a log scale: 2^round(4.61) = 32.
    expect(auto.batchSize).toBe(32);
    for (const [batchSize, lugsail] of [[auto.batchSize, false], [8, false], [1, false], [20, false], [37, false], [16, true], [20, true]] as const) {
      const snap = ready(stream.snapshot(batchSize, { lugsail }));
      const batch = multivariateBatchMeans(naive.rows, naive.m, P, { batchSize, lugsail, lugsailRatio: 2 });
      expect(snap.batches).toBe(batch.batches);
      expect(snap.lugsailUsed).toBe(batch.lugsailUsed);
      expect(relativeDifference(snap.covariance, batch.covariance)).toBeLessThan(TOLERANCE);
      expect(relativeDifference(snap.meanCovariance, batch.meanCovariance)).toBeLessThan(TOLERANCE);
      for (let i = 0; i < P; i++) expect(Math.abs((snap.means[i] as number) - (batch.means[i] as number))).toBeLessThan(1e-13 * Math.max(1, Math.abs(batch.means[i] as number)));
    }
    const lambda = sampleCovariance(naive.rows, naive.m, P).covariance;
    expect(relativeDifference(auto.sampleCovariance, lambda)).toBeLessThan(TOLERANCE);
    const ess = multivariateEss(naive.m, lambda, multivariateBatchMeans(naive.rows, naive.m, P, { batchSize: auto.batchSize }).covariance, P);
    expect(auto.multivariateEss).not.toBeNull();
    expect(Math.abs((auto.multivariateEss as number) - (ess as number)) / (ess as number)).toBeLessThan(1e-8);
    for (let i = 0; i < P; i++) expect(auto.standardUncertainties[i]).toBeCloseTo(Math.sqrt(auto.meanCovariance[i * P + i] as number), 12);
  });

  it('sliding window of 200 buckets: equals the aligned batch computation over the last 200 bucket means', () => {
    const window = 200;
    const stream = new TimeBucketedCovariance(P, { bucketSeconds: 1, maxBuckets: window });
    feed(stream, samples);
    stream.flush();
    expect(stream.buckets).toBe(window);
    for (const batchSize of [1, 4, 16, 13]) {
      const snap = ready(stream.snapshot(batchSize));
      expect(relativeDifference(snap.covariance, naiveAlignedBatchMeans(naive.rows, naive.m, P, window, batchSize))).toBeLessThan(TOLERANCE);
    }
    const last = naive.rows.subarray((naive.m - window) * P);
    const auto = ready(stream.snapshot());
    expect(relativeDifference(auto.sampleCovariance, sampleCovariance(last, window, P).covariance)).toBeLessThan(TOLERANCE);
    expect(auto.counts.evictedBuckets).toBe(SECONDS - window);
  });

  // NIST StRD NumAcc4 style (values near 1e7 with spread 0.1, the test the architecture notes name for
  // careless accumulation), here with a slow drift so that the anchors must move: the stream must
  // still agree with the shifted two-pass batch computation to 1e-12 (measured: about 1e-14; before
  // the anchors moved by exactly what they were shifted, about 1e-10).
  it('values near 1e7 with spread 0.1 and a drift: stream equals batch to 1e-12 (NumAcc4-style, common practice)', () => {
    const random = new SeededRandom(21);
    const p = 3;
    const m = 3000;
    const stream = new TimeBucketedCovariance(p, { bucketSeconds: 1, maxBuckets: 8192 });
    const rows = new Float64Array(m * p);
    let x = 0;
    for (let t = 0; t < m; t++) {
      x = 0.9 * x + random.normal();
      for (let c = 0; c < p; c++) {
        const v = 1e7 + 0.1 * (x + random.normal()) + (c === 2 ? 1e-4 * t : 0);
        rows[t * p + c] = v;
        stream.add(c, t + 0.5, v);
      }
    }
    stream.flush();
    for (const b of [1, 8, 64, 50]) {
      const snap = ready(stream.snapshot(b));
      expect(relativeDifference(snap.covariance, multivariateBatchMeans(rows, m, p, { batchSize: b }).covariance)).toBeLessThan(TOLERANCE);
    }
  });

  // Statistical check (the model above): channels 0-2 share one slow process, so their means are
  // strongly correlated (gain signs give +, -, +); channel 3 is independent of them, so its
  // correlation estimate from a batches has sd about 1 / sqrt(a - 1) (normal theory, common
  // practice) and must lie within 4 of those.
  it('correlation of the means: shared process strongly correlated, independent channel within 4 / sqrt(a - 1) of zero', () => {
    const stream = new TimeBucketedCovariance(P, { bucketSeconds: 1, maxBuckets: 4096 });
    feed(stream, samples);
    stream.flush();
    const snap = ready(stream.snapshot());
    const r = snap.correlation as Float64Array;
    expect(r).not.toBeNull();
    expect(r[0 * P + 1]).toBeLessThan(-0.9);
    expect(r[0 * P + 2]).toBeGreaterThan(0.9);
    const bound = 4 / Math.sqrt(snap.batches - 1);
    for (const c of [0, 1, 2]) expect(Math.abs(r[c * P + 3] as number)).toBeLessThan(bound);
  });

  it('a bucket where a channel is missing is dropped and counted; gaps are counted as empty', () => {
    const gapped = samples.filter((s) => {
      const bucket = Math.floor(s.timeSeconds);
      if (s.channel === 2 && bucket >= 100 && bucket <= 102) return false; // channel 2 silent for 3 buckets
      return !(bucket >= 300 && bucket < 310); // the whole rig silent for 10 buckets
    });
    const stream = new TimeBucketedCovariance(P, { bucketSeconds: 1, maxBuckets: 4096 });
    feed(stream, gapped);
    stream.flush();
    const expected = naiveBucketRows(gapped, P, 1);
    expect(expected.m).toBe(SECONDS - 13);
    const snap = ready(stream.snapshot(16));
    expect(snap.buckets).toBe(expected.m);
    expect(snap.counts.incompleteBuckets).toBe(3);
    expect(snap.counts.emptyBuckets).toBe(10);
    expect(relativeDifference(snap.covariance, multivariateBatchMeans(expected.rows, expected.m, P, { batchSize: 16 }).covariance)).toBeLessThan(TOLERANCE);
  });

  it('late samples for a closed bucket are dropped and counted; a sample for the previous (still open) bucket is accepted', () => {
    const stream = new TimeBucketedCovariance(2, { bucketSeconds: 1, maxBuckets: 64 });
    const reference = new TimeBucketedCovariance(2, { bucketSeconds: 1, maxBuckets: 64 });
    const random = new SeededRandom(5);
    for (let second = 0; second < 40; second++) {
      const a = random.normal();
      const b = random.normal();
      // Channel 1's sample for this second arrives after channel 0's sample for the next second.
      stream.add(0, second + 0.5, a);
      reference.add(0, second + 0.5, a);
      if (second > 0) {
        stream.add(1, second - 0.5, b);
        reference.add(1, second - 0.5, b);
      }
      if (second === 30) {
        expect(stream.add(0, 10.2, 1e6)).toBe(false); // bucket 10 closed long ago
        expect(stream.add(1, 27.9, 1e6)).toBe(false); // bucket 27 closed when bucket 29 opened
      }
    }
    stream.flush();
    reference.flush();
    const snap = ready(stream.snapshot(4));
    const expected = ready(reference.snapshot(4));
    expect(snap.counts.lateSamples).toBe(2);
    expect(snap.counts.incompleteBuckets).toBe(1); // the last second: channel 1's sample never came
    expect(snap.buckets).toBe(39);
    expect(Array.from(snap.covariance)).toEqual(Array.from(expected.covariance));
    expect(stream.add(0, 5, 1)).toBe(false); // after flush, every bucket up to the newest is closed
  });

  it('rejects non-finite samples (counted) and bad channel indices (RangeError)', () => {
    const stream = new TimeBucketedCovariance(2, { bucketSeconds: 0.5, maxBuckets: 16 });
    expect(stream.add(0, Number.NaN, 1)).toBe(false);
    expect(stream.add(1, 1, Number.POSITIVE_INFINITY)).toBe(false);
    expect(() => stream.add(2, 1, 1)).toThrow(RangeError);
    const snap = stream.snapshot();
    expect(snap.ready).toBe(false);
    expect(snap.counts.rejectedSamples).toBe(2);
  });

  it('state() -> JSON -> restore() continues exactly as the uninterrupted accumulator', () => {
    for (const cut of [1, 777, 3001, samples.length - 5]) {
      const whole = new TimeBucketedCovariance(P, { bucketSeconds: 1, maxBuckets: 150, openBuckets: 3 });
      const first = new TimeBucketedCovariance(P, { bucketSeconds: 1, maxBuckets: 150, openBuckets: 3 });
      feed(whole, samples);
      feed(first, samples.slice(0, cut));
      const second = TimeBucketedCovariance.restore(JSON.parse(JSON.stringify(first.state())));
      feed(second, samples.slice(cut));
      whole.flush();
      second.flush();
      const a = ready(whole.snapshot());
      const b = ready(second.snapshot());
      expect(Array.from(b.covariance)).toEqual(Array.from(a.covariance));
      expect(Array.from(b.means)).toEqual(Array.from(a.means));
      expect(b.counts).toEqual(a.counts);
      expect(second.state()).toEqual(whole.state());
    }
  });

  it('reports too few buckets and too few batches as values, not exceptions', () => {
    const stream = new TimeBucketedCovariance(3, { bucketSeconds: 1, maxBuckets: 64 });
    for (let t = 0; t < 3; t++) for (let c = 0; c < 3; c++) stream.add(c, t + 0.1 * c, Math.sin(t + c));
    const early = stream.snapshot();
    expect(early.ready).toBe(false);
    stream.flush();
    const snap = ready(stream.snapshot());
    expect(snap.buckets).toBe(3);
    expect(snap.positiveDefinite).toBe(false);
    expect(snap.multivariateEss).toBeNull();
    expect(snap.reliable).toBe(false);
    const tooLarge = stream.snapshot(2);
    expect(tooLarge.ready).toBe(false);
  });
});
