import { BatchMeansStream, type BatchMeansSnapshot } from '../../core/multivariate/batch-means-stream.js';
import { MIN_BATCHES } from '../../core/multivariate/multivariate-batch-means.js';
import { propagateJointly, propagateUncertainty, type PropagationResult } from '../../core/propagation/gum-propagation.js';
import { coverageFactor } from '../../core/uncertainty/coverage-factor.js';
import { targetStatus, type TargetSpec, type TargetStatus } from '../../core/uncertainty/target-precision.js';
import type { CompiledDerived } from './expression-model.js';
import type { TypeBSpec } from '../../core/uncertainty/type-b-component.js';
import { evaluateTypeB, typeAComponent } from '../../core/uncertainty/type-b-component.js';
import type { ConformitySpec } from '../channel-options.js';
import { combinedReport, conformityReport, type BudgetLine, type CombinedInput, type CombinedReport, type ConformityReport } from '../channel-combined.js';
import type { BoundDerived } from './derived-constants.js';

/**
 * The live derived-result engine: the covariance of the channel means over common time buckets,
 * and from it each derived result's estimate, sensitivity coefficients, combined standard
 * uncertainty, degrees of freedom, coverage factor, expanded uncertainty, budget, target status
 * and the correlations between the results. Deterministic given the samples of each channel (in
 * each channel's own order; how the channels interleave does not matter, see "Buckets").
 *
 * Buckets. The samples of the p input channels are averaged within common time buckets of width
 * w, aligned to absolute time (bucket index floor(t / w)); a bucket in which every channel has a
 * sample becomes one row of p bucket means. A bucket is final once every channel has a sample in a
 * later bucket: each channel's times only move forward, so no later sample can fall into it. This
 * rule does not depend on how the channels' samples interleave, so a daemon that receives them in
 * separate messages, a replay channel by channel, and a file read row by row all make the same
 * rows. A final bucket that misses a channel is dropped and counted (`incompleteBuckets`); a
 * sample for a final bucket (its channel's time went backwards) is dropped and counted
 * (`lateSamples`). At most MAX_OPEN buckets stay open: when a channel falls silent the oldest are
 * closed (and, missing that channel, dropped).
 * Bucket width (unless given): from the first WIDTH_SAMPLES samples of each channel (fewer when a
 * channel is slow to arrive, see MAX_PENDING), the median interval of each channel, and the
 * slowest of them (the largest median). When the channels are sampled together (the same time
 * stamps), w is the largest value of the 1-2-5 series (..., 0.1, 0.2, 0.5, 1, 2, ...) not above
 * 1.01 times that interval, so that a bucket holds one sample per channel; a stamp that lands on
 * the other side of a boundary moves every channel alike and only merges two rows. Otherwise w is
 * the smallest 1-2-5 value at least 1.5 times the slowest interval, so that every bucket holds a
 * sample of every channel despite their phases and jitter. The 1-2-5 rounding makes the width the
 * same whichever stretch of a regularly sampled stream it is estimated from (a rebuild after a
 * restart estimates it again); a rate whose interval sits at 1/1.5 of a 1-2-5 value (e.g. 7.5 Hz
 * with unsynchronised channels) may round either way.
 * Long windows: rows are kept up to `maxBuckets`; when a window grows past that (at the next even
 * bucket boundary, so that no pair straddles a final and an open bucket), adjacent pairs of rows
 * are merged (the mean of the two rows, or the one complete row of the pair), the width
 * doubles and the open buckets follow, so that a growing window of any length is kept whole at a
 * coarser time resolution (the batch means of rows are batch means of samples either way).
 *
 * Covariance of the means. The rows feed a BatchMeansStream (src/core/multivariate, fed rows: the samples are bucketed once, here): the
 * multivariate batch-means estimate of the long-run covariance Sigma (D. Vats, J. M. Flegal &
 * G. L. Jones (2019), "Multivariate output analysis for Markov chain Monte Carlo", Biometrika
 * 106(2), 321-337), with dyadic batches of size b nearest sqrt(m) for m rows and a batches; the
 * covariance of the channel means is Sigma / m, and the multivariate effective sample size mESS
 * (in rows) comes with it. `estimator: 'iid'` takes the rows as independent instead: the sample
 * covariance of the rows over m (JCGM 100:2008, 5.2.3 eq. (17), as GUM 4.2 for a handful of
 * repeated observations). With fewer than MIN_BATCHES (8) batches of rows (about 64 rows) the
 * batch-means estimate is not trusted and the engine falls back to 'iid', with a note: for
 * autocorrelated channels the uncertainty is then too small, which the note says.
 *
 * Propagation. The law of propagation of uncertainty with correlated inputs (JCGM 100:2008, 5.2,
 * eq. (13)) at the channel means, with mathjs's symbolic sensitivity coefficients; the budget
 * gives each input's c_i u(x_i), its share c_i^2 u^2(x_i) / u_c^2 and its share including the
 * covariance terms, c_i (U_x c)_i / u_c^2 (these add to 1; one can be negative), and each pair's
 * covariance term 2 c_i c_j u(x_i, x_j). The correlations between results: U_y = J U_x J^T
 * (propagateJointly).
 * Degrees of freedom (a choice, documented): c^T Sigma_b c is exactly the batch-means estimate of
 * the long-run variance of the linearised series z_t = c^T Y_t, so u_c^2 has the a - 1 degrees of
 * freedom of a batch-means variance (m - 1 for 'iid', as evaluating the result set by set, GUM
 * H.2.4). Welch-Satterthwaite (GUM G.4.1) assumes independently estimated input variances, which
 * is not the case here, since every entry of Sigma comes from the same batches; it is applied
 * where it belongs, to the interval computed as if the channels were uncorrelated
 * (`independent`): diagonal covariance, nu_i = a - 1 for each input. The coverage factor is
 * k = t_p(nu) (src/core/uncertainty/coverage-factor.ts).
 * Target and ETA: targetStatus (src/core/uncertainty/target-precision.ts) with n = rows and the
 * observed rows per second; it assumes nu grows in proportion to n, while batch means' a - 1 grows
 * as sqrt(n), so an ETA for a target on U is slightly optimistic.
 *
 * Cost: per sample O(p) (the finality check) plus, per row, O(p) to form it and amortised O(p^2)
 * in the BatchMeansStream; a merge of rows O(maxBuckets p^2), once per doubling of the
 * window. `evaluate()` O(p^3 + q p^2 + q^2 p) for q results, plus the mathjs evaluations; cached
 * until a row is added. Memory: room for 2 maxBuckets rows (2 maxBuckets p doubles) plus the
 * BatchMeansStream's rings for as many (about 4 maxBuckets p doubles; 0.6 MB for p = 3 at
 * the default 8192), open buckets 2 p doubles each.
 */
