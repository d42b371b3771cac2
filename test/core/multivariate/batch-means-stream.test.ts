import { describe, expect, it } from 'vitest';
import { BatchMeansStream, type BatchMeansSnapshot } from '../../../src/core/multivariate/batch-means-stream.js';
import { multivariateBatchMeans } from '../../../src/core/multivariate/multivariate-batch-means.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import { relativeDifference } from '../../helpers/reference.js';

// The row-fed accumulator against the batch computation (multivariateBatchMeans, itself checked
// against the numpy mcmcse re-implementation) on the same rows: streaming == batch is common
// practice for streaming code. Tolerance 1e-12 relative, as for TimeBucketedCovariance, which
// feeds its bucket rows to this accumulator (test/core/multivariate/time-bucketed-covariance.test.ts).

const P = 3;
const M = 5000;

function rows(seed: number): Float64Array {
  const random = new SeededRandom(seed);
  const out = new Float64Array(M * P);
  let common = 0;
  for (let t = 0; t < M; t++) {
    common = 0.9 * common + random.normal();
    // Offsets far from the spread and a slow drift: the anchors and the exact recomputations matter.
    for (let c = 0; c < P; c++) out[t * P + c] = [1e4, -30, 7][c]! + (c + 1) * common + 0.5 * random.normal() + 1e-3 * t;
  }
  return out;
}

function ready(snapshot: ReturnType<BatchMeansStream['snapshot']>): BatchMeansSnapshot {
  if (!snapshot.ready) throw new Error(snapshot.note);
  return snapshot;
}

describe('BatchMeansStream', () => {
  it('fed rows one at a time, equals multivariateBatchMeans on them (automatic, dyadic, non-dyadic and lugsail r = 2 batch sizes)', () => {
    const data = rows(3);
    const stream = new BatchMeansStream(P, { maxRows: 8192 });
    for (let t = 0; t < M; t++) stream.push(data.subarray(t * P, (t + 1) * P));
    expect(stream.rows).toBe(M);
    for (const [batchSize, lugsail] of [[undefined, false], [8, false], [70, false], [64, true]] as const) {
      const snap = ready(stream.snapshot(batchSize, { lugsail }));
      const batch = multivariateBatchMeans(data, M, P, { batchSize: snap.batchSize, lugsail, lugsailRatio: 2 });
      expect(snap.batches).toBe(batch.batches);
      expect(relativeDifference(snap.covariance, batch.covariance)).toBeLessThan(1e-12);
      for (let i = 0; i < P; i++) expect(Math.abs((snap.means[i] as number) - (batch.means[i] as number))).toBeLessThan(1e-12 * Math.abs(batch.means[i] as number));
    }
  });

  it('keeps only the newest maxRows rows, and says how many left', () => {
    const data = rows(4);
    const stream = new BatchMeansStream(P, { maxRows: 1000 });
    for (let t = 0; t < M; t++) stream.push(data.subarray(t * P, (t + 1) * P));
    expect(stream.rows).toBe(1000);
    expect(stream.evictedRows).toBe(M - 1000);
    const snap = ready(stream.snapshot(1));
    const batch = multivariateBatchMeans(data.subarray((M - 1000) * P), 1000, P, { batchSize: 1 });
    expect(relativeDifference(snap.covariance, batch.covariance)).toBeLessThan(1e-12);
  });

  it('state() -> JSON -> restore() continues exactly; a record of another version is refused', () => {
    const data = rows(5);
    const whole = new BatchMeansStream(P, { maxRows: 700 });
    const first = new BatchMeansStream(P, { maxRows: 700 });
    for (let t = 0; t < M; t++) whole.push(data.subarray(t * P, (t + 1) * P));
    for (let t = 0; t < 2345; t++) first.push(data.subarray(t * P, (t + 1) * P));
    const second = BatchMeansStream.restore(JSON.parse(JSON.stringify(first.state())));
    for (let t = 2345; t < M; t++) second.push(data.subarray(t * P, (t + 1) * P));
    expect(second.state()).toEqual(whole.state());
    expect(() => BatchMeansStream.restore({ ...first.state(), version: 2 } as never)).toThrow(/expected a batch-means-stream record of version 1/);
  });

  it('too few rows, or too few batches, come back as values, not exceptions', () => {
    const stream = new BatchMeansStream(P, { maxRows: 64 });
    expect(stream.snapshot()).toEqual({ ready: false, rows: 0, note: '0 rows: at least 2 are needed' });
    stream.push([1, 2, 3]);
    stream.push([2, 3, 5]);
    stream.push([0, 1, 1]);
    expect(stream.snapshot(2)).toMatchObject({ ready: false, rows: 3 });
    expect(ready(stream.snapshot(1)).positiveDefinite).toBe(false);
  });
});
