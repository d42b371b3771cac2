import { correlationFromCovariance } from './cholesky.js';
import { assembleBatchMeansResult, chooseLugsail, multivariateEss, type MultivariateBatchMeansResult } from './multivariate-batch-means.js';

/**
 * Covariance of the means of several channels sampled at different rates: multivariate batch means
 * over common time buckets, kept as a stream.
 *
 * Each channel's samples are averaged within common time buckets of width `bucketSeconds`, aligned
 * to absolute time (bucket index = floor(timeSeconds / bucketSeconds)), so that a 10 Hz and a 4 Hz
 * channel pair up bucket by bucket. A bucket in which every channel has at least one sample becomes
 * one row Y_t (the p bucket means) of a multivariate batch-means computation (D. Vats,
 * J. M. Flegal & G. L. Jones (2019), "Multivariate output analysis for Markov chain Monte Carlo",
 * Biometrika 106(2), 321-337; conventions of `multivariateBatchMeans`, mcmcse 1.5-0). The snapshot
 * gives the long-run covariance per bucket Sigma, the covariance of the channel means Sigma / m
 * (m buckets), the correlation matrix of the means, and the multivariate effective sample size
 * (in buckets).
 *
 * The means reported are means of bucket means (each complete bucket weighs the same), not means of
 * the raw samples.
 *
 * Buckets and samples that do not make a row, all counted in `counts`:
 * - `openBuckets` (default 2) most recent bucket indices accept samples, so that channels published
 *   in separate messages may arrive slightly out of step. A bucket is closed when a sample arrives
 *   for a bucket `openBuckets` or more indices later, or by `flush()`.
 * - A sample for a bucket already closed (or older than the open ones) is late: dropped and counted
 *   (`lateSamples`). It never reopens a bucket.
 * - A closed bucket in which some channel has no sample is dropped and counted
 *   (`incompleteBuckets`); bucket indices with no sample at all between buckets that had samples are
 *   counted as `emptyBuckets`. The complete buckets on either side of a dropped one are then treated
 *   as consecutive rows, which slightly shortens the apparent correlation in time.
 * - A non-finite time or value is dropped and counted (`rejectedSamples`).
 * - Rows older than the last `maxBuckets` complete buckets leave the window (`evictedBuckets`).
 *
 * Accumulators: a dyadic pyramid of batch means. Level j holds the means of aligned blocks of 2^j
 * consecutive rows (block k covers rows k 2^j ... (k + 1) 2^j - 1, counted since the start), a ring
 * of the complete blocks that lie inside the window, and the running sum S1_j and cross-product
 * matrix S2_j of those block means. With Ybar the mean of the m rows in the window and a_j blocks,
 *   sum_k (Ybar_k - Ybar)(Ybar_k - Ybar)^T = S2_j - S1_j Ybar^T - Ybar S1_j^T + a_j Ybar Ybar^T,
 * so Sigma_b = b / (a - 1) * that, for b = 2^j, costs O(p^2) per snapshot. Level 0 (b = 1) gives the
 * sample covariance Lambda of the rows (divisor m - 1) for mESS. In a growing window the blocks start
 * at the first row, exactly mcmcse's "batches over the first a * b rows, mean over all rows"; in a
 * sliding window the partial block at the front is left out of the batch sums in the same way as
 * mcmcse leaves out the rows past a * b.
 * Numerics: values enter shifted by per-channel anchors (the channel's first value). Whenever as many
 * rows have been added since the last time as the window holds (at least 64), the anchors move to the
 * window's means, every stored block mean and open bucket sum is shifted to match, and S1, S2 are
 * recomputed exactly from the rings, so that neither a drifting level nor many additions and
 * removals can build up cancellation or round-off (amortised O(p^2) per bucket).
 * Batch size: by default b = 2^j with j = round(log2(sqrt(m))), the dyadic size nearest sqrt(m) on a
 * log scale (as the project's univariate batch means in src/core/tau/blocking.ts), lowered while the
 * level has fewer than p + 1 batches. `snapshot(b)` takes any b: a power of two reads the pyramid,
 * any other b recomputes aligned blocks from the stored rows in O(m p + a p^2). Lugsail, on request,
 * uses r = 2 (the level below, b / 2), whose first-order bias is zero; mcmcse's r = 3 is not dyadic.
 *
 * Cost: O(1) per sample; per completed bucket O(p) to form the row plus amortised O(p^2) for the
 * pyramid (summed over the levels there are two blocks per row, and each block's outer product,
 * p (p + 1) / 2 multiply-adds, is added once and removed once: about 2 p^2 per bucket) and for the
 * periodic recomputation (about as much again); snapshot O(p^3) (the Cholesky tests). Memory:
 * about 2 maxBuckets p doubles for the rings, p^2 per level (log2(maxBuckets) levels), 2 p per open
 * bucket; `state()` carries all of it (about 4.4 MB of JSON for p = 30, maxBuckets = 3600).
 * Measured (Node 20, 2-core machine under load, maxBuckets = 3600, one sample per channel per
 * bucket): about 2, 4 and 16 microseconds per completed bucket for p = 3, 10 and 30, i.e. 0.6, 0.4
 * and 0.5 microseconds per sample; with 10 samples per channel per bucket about 0.1 microseconds per
 * sample for each p; a snapshot 20-110 microseconds.
 * Bucket boundaries follow floating-point division: a time stamped exactly on a boundary of a
 * bucketSeconds that is not a binary fraction (0.1 s) may fall on either side of it.
 */
