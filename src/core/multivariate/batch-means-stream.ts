import { correlationFromCovariance } from './cholesky.js';
import { assembleBatchMeansResult, chooseLugsail, multivariateEss, type MultivariateBatchMeansResult } from './multivariate-batch-means.js';
import { expectRecord, type StateRecord } from '../state/record.js';

/**
 * Row-fed multivariate batch means, kept as a stream: rows Y_t (one value per channel) go in one
 * at a time, the most recent `maxRows` of them form the window, and a snapshot gives the long-run
 * covariance Sigma of the channel means, the covariance of the means Sigma / m (m rows), their
 * correlation, the sample covariance of the rows and the multivariate effective sample size.
 *
 * Method: D. Vats, J. M. Flegal & G. L. Jones (2019), "Multivariate output analysis for Markov chain
 * Monte Carlo", Biometrika 106(2), 321-337; conventions of `multivariateBatchMeans` (mcmcse 1.5-0).
 * The rows are whatever the caller forms: TimeBucketedCovariance makes them from common time
 * buckets of channels sampled at different rates, the derived-result engine from its own buckets
 * (src/engine/derived/derived-engine.ts), so samples are bucketed once.
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
 * Numerics: rows enter shifted by per-channel anchors (the first row). Whenever as many rows have
 * been added since the last time as the window holds (at least 64), the anchors move to the window's
 * means, every stored block mean is shifted to match, and S1, S2 are recomputed exactly from the
 * rings, so that neither a drifting level nor many additions and removals can build up cancellation
 * or round-off (amortised O(p^2) per row).
 * Batch size: by default b = 2^j with j = round(log2(sqrt(m))), the dyadic size nearest sqrt(m) on a
 * log scale (as the project's univariate batch means in src/core/tau/blocking.ts), lowered while the
 * level has fewer than p + 1 batches. `snapshot(b)` takes any b: a power of two reads the pyramid,
 * any other b recomputes aligned blocks from the stored rows in O(m p + a p^2). Lugsail, on request,
 * uses r = 2 (the level below, b / 2), whose first-order bias is zero; mcmcse's r = 3 is not dyadic.
 *
 * Cost: per row amortised O(p^2) (summed over the levels there are two blocks per row, and each
 * block's outer product, p (p + 1) / 2 multiply-adds, is added once and removed once), plus as much
 * again for the periodic recomputation; snapshot O(p^3) (the Cholesky tests). Memory: about
 * 2 maxRows p doubles for the rings and p^2 per level (log2(maxRows) levels).
 */
export interface BatchMeansStreamOptions {
  /** Rows kept in the window; at least 4. */
  maxRows: number;
}

export interface BatchMeansSnapshotOptions {
  /** Lugsail with r = 2 (default false). */
  lugsail?: boolean;
}

export interface BatchMeansNotReady {
  ready: false;
  /** Rows in the window. */
  rows: number;
  note: string;
}

export interface BatchMeansSnapshot extends MultivariateBatchMeansResult {
  ready: true;
  /** Rows in the window: the n of the batch-means computation. */
  rows: number;
  /** Correlation matrix of the channel means; null when a channel's variance is not positive. */
  correlation: Float64Array | null;
  /** sqrt of the diagonal of meanCovariance: standard uncertainty of each channel's mean. */
  standardUncertainties: Float64Array;
  /** Sample covariance of the rows (divisor m - 1), Lambda in mESS. */
  sampleCovariance: Float64Array;
  /** Multivariate effective sample size, in rows; null when a matrix is not positive definite. */
  multivariateEss: number | null;
}

/** Plain-data state for persistence (JSON-safe): a named, versioned record. */
export interface BatchMeansStreamState extends StateRecord<'batch-means-stream', 1> {
  channelCount: number;
  maxRows: number;
  anchors: number[];
  anchored: boolean;
  totalRows: number;
  rowsSinceRecompute: number;
  evictedRows: number;
  levels: { blocks: number[]; firstBlock: number; partialSums: number[]; partialCount: number; sum: number[]; crossProducts: number[] }[];
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

export class BatchMeansStream {
  readonly channelCount: number;
  readonly maxRows: number;
  private readonly anchors: Float64Array;
  private anchored = false;
  private totalRows = 0;
  private rowsSinceRecompute = 0;
  private evicted = 0;
  private readonly levels: PyramidLevel[];
  private readonly shifted: Float64Array;
  private readonly carry: Float64Array;

  constructor(channelCount: number, options: BatchMeansStreamOptions) {
    if (!Number.isInteger(channelCount) || channelCount < 1) throw new RangeError('BatchMeansStream requires at least one channel');
    if (!Number.isInteger(options.maxRows) || options.maxRows < 4) throw new RangeError('BatchMeansStream requires maxRows of at least 4');
    this.channelCount = channelCount;
    this.maxRows = options.maxRows;
    this.anchors = new Float64Array(channelCount);
    this.levels = [];
    for (let j = 0; Math.floor(options.maxRows / 2 ** j) >= 2; j++) this.levels.push(new PyramidLevel(channelCount, Math.floor(options.maxRows / 2 ** j)));
    this.shifted = new Float64Array(channelCount);
    this.carry = new Float64Array(channelCount);
  }

  /** Rows in the window. */
  get rows(): number {
    return (this.levels[0] as PyramidLevel).count;
  }

  /** Rows added since the start. */
  get rowsAdded(): number {
    return this.totalRows;
  }

  /** Rows that left the window of maxRows. */
  get evictedRows(): number {
    return this.evicted;
  }