export type DerivedEstimator = 'batch-means' | 'iid';

export interface DerivedResultSpec {
  compiled: CompiledDerived;
  target: TargetSpec | null;
  /** Coverage probability of the expanded uncertainty. */
  confidence: number;
  /** Issue 10: the input channels' Type B components, limits, combined target (constants: `compiled` from bindConstants). */
  uncertainty?: DerivedUncertainty;
}

/** What turns a derived result's Type A uncertainty into its combined uncertainty and conformity. */
export interface DerivedUncertainty {
  /** Type B components of each input channel, by channel name (a component marked `shared` is fully correlated across channels). */
  channelTypeB: Record<string, TypeBSpec[]>;
  conformity: ConformitySpec | null;
  combinedTarget: TargetSpec | null;
}

export interface DerivedEngineOptions {
  /** Fixed bucket width, seconds; default automatic (see the module comment). */
  bucketSeconds?: number;
  /** Rows kept before pairs are merged (default 8192, at least 64). */
  maxBuckets?: number;
  estimator?: DerivedEstimator;
  /** Samples with an earlier time are ignored (the common start of the input windows). */
  startSeconds?: number;
}

export interface DerivedBudgetEntry {
  channel: string;
  /** The channel's mean over the rows. */
  mean: number;
  /** u(x_i): standard uncertainty of the channel's mean. */
  standardUncertainty: number;
  sensitivity: number;
  /** c_i u(x_i), signed. */
  contribution: number;
  /** c_i^2 u^2(x_i) / u_c^2; null when u_c = 0. */
  varianceShare: number | null;
  /** c_i (U_x c)_i / u_c^2, the share including the covariance terms (the shares add to 1); null when u_c = 0. */
  share: number | null;
}

export interface DerivedCovarianceTerm {
  channels: [string, string];
  /** r(x_i, x_j) of the two means; null when a variance is zero. */
  correlation: number | null;
  /** 2 c_i c_j u(x_i, x_j). */
  term: number;
}

export interface DerivedInterval {
  standardUncertainty: number;
  dof: number | null;
  coverageFactor: number | null;
  expandedUncertainty: number | null;
}

export interface DerivedSnapshot {
  name: string;
  unit: string | null;
  expression: string;
  inputs: string[];
  /** Value, u, dof, k and U exist. */
  ready: boolean;
  value: number | null;
  standardUncertainty: number | null;
  dof: number | null;
  /** Where dof comes from: a - 1 batches, or m - 1 rows taken as independent. */
  dofMethod: 'batches' | 'observations' | null;
  coverageFactor: number | null;
  expandedUncertainty: number | null;
  confidence: number;
  estimator: DerivedEstimator;
  target: TargetStatus | null;
  budget: DerivedBudgetEntry[];
  covarianceTerms: DerivedCovarianceTerm[];
  /** sum over i != j of c_i c_j u(x_i, x_j), over u_c^2; null when u_c = 0. */
  covarianceShare: number | null;
  /** The same result computed as if the channels were uncorrelated (diagonal covariance, Welch-Satterthwaite). */
  independent: DerivedInterval | null;
  /** Correlation coefficient with each other result of the engine that has a value. */
  correlation: Record<string, number>;
  rows: number;
  bucketSeconds: number | null;
  batches: number | null;
  batchSize: number | null;
  /** Multivariate effective sample size of the input channels, in rows; null when undefined. */
  multivariateEss: number | null;
  /** Rows per second over the window (for the ETA). */
  rowRate: number | null;
  window: { startSeconds: number; endSeconds: number } | null;
  counts: DerivedCounts;
  notes: string[];
  /**
   * The Type A part above with the input channels' Type B components and the named constants
   * (GUM H.1): u_c, nu_eff, k, U and the budget (null until the Type A part exists).
   */
  combined: CombinedReport | null;
  /** Conformity with the result's limits and decision rule (null without limits). */
  conformity: ConformityReport | null;
}