export interface TimeBucketedCovarianceOptions {
  /** Width of a common time bucket, seconds. */
  bucketSeconds: number;
  /** Complete buckets kept in the window (the rows of the batch-means computation); at least 4. */
  maxBuckets: number;
  /** Most recent bucket indices that still accept samples (default 2). */
  openBuckets?: number;
}

export interface BucketCounts {
  /** Complete buckets that became rows, since the start. */
  completedBuckets: number;
  /** Closed buckets in which some channel had no sample: dropped. */
  incompleteBuckets: number;
  /** Bucket indices with no sample at all between buckets that had samples. */
  emptyBuckets: number;
  /** Samples for buckets already closed: dropped. */
  lateSamples: number;
  /** Samples with a non-finite time or value: dropped. */
  rejectedSamples: number;
  /** Rows that left the window of maxBuckets. */
  evictedBuckets: number;
}

export interface TimeBucketedSnapshotOptions {
  /** Lugsail with r = 2 (default false). */
  lugsail?: boolean;
}

export interface TimeBucketedNotReady {
  ready: false;
  /** Rows (complete buckets) in the window. */
  buckets: number;
  counts: BucketCounts;
  note: string;
}

export interface TimeBucketedSnapshot extends MultivariateBatchMeansResult {
  ready: true;
  /** Rows (complete buckets) in the window: the n of the batch-means computation. */
  buckets: number;
  /** Correlation matrix of the channel means; null when a channel's variance is not positive. */
  correlation: Float64Array | null;
  /** sqrt of the diagonal of meanCovariance: standard uncertainty of each channel's mean. */
  standardUncertainties: Float64Array;
  /** Sample covariance of the bucket means (divisor m - 1), Lambda in mESS. */
  sampleCovariance: Float64Array;
  /** Multivariate effective sample size, in buckets; null when a matrix is not positive definite. */
  multivariateEss: number | null;
  counts: BucketCounts;
}

/** Plain-data state for persistence (JSON-safe). */
export interface TimeBucketedCovarianceState {
  version: 1;
  channelCount: number;
  bucketSeconds: number;
  maxBuckets: number;
  openBuckets: number;
  anchors: number[];
  anchored: boolean[];
  newestBucket: number | null;
  closedThrough: number | null;
  lastClosedWithData: number | null;
  slots: { index: number | null; sums: number[]; counts: number[] }[];
  totalRows: number;
  rowsSinceRecompute: number;
  levels: { blocks: number[]; firstBlock: number; partialSums: number[]; partialCount: number; sum: number[]; crossProducts: number[] }[];
  counts: BucketCounts;
}

/** Fewest rows added between two exact recomputations of the sums. */
const RECOMPUTE_MINIMUM = 64;

class PyramidLevel {
  readonly capacity: number;
  readonly ring: Float64Array;
  head = 0;
  count = 0;
  /** Absolute block index of the oldest block in the ring. */
  firstBlock = 0;
  /** Sum of the level-below block means that will make the next block (unused at level 0). */
  readonly partialSums: Float64Array;
  partialCount = 0;
  /** Sum of the block means in the ring. */
  readonly sum: Float64Array;
  /** Sum of their outer products; lower triangle kept, row-major p x p. */
  readonly crossProducts: Float64Array;