  /** Adds one row (channelCount finite values): evicts what leaves the window, then pushes through the pyramid. */
  push(row: ArrayLike<number>): void {
    const p = this.channelCount;
    if (!this.anchored) {
      for (let i = 0; i < p; i++) this.anchors[i] = row[i] as number;
      this.anchored = true;
    }
    for (let i = 0; i < p; i++) this.shifted[i] = (row[i] as number) - (this.anchors[i] as number);
    this.pushShifted(this.shifted);
  }

  /**
   * Adds one row given as offsets from the current anchors (`anchor(i)`), as TimeBucketedCovariance
   * forms them (it keeps its open buckets' sums in those offsets, so no absolute value is formed).
   * Returns how far each anchor moved when the row made a re-anchoring due (see the module comment),
   * else null: a caller keeping its own offsets shifts them by as much.
   */
  pushShifted(shifted: ArrayLike<number>): Float64Array | null {
    const p = this.channelCount;
    this.totalRows++;
    const windowStart = Math.max(0, this.totalRows - this.maxRows);
    for (let j = 0; j < this.levels.length; j++) {
      const level = this.levels[j] as PyramidLevel;
      while (level.count > 0 && level.firstBlock * 2 ** j < windowStart) {
        level.shift();
        if (j === 0) this.evicted++;
      }
    }
    const carry = this.carry;
    for (let i = 0; i < p; i++) carry[i] = shifted[i] as number;
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
    return this.rowsSinceRecompute >= Math.max(RECOMPUTE_MINIMUM, this.rows) ? this.reanchor() : null;
  }

  /** The anchor of channel i (rows are kept as offsets from it); NaN before the first row. */
  anchor(i: number): number {
    return this.anchored ? (this.anchors[i] as number) : Number.NaN;
  }

  /** Sets the anchors before the first row (a caller that keeps its own offsets from them: TimeBucketedCovariance). */
  setAnchors(values: ArrayLike<number>): void {
    if (this.totalRows > 0) throw new RangeError('BatchMeansStream: the anchors are set before the first row');
    for (let i = 0; i < this.channelCount; i++) this.anchors[i] = values[i] as number;
    this.anchored = true;
  }

  /** Moves the anchors to the window means, shifts everything stored, recomputes the sums exactly; returns how far each anchor moved. */
  private reanchor(): Float64Array {
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
    this.rowsSinceRecompute = 0;
    return delta;
  }

  /**
   * Covariance of the channel means over the window. `batchSize` defaults to the dyadic size nearest
   * sqrt(rows) (see the module comment). O(p^3) for a power of two, O(m p + a p^2 + p^3) else.
   */
  snapshot(batchSize?: number, options: BatchMeansSnapshotOptions = {}): BatchMeansSnapshot | BatchMeansNotReady {
    const p = this.channelCount;
    const level0 = this.levels[0] as PyramidLevel;
    const m = level0.count;
    if (m < 2) return { ready: false, rows: m, note: `${m} row${m === 1 ? '' : 's'}: at least 2 are needed` };
    if (batchSize !== undefined && (!Number.isInteger(batchSize) || batchSize < 1)) throw new RangeError('snapshot requires a positive integer batch size');
    const shiftedMean = new Float64Array(p);
    for (let i = 0; i < p; i++) shiftedMean[i] = (level0.sum[i] as number) / m;
    const b = batchSize ?? this.automaticBatchSize(m);
    const notes: string[] = [];
    const plain = this.batchCovariance(b, shiftedMean);
    if (plain === null) return { ready: false, rows: m, note: `batch size ${b} leaves fewer than 2 batches in ${m} rows` };
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
      rows: m,
      correlation: correlationFromCovariance(result.covariance, p),
      standardUncertainties,
      sampleCovariance: lambda.covariance,
      multivariateEss: result.positiveDefinite ? multivariateEss(m, lambda.covariance, result.covariance, p) : null,
    };
  }

  /** Plain-data copy of the whole state (JSON-safe). */
  state(): BatchMeansStreamState {
    const p = this.channelCount;
    return {
      record: 'batch-means-stream',
      version: 1,
      channelCount: p,
      maxRows: this.maxRows,
      anchors: Array.from(this.anchors),
      anchored: this.anchored,
      totalRows: this.totalRows,
      rowsSinceRecompute: this.rowsSinceRecompute,
      evictedRows: this.evicted,
      levels: this.levels.map((level) => {
        const blocks: number[] = [];
        for (let k = 0; k < level.count; k++) {
          const at = level.offset(k);
          for (let i = 0; i < p; i++) blocks.push(level.ring[at + i] as number);
        }
        return { blocks, firstBlock: level.firstBlock, partialSums: Array.from(level.partialSums), partialCount: level.partialCount, sum: Array.from(level.sum), crossProducts: Array.from(level.crossProducts) };
      }),
    };
  }

  /**
   * Rebuilds an accumulator from `state()`; it continues exactly as the original would.
   * @throws RangeError for a record of another name or version, or one that does not fit its own configuration
   */
  static restore(state: BatchMeansStreamState): BatchMeansStream {
    expectRecord(state, 'batch-means-stream', 1);
    const out = new BatchMeansStream(state.channelCount, { maxRows: state.maxRows });
    const p = state.channelCount;
    const check = (ok: boolean, what: string) => {
      if (!ok) throw new RangeError(`BatchMeansStream state: ${what} does not fit`);
    };
    check(state.anchors.length === p, 'anchors');
    check(state.levels.length === out.levels.length, 'levels');
    out.anchors.set(state.anchors);
    out.anchored = state.anchored;
    out.totalRows = state.totalRows;
    out.rowsSinceRecompute = state.rowsSinceRecompute;
    out.evicted = state.evictedRows;
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
}