export interface DerivedCounts {
  /** Final buckets in which some channel had no sample: dropped. */
  incompleteBuckets: number;
  /** Samples for buckets already final: dropped. */
  lateSamples: number;
  /** Samples with a non-finite time or value: dropped (samples before the start are ignored, not counted). */
  rejectedSamples: number;
  /** Times pairs of rows were merged (the width doubled). */
  merges: number;
}

/** Samples per channel the automatic width is estimated from. */
export const WIDTH_SAMPLES = 16;
/** A channel holding this many samples while another has fewer than 2 makes the width be decided, or drops old samples. */
const MAX_PENDING = 4096;
/** Open buckets kept at most (a silent channel cannot make them pile up). */
const MAX_OPEN = 8192;
export const DEFAULT_MAX_BUCKETS = 8192;

interface OpenBucket {
  index: number;
  sums: Float64Array;
  counts: Int32Array;
}

/** The input of a Monte Carlo propagation of one result: its channels' means and their covariance. */
export interface DerivedInputDistribution {
  compiled: CompiledDerived;
  means: Float64Array;
  covariance: Float64Array;
}

export class DerivedEngine {
  readonly specs: DerivedResultSpec[];
  /** Union of the results' inputs, in order of first appearance: the columns of the rows. */
  readonly channels: string[];
  readonly estimator: DerivedEstimator;
  readonly maxBuckets: number;
  readonly startSeconds: number;
  private readonly p: number;
  private readonly channelIndex = new Map<string, number>();
  private readonly fixedWidth: number | null;
  private width: number | null = null;
  private widthNote: string | null = null;
  private pendingTimes: number[][];
  private pendingValues: number[][];
  private readonly anchors: Float64Array;
  private readonly anchored: Uint8Array;
  private readonly lastBucket: Float64Array;
  private open: OpenBucket[] = [];
  private openHead = 0;
  private finalBelow = Number.NEGATIVE_INFINITY;
  private rowValues: Float64Array;
  private rowBuckets: Float64Array;
  private rowCount = 0;
  private covariance: BatchMeansStream;
  private readonly counts: DerivedCounts = { incompleteBuckets: 0, lateSamples: 0, rejectedSamples: 0, merges: 0 };
  private version = 0;
  private cache: { version: number; snapshots: DerivedSnapshot[]; distributions: Map<string, DerivedInputDistribution> } | null = null;

  constructor(specs: DerivedResultSpec[], options: DerivedEngineOptions = {}) {
    if (specs.length === 0) throw new RangeError('DerivedEngine requires at least one derived result');
    this.specs = specs;
    const channels: string[] = [];
    for (const spec of specs) for (const name of spec.compiled.inputs) if (!channels.includes(name)) channels.push(name);
    this.channels = channels;
    channels.forEach((name, i) => this.channelIndex.set(name, i));
    this.p = channels.length;
    this.estimator = options.estimator ?? 'batch-means';
    this.maxBuckets = options.maxBuckets ?? DEFAULT_MAX_BUCKETS;
    if (!Number.isInteger(this.maxBuckets) || this.maxBuckets < 64) throw new RangeError('DerivedEngine requires maxBuckets of at least 64');
    if (options.bucketSeconds !== undefined && !(options.bucketSeconds > 0 && Number.isFinite(options.bucketSeconds))) throw new RangeError('DerivedEngine requires a positive bucketSeconds');
    this.fixedWidth = options.bucketSeconds ?? null;
    this.width = this.fixedWidth;
    this.startSeconds = options.startSeconds ?? Number.NEGATIVE_INFINITY;
    const p = this.p;
    this.pendingTimes = channels.map(() => []);
    this.pendingValues = channels.map(() => []);
    this.anchors = new Float64Array(p);
    this.anchored = new Uint8Array(p);
    this.lastBucket = new Float64Array(p).fill(Number.NEGATIVE_INFINITY);
    this.rowValues = new Float64Array((2 * this.maxBuckets + 2) * p);
    this.rowBuckets = new Float64Array(2 * this.maxBuckets + 2);
    this.covariance = this.newCovariance();
  }

  /** Index of a channel in `channels`, or -1. */
  indexOf(channel: string): number {
    return this.channelIndex.get(channel) ?? -1;
  }

  /** Complete rows in the window. */
  get rows(): number {
    return this.rowCount;
  }

  /** End (seconds) of the newest row's bucket; null without rows. */
  get lastRowEndSeconds(): number | null {
    if (this.rowCount === 0 || this.width === null) return null;
    return ((this.rowBuckets[this.rowCount - 1] as number) + 1) * this.width;
  }

  /** The bucket width in use (null until it is decided). */
  get bucketSeconds(): number | null {
    return this.width;
  }

  /** Changes whenever a row is added or rows are merged. */
  get rowsVersion(): number {
    return this.version;
  }

  /** Copy of the rows (m x p, row-major, channel order `channels`) and their bucket start times. */
  rowData(): { values: Float64Array; startSeconds: Float64Array; count: number } {
    const width = this.width ?? 1;
    const startSeconds = new Float64Array(this.rowCount);
    for (let r = 0; r < this.rowCount; r++) startSeconds[r] = (this.rowBuckets[r] as number) * width;
    return { values: this.rowValues.slice(0, this.rowCount * this.p), startSeconds, count: this.rowCount };
  }