  constructor(
    readonly p: number,
    capacity: number,
  ) {
    this.capacity = capacity;
    this.ring = new Float64Array(capacity * p);
    this.partialSums = new Float64Array(p);
    this.sum = new Float64Array(p);
    this.crossProducts = new Float64Array(p * p);
  }

  /** Row offset in `ring` of the i-th oldest block. */
  offset(i: number): number {
    return ((this.head + i) % this.capacity) * this.p;
  }

  push(block: ArrayLike<number>): void {
    const p = this.p;
    const at = this.offset(this.count);
    for (let i = 0; i < p; i++) this.ring[at + i] = block[i] as number;
    this.count++;
    this.accumulate(at, 1);
  }

  /** Removes the oldest block. */
  shift(): void {
    this.accumulate(this.offset(0), -1);
    this.head = (this.head + 1) % this.capacity;
    this.count--;
    this.firstBlock++;
  }

  private accumulate(at: number, sign: number): void {
    const p = this.p;
    const ring = this.ring;
    for (let i = 0; i < p; i++) {
      const vi = ring[at + i] as number;
      this.sum[i] = (this.sum[i] as number) + sign * vi;
      const row = i * p;
      const scaled = sign * vi;
      for (let j = 0; j <= i; j++) this.crossProducts[row + j] = (this.crossProducts[row + j] as number) + scaled * (ring[at + j] as number);
    }
  }

  /** Exact recomputation of the sums from the ring. */
  recompute(): void {
    this.sum.fill(0);
    this.crossProducts.fill(0);
    const saved = this.count;
    this.count = 0;
    for (let k = 0; k < saved; k++) {
      this.count++;
      this.accumulate(this.offset(k), 1);
    }
  }
}

export class TimeBucketedCovariance {
  readonly channelCount: number;
  readonly bucketSeconds: number;
  readonly maxBuckets: number;
  readonly openBuckets: number;
  private readonly anchors: Float64Array;
  private readonly anchored: Uint8Array;
  private newestBucket: number | null = null;
  /** Every bucket index at or below this is closed. */
  private closedThrough: number | null = null;
  private lastClosedWithData: number | null = null;
  /** Bucket index held by each open slot, meaningful where slotUsed is 1. */
  private readonly slotIndex: Float64Array;
  private readonly slotUsed: Uint8Array;
  private readonly slotSums: Float64Array;
  private readonly slotCounts: Float64Array;
  private totalRows = 0;
  private rowsSinceRecompute = 0;
  private readonly levels: PyramidLevel[];
  private readonly counts: BucketCounts = { completedBuckets: 0, incompleteBuckets: 0, emptyBuckets: 0, lateSamples: 0, rejectedSamples: 0, evictedBuckets: 0 };
  private readonly row: Float64Array;
  private readonly carry: Float64Array;

  constructor(channelCount: number, options: TimeBucketedCovarianceOptions) {
    if (!Number.isInteger(channelCount) || channelCount < 1) throw new RangeError('TimeBucketedCovariance requires at least one channel');
    if (!(options.bucketSeconds > 0) || !Number.isFinite(options.bucketSeconds)) throw new RangeError('TimeBucketedCovariance requires a positive bucketSeconds');
    if (!Number.isInteger(options.maxBuckets) || options.maxBuckets < 4) throw new RangeError('TimeBucketedCovariance requires maxBuckets of at least 4');
    const openBuckets = options.openBuckets ?? 2;
    if (!Number.isInteger(openBuckets) || openBuckets < 1) throw new RangeError('TimeBucketedCovariance requires openBuckets of at least 1');
    this.channelCount = channelCount;
    this.bucketSeconds = options.bucketSeconds;
    this.maxBuckets = options.maxBuckets;
    this.openBuckets = openBuckets;
    const p = channelCount;
    this.anchors = new Float64Array(p);
    this.anchored = new Uint8Array(p);
    this.slotIndex = new Float64Array(openBuckets);
    this.slotUsed = new Uint8Array(openBuckets);
    this.slotSums = new Float64Array(openBuckets * p);
    this.slotCounts = new Float64Array(openBuckets * p);
    this.levels = [];
    for (let j = 0; Math.floor(options.maxBuckets / 2 ** j) >= 2; j++) this.levels.push(new PyramidLevel(p, Math.floor(options.maxBuckets / 2 ** j)));
    this.row = new Float64Array(p);
    this.carry = new Float64Array(p);
  }

