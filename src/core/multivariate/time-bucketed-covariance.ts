import { BatchMeansStream, type BatchMeansSnapshot, type BatchMeansStreamState } from './batch-means-stream.js';
import { expectRecord, type StateRecord } from '../state/record.js';

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
 * Rows: each complete bucket's row goes to a BatchMeansStream (src/core/multivariate/
 * batch-means-stream.ts: the dyadic pyramid of batch means, the window of maxBuckets rows, the
 * batch size, lugsail, the periodic exact recomputation). The open buckets' sums are kept as
 * offsets from that accumulator's anchors (each channel's first sample until the first row), and
 * follow them when it re-anchors, so no absolute value is formed on the way.
 *
 * Cost: O(1) per sample; per completed bucket O(p) to form the row plus the accumulator's amortised
 * O(p^2); snapshot O(p^3) (the Cholesky tests). Memory: the accumulator's (about 2 maxBuckets p
 * doubles and p^2 per level), 2 p per open bucket; `state()` carries all of it (about 4.4 MB of JSON
 * for p = 30, maxBuckets = 3600).
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

/** The accumulator's snapshot, in buckets (`rows` is `buckets`), with the bucket counts. */
export type TimeBucketedSnapshot = Omit<BatchMeansSnapshot, 'rows'> & {
  /** Rows (complete buckets) in the window: the n of the batch-means computation. */
  buckets: number;
  counts: BucketCounts;
};

/** Plain-data state for persistence (JSON-safe): a named, versioned record. */
export interface TimeBucketedCovarianceState extends StateRecord<'time-bucketed-covariance', 2> {
  channelCount: number;
  bucketSeconds: number;
  maxBuckets: number;
  openBuckets: number;
  /** Offsets of open buckets are from these (the accumulator's anchors once it has a row). */
  anchors: number[];
  anchored: boolean[];
  newestBucket: number | null;
  closedThrough: number | null;
  lastClosedWithData: number | null;
  slots: { index: number | null; sums: number[]; counts: number[] }[];
  rows: BatchMeansStreamState;
  counts: BucketCounts;
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
  private rows: BatchMeansStream;
  private readonly counts: Omit<BucketCounts, 'evictedBuckets'> = { completedBuckets: 0, incompleteBuckets: 0, emptyBuckets: 0, lateSamples: 0, rejectedSamples: 0 };
  private readonly row: Float64Array;

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
    this.rows = new BatchMeansStream(p, { maxRows: options.maxBuckets });
    this.row = new Float64Array(p);
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
    return this.rows.rows;
  }

  /**
   * Covariance of the channel means over the window. `batchSize` defaults to the dyadic size nearest
   * sqrt(buckets) (see BatchMeansStream). O(p^3) for a power of two, O(m p + a p^2 + p^3) else.
   */
  snapshot(batchSize?: number, options: TimeBucketedSnapshotOptions = {}): TimeBucketedSnapshot | TimeBucketedNotReady {
    const counts: BucketCounts = { ...this.counts, evictedBuckets: this.rows.evictedRows };
    const snapshot = this.rows.snapshot(batchSize, options);
    if (!snapshot.ready) {
      const m = snapshot.rows;
      const note = m < 2 ? `${m} complete bucket${m === 1 ? '' : 's'}: at least 2 are needed` : snapshot.note.replace(/rows$/, 'buckets');
      return { ready: false, buckets: m, counts, note };
    }
    const { rows, ...rest } = snapshot;
    return { ...rest, buckets: rows, counts };
  }

  /** Plain-data copy of the whole state (JSON-safe). */
  state(): TimeBucketedCovarianceState {
    const p = this.channelCount;
    return {
      record: 'time-bucketed-covariance',
      version: 2,
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
      rows: this.rows.state(),
      counts: { ...this.counts, evictedBuckets: this.rows.evictedRows },
    };
  }

  /**
   * Rebuilds an accumulator from `state()`; it continues exactly as the original would.
   * @throws RangeError for a record of another name or version, or one that does not fit its own configuration
   */
  static restore(state: TimeBucketedCovarianceState): TimeBucketedCovariance {
    expectRecord(state, 'time-bucketed-covariance', 2);
    const out = new TimeBucketedCovariance(state.channelCount, { bucketSeconds: state.bucketSeconds, maxBuckets: state.maxBuckets, openBuckets: state.openBuckets });
    const p = state.channelCount;
    const check = (ok: boolean, what: string) => {
      if (!ok) throw new RangeError(`TimeBucketedCovariance state: ${what} does not fit`);
    };
    check(state.anchors.length === p && state.anchored.length === p, 'anchors');
    check(state.slots.length === state.openBuckets, 'open buckets');
    check(state.rows.channelCount === p && state.rows.maxRows === state.maxBuckets, 'rows');
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
    out.rows = BatchMeansStream.restore(state.rows);
    const { evictedBuckets: _evicted, ...counts } = state.counts;
    Object.assign(out.counts, counts);
    return out;
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
    this.counts.completedBuckets++;
    if (this.rows.rowsAdded === 0) this.rows.setAnchors(this.anchors);
    const moved = this.rows.pushShifted(this.row);
    if (moved !== null) {
      // The accumulator re-anchored: the open buckets' offsets follow.
      for (let i = 0; i < p; i++) this.anchors[i] = this.rows.anchor(i);
      for (let s = 0; s < this.openBuckets; s++) {
        for (let i = 0; i < p; i++) {
          const at = s * p + i;
          this.slotSums[at] = (this.slotSums[at] as number) - (this.slotCounts[at] as number) * (moved[i] as number);
        }
      }
    }
  }
}

function modulo(a: number, n: number): number {
  const r = a % n;
  return r < 0 ? r + n : r;
}