  /** Rows whose bucket starts before `timeSeconds` (binary search, O(log m)). */
  rowsStartingBefore(timeSeconds: number): number {
    const width = this.width;
    if (width === null) return 0;
    let low = 0;
    let high = this.rowCount;
    while (low < high) {
      const mid = (low + high) >> 1;
      if ((this.rowBuckets[mid] as number) * width < timeSeconds) low = mid + 1;
      else high = mid;
    }
    return low;
  }

  /** Adds one sample of input channel `channel` (index into `channels`). Returns false when it was dropped or is before the start. */
  add(channel: number, timeSeconds: number, value: number): boolean {
    if (!Number.isInteger(channel) || channel < 0 || channel >= this.p) throw new RangeError(`channel must be an integer in 0..${this.p - 1}`);
    if (!Number.isFinite(timeSeconds) || !Number.isFinite(value)) {
      this.counts.rejectedSamples++;
      return false;
    }
    if (timeSeconds < this.startSeconds) return false;
    if (this.width === null) {
      (this.pendingTimes[channel] as number[]).push(timeSeconds);
      (this.pendingValues[channel] as number[]).push(value);
      this.version++;
      this.maybeDecideWidth();
      return true;
    }
    return this.place(channel, timeSeconds, value);
  }

  // ---- buckets ------------------------------------------------------------------------------

  private maybeDecideWidth(): void {
    let fewest = Infinity;
    let most = 0;
    for (const times of this.pendingTimes) {
      fewest = Math.min(fewest, times.length);
      most = Math.max(most, times.length);
    }
    if (fewest >= WIDTH_SAMPLES || (most >= MAX_PENDING && fewest >= 2)) {
      this.decideWidth();
      return;
    }
    if (most >= MAX_PENDING) {
      // A channel with (almost) no samples yet: the old samples of the others could only make
      // incomplete buckets. Keep the newest half.
      for (let c = 0; c < this.p; c++) {
        const times = this.pendingTimes[c] as number[];
        if (times.length >= MAX_PENDING) {
          times.splice(0, MAX_PENDING / 2);
          (this.pendingValues[c] as number[]).splice(0, MAX_PENDING / 2);
          this.counts.rejectedSamples += MAX_PENDING / 2;
        }
      }
    }
  }

  private decideWidth(): void {
    const decided = widthFrom(this.pendingTimes);
    this.width = decided.width;
    this.widthNote = decided.note;
    this.replayPending();
  }

  /** Places the samples buffered while the width was undecided. */
  private replayPending(): void {
    const times = this.pendingTimes;
    const values = this.pendingValues;
    this.pendingTimes = this.channels.map(() => []);
    this.pendingValues = this.channels.map(() => []);
    // Oldest first across the channels keeps few buckets open (the rows do not depend on the order).
    const cursor = new Int32Array(this.p);
    for (;;) {
      let best = -1;
      for (let c = 0; c < this.p; c++) {
        const at = cursor[c] as number;
        if (at < (times[c] as number[]).length && (best < 0 || ((times[c] as number[])[at] as number) < ((times[best] as number[])[cursor[best] as number] as number))) best = c;
      }
      if (best < 0) break;
      const at = cursor[best] as number;
      this.place(best, (times[best] as number[])[at] as number, (values[best] as number[])[at] as number);
      cursor[best] = at + 1;
    }
  }

  /**
   * While the width is undecided (fewer than WIDTH_SAMPLES samples of some channel), a snapshot is
   * taken from a copy that decides the width from the samples so far; the engine itself still
   * waits, so that its width does not depend on when it was asked.
   */
  private provisional(): { snapshots: DerivedSnapshot[]; distributions: Map<string, DerivedInputDistribution> } | null {
    if (this.pendingTimes.some((t) => t.length < 2)) return null;
    const decided = widthFrom(this.pendingTimes);
    const copy = new DerivedEngine(this.specs, { bucketSeconds: decided.width, maxBuckets: this.maxBuckets, estimator: this.estimator, startSeconds: this.startSeconds });
    for (let c = 0; c < this.p; c++) {
      const times = this.pendingTimes[c] as number[];
      const values = this.pendingValues[c] as number[];
      for (let i = 0; i < times.length; i++) copy.add(c, times[i] as number, values[i] as number);
    }
    const note = `provisional: bucket width ${formatNumber(decided.width)} s from the first samples (decided for good at ${WIDTH_SAMPLES} samples of each channel)`;
    const computed = copy.compute();
    return { snapshots: computed.snapshots.map((s) => ({ ...s, notes: [note, ...(decided.note ? [decided.note] : []), ...s.notes] })), distributions: computed.distributions };
  }


  private place(channel: number, timeSeconds: number, value: number): boolean {
    const width = this.width as number;
    // Nudged up by a few ulps of the quotient, so that a time written as a multiple of the width
    // (0.3 s with w = 0.1 s, whose quotient is 2.9999999999999996) lands in its own bucket.
    const quotient = timeSeconds / width;
    const index = Math.floor(quotient + 8 * Number.EPSILON * Math.abs(quotient));
    if (index < this.finalBelow || index < (this.lastBucket[channel] as number)) {
      this.counts.lateSamples++;
      return false;
    }
    if (this.anchored[channel] === 0) {
      this.anchors[channel] = value;
      this.anchored[channel] = 1;
    }
    const bucket = this.openBucket(index);
    bucket.sums[channel] = (bucket.sums[channel] as number) + (value - (this.anchors[channel] as number));
    bucket.counts[channel] = (bucket.counts[channel] as number) + 1;
    const previous = this.lastBucket[channel] as number;
    this.lastBucket[channel] = index;
    if (index > previous) this.finalise();
    return true;
  }