  /**
   * Adds one sample. Returns false when the sample was dropped (late or non-finite; counted).
   * @throws RangeError for a channel index outside 0 ... channelCount - 1
   */
  add(channel: number, timeSeconds: number, value: number): boolean {
    if (!Number.isInteger(channel) || channel < 0 || channel >= this.channelCount) throw new RangeError(`channel must be an integer in 0..${this.channelCount - 1}`);
    if (!Number.isFinite(timeSeconds) || !Number.isFinite(value)) {
      this.counts.rejectedSamples++;
      return false;
    }
    const index = Math.floor(timeSeconds / this.bucketSeconds);
    if (this.newestBucket === null) {
      this.newestBucket = index;
      this.closedThrough = index - this.openBuckets;
    } else if (index > this.newestBucket) {
      this.advance(index);
    }
    if (index <= (this.closedThrough as number)) {
      this.counts.lateSamples++;
      return false;
    }
    const slot = modulo(index, this.openBuckets);
    if (this.slotUsed[slot] === 0 || this.slotIndex[slot] !== index) {
      // The slot's previous bucket is at least openBuckets older, hence closed already.
      this.slotIndex[slot] = index;
      this.slotUsed[slot] = 1;
      this.slotSums.fill(0, slot * this.channelCount, (slot + 1) * this.channelCount);
      this.slotCounts.fill(0, slot * this.channelCount, (slot + 1) * this.channelCount);
    }
    if (this.anchored[channel] === 0) {
      this.anchors[channel] = value;
      this.anchored[channel] = 1;
    }
    const at = slot * this.channelCount + channel;
    this.slotSums[at] = (this.slotSums[at] as number) + (value - (this.anchors[channel] as number));
    this.slotCounts[at] = (this.slotCounts[at] as number) + 1;
    return true;
  }

  /** Closes every open bucket (end of a test point); later samples for them count as late. */
  flush(): void {
    if (this.newestBucket === null) return;
    this.closeThrough(this.newestBucket);
  }

  /** Rows (complete buckets) currently in the window. */
  get buckets(): number {
    return (this.levels[0] as PyramidLevel).count;
  }

  /**
   * Covariance of the channel means over the window. `batchSize` defaults to the dyadic size nearest
   * sqrt(buckets) (see the module comment). O(p^3) for a power of two, O(m p + a p^2 + p^3) else.
   */
  snapshot(batchSize?: number, options: TimeBucketedSnapshotOptions = {}): TimeBucketedSnapshot | TimeBucketedNotReady {
    const p = this.channelCount;
    const level0 = this.levels[0] as PyramidLevel;
    const m = level0.count;
    const counts = { ...this.counts };
    if (m < 2) return { ready: false, buckets: m, counts, note: `${m} complete bucket${m === 1 ? '' : 's'}: at least 2 are needed` };
    if (batchSize !== undefined && (!Number.isInteger(batchSize) || batchSize < 1)) throw new RangeError('snapshot requires a positive integer batch size');
    const shiftedMean = new Float64Array(p);
    for (let i = 0; i < p; i++) shiftedMean[i] = (level0.sum[i] as number) / m;
    const b = batchSize ?? this.automaticBatchSize(m);
    const notes: string[] = [];
    const plain = this.batchCovariance(b, shiftedMean);
    if (plain === null) {
      return { ready: false, buckets: m, counts, note: `batch size ${b} leaves fewer than 2 batches in ${m} buckets` };
    }
    let covariance = plain.covariance;
    let lugsailUsed = false;
    if (options.lugsail) {
      if (b < 4) {
        notes.push(`batch size ${b} below 2r = 4: lugsail not applied`);
      } else {
        const small = this.batchCovariance(Math.floor(b / 2), shiftedMean);
        if (small !== null) ({ covariance, lugsailUsed } = chooseLugsail(plain.covariance, small.covariance, p, notes));
      }
    }
    const lambda = this.batchCovariance(1, shiftedMean) as { covariance: Float64Array; batches: number };
    const means = new Float64Array(p);
    for (let i = 0; i < p; i++) means[i] = (this.anchors[i] as number) + (shiftedMean[i] as number);
    const result = assembleBatchMeansResult(covariance, m, p, b, plain.batches, means, lugsailUsed, notes);
    const standardUncertainties = new Float64Array(p);
    for (let i = 0; i < p; i++) standardUncertainties[i] = Math.sqrt(Math.max(0, result.meanCovariance[i * p + i] as number));
    return {
      ...result,
      ready: true,
      buckets: m,
      correlation: correlationFromCovariance(result.covariance, p),
      standardUncertainties,
      sampleCovariance: lambda.covariance,
      multivariateEss: result.positiveDefinite ? multivariateEss(m, lambda.covariance, result.covariance, p) : null,
      counts,
    };
  }

  /** Plain-data copy of the whole state (JSON-safe). */
  state(): TimeBucketedCovarianceState {
    const p = this.channelCount;
    return {
      version: 1,
      channelCount: p,
      bucketSeconds: this.bucketSeconds,
      maxBuckets: this.maxBuckets,
      openBuckets: this.openBuckets,
      anchors: Array.from(this.anchors),
      anchored: Array.from(this.anchored, (v) => v === 1),
      newestBucket: this.newestBucket,
      closedThrough: this.closedThrough,
      lastClosedWithData: this.lastClosedWithData,
      slots: Array.from(this.slotIndex, (index, s) => ({
        index: this.slotUsed[s] === 1 ? index : null,
        sums: Array.from(this.slotSums.subarray(s * p, (s + 1) * p)),
        counts: Array.from(this.slotCounts.subarray(s * p, (s + 1) * p)),
      })),
      totalRows: this.totalRows,
      rowsSinceRecompute: this.rowsSinceRecompute,
      levels: this.levels.map((level) => {
        const blocks: number[] = [];
        for (let k = 0; k < level.count; k++) {
          const at = level.offset(k);
          for (let i = 0; i < p; i++) blocks.push(level.ring[at + i] as number);
        }
        return {
          blocks,
          firstBlock: level.firstBlock,
          partialSums: Array.from(level.partialSums),
          partialCount: level.partialCount,
          sum: Array.from(level.sum),
          crossProducts: Array.from(level.crossProducts),
        };
      }),
      counts: { ...this.counts },
    };
  }

  /**
   * Rebuilds an accumulator from `state()`; it continues exactly as the original would.
   * @throws RangeError when the state does not fit its own configuration
   */
  static restore(state: TimeBucketedCovarianceState): TimeBucketedCovariance {
    if (state.version !== 1) throw new RangeError(`unknown TimeBucketedCovariance state version ${String(state.version)}`);
    const out = new TimeBucketedCovariance(state.channelCount, { bucketSeconds: state.bucketSeconds, maxBuckets: state.maxBuckets, openBuckets: state.openBuckets });
    const p = state.channelCount;
    const check = (ok: boolean, what: string) => {
      if (!ok) throw new RangeError(`TimeBucketedCovariance state: ${what} does not fit`);
    };
    check(state.anchors.length === p && state.anchored.length === p, 'anchors');
    check(state.slots.length === state.openBuckets, 'open buckets');
    check(state.levels.length === out.levels.length, 'levels');
    out.anchors.set(state.anchors);
    state.anchored.forEach((v, i) => (out.anchored[i] = v ? 1 : 0));
    out.newestBucket = state.newestBucket;
    out.closedThrough = state.closedThrough;
    out.lastClosedWithData = state.lastClosedWithData;
    state.slots.forEach((slot, s) => {
      check(slot.sums.length === p && slot.counts.length === p, 'open bucket sums');
      out.slotIndex[s] = slot.index ?? 0;
      out.slotUsed[s] = slot.index === null ? 0 : 1;
      out.slotSums.set(slot.sums, s * p);
      out.slotCounts.set(slot.counts, s * p);
    });
    out.totalRows = state.totalRows;
    out.rowsSinceRecompute = state.rowsSinceRecompute;
    state.levels.forEach((saved, j) => {
      const level = out.levels[j] as PyramidLevel;
      const blockCount = saved.blocks.length / p;
      check(Number.isInteger(blockCount) && blockCount <= level.capacity, `level ${j} blocks`);
      check(saved.partialSums.length === p && saved.sum.length === p && saved.crossProducts.length === p * p, `level ${j} sums`);
      level.ring.set(saved.blocks);
      level.head = 0;
      level.count = blockCount;
      level.firstBlock = saved.firstBlock;
      level.partialSums.set(saved.partialSums);
      level.partialCount = saved.partialCount;
      level.sum.set(saved.sum);
      level.crossProducts.set(saved.crossProducts);
    });
    Object.assign(out.counts, state.counts);
    return out;
  }