  private openBucket(index: number): OpenBucket {
    const open = this.open;
    // Usually the newest or one of the last few.
    let position = open.length;
    while (position > this.openHead && (open[position - 1] as OpenBucket).index > index) position--;
    if (position > this.openHead && (open[position - 1] as OpenBucket).index === index) return open[position - 1] as OpenBucket;
    const bucket: OpenBucket = { index, sums: new Float64Array(this.p), counts: new Int32Array(this.p) };
    open.splice(position, 0, bucket);
    return bucket;
  }

  /** Closes the buckets every channel has moved past, oldest first; merges rows when the window is full. */
  private finalise(): void {
    let below = this.lowestLast();
    while (this.openHead < this.open.length) {
      const bucket = this.open[this.openHead] as OpenBucket;
      const force = this.open.length - this.openHead > MAX_OPEN;
      if (bucket.index >= below && !force) break;
      this.openHead++;
      this.finalBelow = Math.max(this.finalBelow, bucket.index + 1);
      this.closeBucket(bucket);
      // Every row lies below finalBelow and every open bucket at or above it: with an even boundary
      // the pairs (2j, 2j + 1) are whole on both sides.
      if (this.rowCount >= this.maxBuckets && modulo(this.finalBelow, 2) === 0) this.mergeRows();
      below = this.lowestLast();
    }
    if (below > this.finalBelow && below !== Number.POSITIVE_INFINITY) this.finalBelow = below;
    if (this.openHead > 64 && this.openHead * 2 > this.open.length) {
      this.open = this.open.slice(this.openHead);
      this.openHead = 0;
    }
    if (this.rowCount >= this.maxBuckets && Number.isFinite(this.finalBelow) && (modulo(this.finalBelow, 2) === 0 || this.rowCount >= 2 * this.maxBuckets)) this.mergeRows();
  }

  private lowestLast(): number {
    let below = Number.POSITIVE_INFINITY;
    for (let c = 0; c < this.p; c++) below = Math.min(below, this.lastBucket[c] as number);
    return below;
  }

  private closeBucket(bucket: OpenBucket): void {
    const p = this.p;
    for (let c = 0; c < p; c++) {
      if ((bucket.counts[c] as number) === 0) {
        this.counts.incompleteBuckets++;
        return;
      }
    }
    const at = this.rowCount * p;
    for (let c = 0; c < p; c++) this.rowValues[at + c] = (this.anchors[c] as number) + (bucket.sums[c] as number) / (bucket.counts[c] as number);
    this.rowBuckets[this.rowCount] = bucket.index;
    this.rowCount++;
    this.pushRow(at);
    this.version++;
  }

  private newCovariance(): BatchMeansStream {
    return new BatchMeansStream(this.p, { maxRows: 2 * this.maxBuckets + 2 });
  }

  private pushRow(at: number): void {
    this.covariance.push(this.rowValues.subarray(at, at + this.p));
  }

  /**
   * Merges rows pairwise (bucket indices 2j, 2j + 1 -> j), doubles the width, rebuilds the
   * covariance. Called with an even finalBelow, except when a catch-up has piled up 2 maxBuckets
   * rows without one (then an open bucket may share its coarse index with the last row and later
   * make a second row of that index: harmless for the statistics).
   */
  private mergeRows(): void {
    const p = this.p;
    let out = 0;
    for (let r = 0; r < this.rowCount; ) {
      const coarse = Math.floor((this.rowBuckets[r] as number) / 2);
      const pair = r + 1 < this.rowCount && Math.floor((this.rowBuckets[r + 1] as number) / 2) === coarse;
      for (let c = 0; c < p; c++) {
        const a = this.rowValues[r * p + c] as number;
        this.rowValues[out * p + c] = pair ? 0.5 * a + 0.5 * (this.rowValues[(r + 1) * p + c] as number) : a;
      }
      this.rowBuckets[out] = coarse;
      out++;
      r += pair ? 2 : 1;
    }
    this.rowCount = out;
    const merged: OpenBucket[] = [];
    for (let i = this.openHead; i < this.open.length; i++) {
      const bucket = this.open[i] as OpenBucket;
      const coarse = Math.floor(bucket.index / 2);
      const last = merged[merged.length - 1];
      if (last !== undefined && last.index === coarse) {
        for (let c = 0; c < p; c++) {
          last.sums[c] = (last.sums[c] as number) + (bucket.sums[c] as number);
          last.counts[c] = (last.counts[c] as number) + (bucket.counts[c] as number);
        }
      } else merged.push({ index: coarse, sums: bucket.sums, counts: bucket.counts });
    }
    this.open = merged;
    this.openHead = 0;
    for (let c = 0; c < p; c++) this.lastBucket[c] = Math.floor((this.lastBucket[c] as number) / 2);
    this.finalBelow = Math.floor(this.finalBelow / 2);
    this.width = (this.width as number) * 2;
    this.counts.merges++;
    this.covariance = this.newCovariance();
    for (let r = 0; r < this.rowCount; r++) this.pushRow(r * p);
    this.version++;
  }