  /** Dyadic batch size nearest sqrt(m) on a log scale, lowered while there are fewer than p + 1 batches. */
  private automaticBatchSize(m: number): number {
    let j = Math.min(Math.round(0.5 * Math.log2(m)), this.levels.length - 1);
    while (j > 0 && (this.levels[j] as PyramidLevel).count < this.channelCount + 1) j--;
    return 2 ** j;
  }

  /**
   * b / (a - 1) sum_k (Ybar_k - Ybar)(Ybar_k - Ybar)^T over the aligned complete blocks of b rows in
   * the window, in shifted units; null when there are fewer than 2 such blocks.
   */
  private batchCovariance(b: number, shiftedMean: Float64Array): { covariance: Float64Array; batches: number } | null {
    const p = this.channelCount;
    const j = Math.log2(b);
    if (Number.isInteger(j) && j < this.levels.length) {
      const level = this.levels[j] as PyramidLevel;
      const a = level.count;
      if (a < 2) return null;
      const out = new Float64Array(p * p);
      for (let i = 0; i < p; i++) {
        const si = level.sum[i] as number;
        const mi = shiftedMean[i] as number;
        for (let k = 0; k <= i; k++) {
          const deviations = (level.crossProducts[i * p + k] as number) - si * (shiftedMean[k] as number) - mi * (level.sum[k] as number) + a * mi * (shiftedMean[k] as number);
          const v = (deviations * b) / (a - 1);
          out[i * p + k] = v;
          out[k * p + i] = v;
        }
      }
      return { covariance: out, batches: a };
    }
    return this.batchCovarianceFromRows(b, shiftedMean);
  }

  /** Aligned blocks of b rows recomputed from the stored rows: O(m p + a p^2). */
  private batchCovarianceFromRows(b: number, shiftedMean: Float64Array): { covariance: Float64Array; batches: number } | null {
    const p = this.channelCount;
    const level0 = this.levels[0] as PyramidLevel;
    const firstRow = level0.firstBlock;
    const endRow = firstRow + level0.count;
    const firstBatch = Math.ceil(firstRow / b);
    const endBatch = Math.floor(endRow / b);
    const a = endBatch - firstBatch;
    if (a < 2) return null;
    const out = new Float64Array(p * p);
    const deviation = new Float64Array(p);
    for (let k = firstBatch; k < endBatch; k++) {
      deviation.fill(0);
      for (let t = k * b; t < (k + 1) * b; t++) {
        const at = level0.offset(t - firstRow);
        for (let i = 0; i < p; i++) deviation[i] = (deviation[i] as number) + ((level0.ring[at + i] as number) - (shiftedMean[i] as number));
      }
      for (let i = 0; i < p; i++) deviation[i] = (deviation[i] as number) / b;
      for (let i = 0; i < p; i++) for (let k2 = 0; k2 <= i; k2++) out[i * p + k2] = (out[i * p + k2] as number) + (deviation[i] as number) * (deviation[k2] as number);
    }
    const scale = b / (a - 1);
    for (let i = 0; i < p; i++) {
      for (let k2 = 0; k2 <= i; k2++) {
        const v = (out[i * p + k2] as number) * scale;
        out[i * p + k2] = v;
        out[k2 * p + i] = v;
      }
    }
    return { covariance: out, batches: a };
  }

  /** A sample arrived for bucket `index` > newest: close what falls out of the open range. */
  private advance(index: number): void {
    this.newestBucket = index;
    const limit = index - this.openBuckets;
    if (limit > (this.closedThrough as number)) this.closeThrough(limit);
  }

  /** Closes every open bucket with index <= limit, oldest first. */
  private closeThrough(limit: number): void {
    // openBuckets is small: pick the oldest open slot at or below the limit until none is left.
    for (;;) {
      let oldest = -1;
      for (let s = 0; s < this.openBuckets; s++) {
        if (this.slotUsed[s] === 1 && (this.slotIndex[s] as number) <= limit && (oldest < 0 || (this.slotIndex[s] as number) < (this.slotIndex[oldest] as number))) oldest = s;
      }
      if (oldest < 0) break;
      this.closeSlot(oldest);
    }
    this.closedThrough = Math.max(this.closedThrough as number, limit);
  }

  private closeSlot(slot: number): void {
    const p = this.channelCount;
    const index = this.slotIndex[slot] as number;
    this.slotUsed[slot] = 0;
    let present = 0;
    for (let i = 0; i < p; i++) if ((this.slotCounts[slot * p + i] as number) > 0) present++;
    if (present === 0) return;
    if (this.lastClosedWithData !== null) this.counts.emptyBuckets += Math.max(0, index - this.lastClosedWithData - 1);
    this.lastClosedWithData = index;
    if (present < p) {
      this.counts.incompleteBuckets++;
      return;
    }
    for (let i = 0; i < p; i++) this.row[i] = (this.slotSums[slot * p + i] as number) / (this.slotCounts[slot * p + i] as number);
    this.addRow(this.row);
  }

  /** One complete bucket: evict what leaves the window, then push through the pyramid. */
  private addRow(row: Float64Array): void {
    const p = this.channelCount;
    this.totalRows++;
    this.counts.completedBuckets++;
    const windowStart = Math.max(0, this.totalRows - this.maxBuckets);
    for (let j = 0; j < this.levels.length; j++) {
      const level = this.levels[j] as PyramidLevel;
      while (level.count > 0 && level.firstBlock * 2 ** j < windowStart) {
        level.shift();
        if (j === 0) this.counts.evictedBuckets++;
      }
    }
    const carry = this.carry;
    carry.set(row);
    for (let j = 0; j < this.levels.length; j++) {
      const level = this.levels[j] as PyramidLevel;
      if (j > 0) {
        for (let i = 0; i < p; i++) level.partialSums[i] = (level.partialSums[i] as number) + (carry[i] as number);
        level.partialCount++;
        if (level.partialCount < 2) break;
        for (let i = 0; i < p; i++) carry[i] = (level.partialSums[i] as number) / 2;
        level.partialSums.fill(0);
        level.partialCount = 0;
      }
      if (level.count === 0) level.firstBlock = Math.floor((this.totalRows - 1) / 2 ** j);
      level.push(carry);
    }
    this.rowsSinceRecompute++;
    if (this.rowsSinceRecompute >= Math.max(RECOMPUTE_MINIMUM, (this.levels[0] as PyramidLevel).count)) this.reanchor();
  }

  /** Moves the anchors to the window means, shifts everything stored, recomputes the sums exactly. */
  private reanchor(): void {
    const p = this.channelCount;
    const level0 = this.levels[0] as PyramidLevel;
    const m = level0.count;
    const delta = new Float64Array(p);
    for (let i = 0; i < p; i++) {
      if (m === 0) break;
      // Shift by what the anchor really moved (Fast2Sum: fl(a + d) - a is exact for |a| >= |d|), so
      // that the stored values and the new anchor stay consistent to the last bit of the anchor.
      const old = this.anchors[i] as number;
      const moved = old + (level0.sum[i] as number) / m;
      delta[i] = moved - old;
      this.anchors[i] = moved;
    }
    for (const level of this.levels) {
      for (let k = 0; k < level.count; k++) {
        const at = level.offset(k);
        for (let i = 0; i < p; i++) level.ring[at + i] = (level.ring[at + i] as number) - (delta[i] as number);
      }
      for (let i = 0; i < p; i++) level.partialSums[i] = (level.partialSums[i] as number) - level.partialCount * (delta[i] as number);
      level.recompute();
    }
    for (let s = 0; s < this.openBuckets; s++) {
      for (let i = 0; i < p; i++) {
        const at = s * p + i;
        this.slotSums[at] = (this.slotSums[at] as number) - (this.slotCounts[at] as number) * (delta[i] as number);
      }
    }
    this.rowsSinceRecompute = 0;
  }
}

function modulo(a: number, n: number): number {
  const r = a % n;
  return r < 0 ? r + n : r;
}