  // ---- results ------------------------------------------------------------------------------

  /** Every result's snapshot (cached until the rows change). */
  evaluate(): DerivedSnapshot[] {
    return this.compute().snapshots;
  }

  /** Means and covariance of one result's inputs, for a Monte Carlo propagation; null when not ready. */
  inputDistribution(name: string): DerivedInputDistribution | null {
    return this.compute().distributions.get(name) ?? null;
  }

  private compute(): { snapshots: DerivedSnapshot[]; distributions: Map<string, DerivedInputDistribution> } {
    if (this.cache !== null && this.cache.version === this.version) return this.cache;
    const provisional = this.width === null ? this.provisional() : null;
    if (provisional !== null) {
      this.cache = { version: this.version, ...provisional };
      return this.cache;
    }
    const distributions = new Map<string, DerivedInputDistribution>();
    const snapshots = this.computeSnapshots(distributions);
    this.cache = { version: this.version, snapshots, distributions };
    return this.cache;
  }

  private computeSnapshots(distributions: Map<string, DerivedInputDistribution>): DerivedSnapshot[] {
    const p = this.p;
    const m = this.rowCount;
    const counts = { ...this.counts };
    const baseNotes: string[] = [];
    if (this.widthNote) baseNotes.push(this.widthNote);
    if (counts.incompleteBuckets > 0) baseNotes.push(`${counts.incompleteBuckets} bucket(s) without a sample of every channel were left out`);
    if (counts.merges > 0) baseNotes.push(`rows merged in pairs ${counts.merges === 1 ? 'once' : `${counts.merges} times`} to keep the window whole (bucket width now ${formatNumber(this.width)} s)`);
    const window = m > 0 && this.width !== null ? { startSeconds: (this.rowBuckets[0] as number) * this.width, endSeconds: ((this.rowBuckets[m - 1] as number) + 1) * this.width } : null;
    const rowRate = window !== null && window.endSeconds > window.startSeconds ? m / (window.endSeconds - window.startSeconds) : null;
    const snapshot = m >= 2 ? this.covariance.snapshot() : null;
    const empty = (spec: DerivedResultSpec, note: string): DerivedSnapshot => ({
      ...identity(spec),
      ready: false,
      value: null,
      standardUncertainty: null,
      dof: null,
      dofMethod: null,
      coverageFactor: null,
      expandedUncertainty: null,
      confidence: spec.confidence,
      estimator: this.estimator,
      target: null,
      budget: [],
      covarianceTerms: [],
      covarianceShare: null,
      independent: null,
      correlation: {},
      rows: m,
      bucketSeconds: this.width,
      batches: null,
      batchSize: null,
      multivariateEss: null,
      rowRate,
      window,
      counts,
      notes: [...baseNotes, note],
      combined: null,
      conformity: null,
    });
    if (snapshot === null || !snapshot.ready) {
      const note = this.width === null ? `waiting for samples of every input channel to decide the bucket width (${WIDTH_SAMPLES} each)` : `${m} complete row(s): at least 2 are needed`;
      return this.specs.map((spec) => empty(spec, note));
    }
    const ready = snapshot as BatchMeansSnapshot;
    let estimator = this.estimator;
    const notes = [...baseNotes];
    if (estimator === 'batch-means' && ready.batches < MIN_BATCHES) {
      estimator = 'iid';
      notes.push(`${ready.batches} batch(es) of rows, fewer than ${MIN_BATCHES}: the rows are treated as independent observations (GUM 4.2); for autocorrelated channels u is then too small`);
    }
    const meanCovariance = new Float64Array(p * p);
    let dof: number;
    let dofMethod: 'batches' | 'observations';
    if (estimator === 'iid') {
      for (let i = 0; i < p * p; i++) meanCovariance[i] = (ready.sampleCovariance[i] as number) / m;
      dof = m - 1;
      dofMethod = 'observations';
    } else {
      meanCovariance.set(ready.meanCovariance);
      dof = ready.batches - 1;
      dofMethod = 'batches';
      if (ready.note) notes.push(`batch means: ${ready.note}`);
    }
    const means = ready.means;
    const values: Record<string, number> = {};
    this.channels.forEach((name, i) => (values[name] = means[i] as number));

    const results: { spec: DerivedResultSpec; value: number | null; sensitivities: Float64Array | null; note: string | null }[] = this.specs.map((spec) => {
      const evaluation = spec.compiled.evaluateSafely(values);
      if (!evaluation.ok) return { spec, value: null, sensitivities: null, note: `cannot be evaluated at the channel means: ${evaluation.reason}` };
      try {
        return { spec, value: evaluation.value, sensitivities: spec.compiled.sensitivities(values), note: null };
      } catch (err) {
        return { spec, value: evaluation.value, sensitivities: null, note: `no sensitivity coefficients at the channel means: ${(err as Error).message}` };
      }
    });

    // Jacobian over all channels for the correlations between results.
    const jointRows = results.filter((r) => r.sensitivities !== null);
    let correlation: Float64Array | null = null;
    if (jointRows.length > 1) {
      const jacobian = new Float64Array(jointRows.length * p);
      jointRows.forEach((r, l) => {
        r.spec.compiled.inputs.forEach((name, i) => (jacobian[l * p + (this.channelIndex.get(name) as number)] = (r.sensitivities as Float64Array)[i] as number));
      });
      correlation = propagateJointly(means, meanCovariance, jacobian).correlation;
    }

    return results.map((result) => {
      const { spec } = result;
      const base = empty(spec, '');
      base.notes = [...notes];
      base.estimator = estimator;
      base.batches = estimator === 'iid' ? null : ready.batches;
      base.batchSize = estimator === 'iid' ? null : ready.batchSize;
      base.multivariateEss = ready.multivariateEss;
      if (result.note !== null) base.notes.push(result.note);
      base.value = result.value;
      if (result.sensitivities === null) return base;
      const inputs = spec.compiled.inputs;
      const q = inputs.length;
      const index = inputs.map((name) => this.channelIndex.get(name) as number);
      const sub = new Float64Array(q * q);
      const subMeans = new Float64Array(q);
      for (let i = 0; i < q; i++) {
        subMeans[i] = means[index[i] as number] as number;
        for (let j = 0; j < q; j++) sub[i * q + j] = meanCovariance[(index[i] as number) * p + (index[j] as number)] as number;
      }
      distributions.set(spec.compiled.name, { compiled: spec.compiled, means: subMeans, covariance: sub });
      const sensitivities = result.sensitivities;
      let propagation: PropagationResult;
      try {
        propagation = propagateUncertainty({ values: subMeans, covariance: sub, sensitivities, dofs: inputs.map(() => dof), confidence: spec.confidence });
      } catch (err) {
        base.notes.push(`propagation failed: ${(err as Error).message}`);
        return base;
      }
      const u = propagation.standardUncertainty;
      const k = coverageFactor(spec.confidence, dof);
      base.ready = k !== null;
      base.standardUncertainty = u;
      base.dof = dof;
      base.dofMethod = dofMethod;
      base.coverageFactor = k;
      base.expandedUncertainty = k === null ? null : k * u;
      const variance = propagation.variance;
      // (U_x c)_i for the shares that include the covariance terms.
      base.budget = inputs.map((name, i) => {
        let row = 0;
        for (let j = 0; j < q; j++) row += (sub[i * q + j] as number) * (sensitivities[j] as number);
        const entry = propagation.budget[i] as PropagationResult['budget'][number];
        return {
          channel: name,
          mean: subMeans[i] as number,
          standardUncertainty: entry.standardUncertainty,
          sensitivity: entry.sensitivity,
          contribution: entry.contribution,
          varianceShare: entry.varianceShare,
          share: variance > 0 ? ((sensitivities[i] as number) * row) / variance : null,
        };
      });
      const terms: DerivedCovarianceTerm[] = [];
      for (let i = 0; i < q; i++) {
        for (let j = i + 1; j < q; j++) {
          const covariance = sub[i * q + j] as number;
          const scale = Math.sqrt((sub[i * q + i] as number) * (sub[j * q + j] as number));
          terms.push({ channels: [inputs[i] as string, inputs[j] as string], correlation: scale > 0 ? Math.max(-1, Math.min(1, covariance / scale)) : null, term: 2 * (sensitivities[i] as number) * (sensitivities[j] as number) * covariance });
        }
      }
      base.covarianceTerms = terms;
      base.covarianceShare = variance > 0 ? propagation.covarianceTerm / variance : null;
      const diagonal = new Float64Array(q * q);
      for (let i = 0; i < q; i++) diagonal[i * q + i] = sub[i * q + i] as number;
      const independent = propagateUncertainty({ values: subMeans, covariance: diagonal, sensitivities, dofs: inputs.map(() => dof), confidence: spec.confidence });
      base.independent = {
        standardUncertainty: independent.standardUncertainty,
        dof: independent.dof,
        coverageFactor: independent.coverageFactor,
        expandedUncertainty: independent.expandedUncertainty,
      };
      if (spec.target !== null && result.value !== null) {
        base.target = targetStatus(spec.target, { mean: result.value, n: m, standardUncertainty: u, dof, confidence: spec.confidence, rate: rowRate, capacity: Number.POSITIVE_INFINITY });
      }
      if (correlation !== null) {
        const l = jointRows.indexOf(result);
        jointRows.forEach((other, o) => {
          if (o !== l) base.correlation[other.spec.compiled.name] = correlation[l * jointRows.length + o] as number;
        });
      }
      if (!(u > 0)) base.notes.push('combined standard uncertainty is zero: the inputs do not vary over the window');
      return withCombined(base, spec, values, sensitivities, m);
    });
  }
}

/**
 * The combined uncertainty of a derived result (channel-combined.ts): the Type A part (the channel
 * means with their covariances over the common rows, one source with the engine's nu) shown per
 * channel with its covariance line, the channels' Type B components entering with c_i (shared ones
 * fully correlated: in a difference they cancel and the budget shows the covariance term), and the
 * named constants with their c (GUM H.1). The value is corrected, to first order, by c_i times each
 * channel's correction estimates. Deterministic: numbers of the snapshot and the configuration only.
 */
function withCombined(base: DerivedSnapshot, spec: DerivedResultSpec, values: Record<string, number>, sensitivities: Float64Array, rows: number): DerivedSnapshot {
  if (base.value === null || base.standardUncertainty === null || base.dof === null || !(base.dof > 0)) return base;
  const u = spec.uncertainty;
  const compiled = spec.compiled as Partial<BoundDerived> & CompiledDerived;
  const inputs: CombinedInput[] = [{ name: 'readings', estimate: base.value, sensitivity: 1, components: [typeAComponent({ name: 'Type A: channel means over the common rows', standardUncertainty: base.standardUncertainty, dof: base.dof })] }];
  let correction = 0;
  compiled.inputs.forEach((channel, i) => {
    const specs = u?.channelTypeB[channel] ?? [];
    if (specs.length === 0) return;
    const components = specs.map((s) => evaluateTypeB(s));
    const c = sensitivities[i] as number;
    for (const component of components) correction += c * component.sensitivity * component.estimate;
    inputs.push({ name: channel, estimate: values[channel] as number, sensitivity: c, components });
  });
  const constants = compiled.constants ?? [];
  if (constants.length > 0 && compiled.constantSensitivities) {
    const cs = compiled.constantSensitivities(values);
    constants.forEach((constant, k) => inputs.push({ name: constant.name, estimate: constant.value, sensitivity: cs[k] as number, components: [{ ...evaluateTypeB(constant.uncertainty), name: 'value of the constant' }] }));
  }
  const typeARows: BudgetLine[] = base.budget.map((entry) => ({ quantity: entry.channel, component: 'Type A: mean over the common rows', evaluation: 'A', kind: 'type-a', estimate: entry.mean, standardUncertainty: entry.standardUncertainty, distribution: 'normal', sensitivity: entry.sensitivity, contribution: entry.contribution, dof: base.dof, share: null, shared: null, basis: base.dofMethod === 'batches' ? 'multivariate batch means of the rows' : 'rows taken as independent observations', proposed: false }));
  const covariance = base.covarianceTerms.filter((t) => t.term !== 0).map((t) => ({ quantity: `${t.channels[0]} / ${t.channels[1]}`, component: 'Type A: covariance of the means', term: t.term }));
  const combined = combinedReport(inputs, {
    confidence: spec.confidence,
    value: base.value + correction,
    n: rows,
    mean: base.value,
    rate: base.rowRate,
    capacity: Number.POSITIVE_INFINITY,
    settings: { combinedTarget: u?.combinedTarget ?? null, dominanceFraction: null },
    typeAOverride: { rows: typeARows, covariance },
  });
  if (correction !== 0) combined.notes.push(`corrected, to first order, for the channels' correction estimates: ${correction.toPrecision(4)} added to the value`);
  return { ...base, combined, conformity: u?.conformity ? conformityReport(u.conformity, combined) : null };
}

/** The automatic bucket width from the first samples' times of each channel (see the module comment). */
function widthFrom(pendingTimes: number[][]): { width: number; note: string | null } {
  const count = Math.min(WIDTH_SAMPLES, ...pendingTimes.map((t) => t.length));
  let slowest = 0;
  for (const times of pendingTimes) {
    const gaps: number[] = [];
    for (let j = 1; j < Math.min(times.length, WIDTH_SAMPLES); j++) {
      const gap = (times[j] as number) - (times[j - 1] as number);
      if (gap > 0) gaps.push(gap);
    }
    if (gaps.length > 0) {
      gaps.sort((a, b) => a - b);
      const mid = gaps.length >> 1;
      const median = gaps.length % 2 === 1 ? (gaps[mid] as number) : ((gaps[mid - 1] as number) + (gaps[mid] as number)) / 2;
      slowest = Math.max(slowest, median);
    }
  }
  let synchronous = pendingTimes.length > 0;
  for (let j = 0; j < count && synchronous; j++) {
    const t = (pendingTimes[0] as number[])[j];
    for (let c = 1; c < pendingTimes.length; c++) if ((pendingTimes[c] as number[])[j] !== t) synchronous = false;
  }
  if (!(slowest > 0)) return { width: 1, note: 'no positive interval between the first samples: bucket width set to 1 s' };
  return { width: synchronous ? seriesAtMost(1.01 * slowest) : seriesAtLeast(1.5 * slowest), note: null };
}

function identity(spec: DerivedResultSpec): Pick<DerivedSnapshot, 'name' | 'unit' | 'expression' | 'inputs'> {
  return { name: spec.compiled.name, unit: spec.compiled.unit, expression: spec.compiled.expression, inputs: [...spec.compiled.inputs] };
}

const SERIES = [1, 2, 5];

/** Largest value of the 1-2-5 series (10^k times 1, 2 or 5) not above x > 0. */
export function seriesAtMost(x: number): number {
  let exponent = Math.floor(Math.log10(x));
  for (let guard = 0; guard < 4; guard++, exponent--) {
    for (let s = SERIES.length - 1; s >= 0; s--) {
      const v = Number(`${SERIES[s]}e${exponent}`);
      if (v <= x) return v;
    }
  }
  return x;
}

/** Smallest value of the 1-2-5 series not below x > 0. */
export function seriesAtLeast(x: number): number {
  let exponent = Math.floor(Math.log10(x));
  for (let guard = 0; guard < 4; guard++, exponent++) {
    for (const s of SERIES) {
      const v = Number(`${s}e${exponent}`);
      if (v >= x) return v;
    }
  }
  return x;
}

function modulo(a: number, n: number): number {
  const r = a % n;
  return r < 0 ? r + n : r;
}

function formatNumber(v: number | null): string {
  return v === null ? '-' : Number(v.toPrecision(6)).toString();
}
