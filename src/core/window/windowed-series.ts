import { SampleRing, type SampleRingState } from './sample-ring.js';
import { ShiftedMoments, type ShiftedMomentsState } from './shifted-moments.js';
import { expectRecord, type StateRecord } from '../state/record.js';
import { LaggedProducts, autocovarianceFromProducts, type LaggedProductsState } from '../acf/lagged-products.js';
import { BlockPyramid, type BlockPyramidState } from './block-pyramid.js';

/**
 * Windowed series: one channel's averaging window and the sums that every estimator reads.
 *
 * Holds the window's samples (SampleRing), and in one shifted coordinate system (d = x - anchor)
 * the running moments (ShiftedMoments), the lagged cross-products up to maxLag (LaggedProducts)
 * and the block pyramid (BlockPyramid). Samples enter at the back; they leave from the front when
 * a sliding window is full or when the caller cuts the front (warm-up truncation).
 *
 * Exactness: every `recomputeEvery` removals (a multiple of the window size) the sums are rebuilt
 * from the stored samples, and the anchor moves to the window's current mean whenever the mean has
 * wandered more than a few standard deviations from it, so round-off cannot build up and the
 * shifted values stay small (the remedy recommended by Chan, Golub & LeVeque 1983).
 *
 * Cost: O(maxLag) per sample for the lagged products, O(1) amortised for the rest; a rebuild costs
 *   O(n * maxLag) and happens at most once per `recomputeEvery` removals.
 * Memory: 16 bytes per windowed sample (value and time) plus about 8 for the pyramid.
 */
export interface WindowedSeriesState extends StateRecord<'windowed-series', 1> {
  ring: SampleRingState;
  moments: ShiftedMomentsState;
  lags: LaggedProductsState;
  pyramid: BlockPyramidState;
  anchor: number;
  firstIndex: number;
  nextIndex: number;
  removalsSinceRebuild: number;
  nextAnchorCheck: number;
  pollution: number;
  lastLargeIndex: number;
  /** Lags maintained when the state was saved (grown beyond the configured ones when needed). */
  maxLag: number;
}

export interface WindowedSeriesOptions {
  /** Largest number of samples the window holds; the oldest leaves when a new one would exceed it. */
  maxSamples: number;
  /** Largest lag of the maintained autocovariance. */
  maxLag: number;
  /** Allocate the whole window up front (fixed sliding windows). */
  preallocate?: boolean;
}

/** Removals between exact rebuilds, as a multiple of the window's capacity. */
const REBUILD_AFTER_WINDOWS = 4;
/** Re-anchor when the shifted mean exceeds this many standard deviations. */
const REANCHOR_SIGMAS = 8;
/** Rebuild once the window holds only values this many times smaller than the largest the sums carried. */
const POLLUTION_RATIO = 32;

export class WindowedSeries {
  readonly maxSamples: number;
  maxLag: number;
  readonly ring: SampleRing;
  readonly moments = new ShiftedMoments();
  lags: LaggedProducts;
  readonly pyramid: BlockPyramid;
  /** Value subtracted from every sample before it enters the sums. */
  anchor = Number.NaN;
  /** Absolute index (0-based, since the series began) of the oldest sample in the window. */
  firstIndex = 0;
  /** Absolute index the next sample will get. */
  nextIndex = 0;
  private removalsSinceRebuild = 0;
  /** The last autocovariance computed without a buffer, and the window it was computed for. */
  private cachedAcf: Float64Array | null = null;
  private cachedAcfFirst = -1;
  private cachedAcfNext = -1;
  private cachedAcfLags = -1;
  private nextAnchorCheck = 16;
  /** Largest |shifted value| that entered the sums since the last rebuild. */
  private pollution = 0;
  /** Absolute index of the last sample whose |shifted value| exceeded pollution / POLLUTION_RATIO when it entered. */
  private lastLargeIndex = -1;

  constructor(options: WindowedSeriesOptions) {
    const { maxSamples, maxLag } = options;
    if (!Number.isInteger(maxSamples) || maxSamples < 4) throw new RangeError('windowed series requires maxSamples of at least 4');
    this.maxSamples = maxSamples;
    this.maxLag = maxLag;
    const preallocate = options.preallocate ?? false;
    this.ring = new SampleRing(preallocate ? maxSamples : Math.min(maxSamples, 1024), maxSamples);
    this.lags = new LaggedProducts(maxLag, (i) => this.ring.at(i) - this.anchor);
    this.pyramid = new BlockPyramid(maxSamples, preallocate);
  }

  get length(): number {
    return this.ring.length;
  }

  /** Appends a sample; drops the oldest first when the window is full. */
  push(value: number, time: number): void {
    if (this.ring.isFull) this.shift();
    if (this.ring.length === 0) {
      this.anchor = value;
      this.firstIndex = this.nextIndex;
      this.pyramid.reset(this.firstIndex);
    }
    const shifted = value - this.anchor;
    this.track(shifted, this.nextIndex);
    this.ring.push(value, time);
    this.moments.add(shifted);
    this.lags.addNewest(shifted);
    this.pyramid.add(this.nextIndex, shifted);
    this.nextIndex++;
    if (this.ring.length >= this.nextAnchorCheck) this.checkAnchor();
  }

  /** Drops the oldest sample. */
  shift(): void {
    const n = this.ring.length;
    if (n === 0) return;
    const leaving = this.ring.at(0) - this.anchor;
    this.ring.shift();
    this.lags.removeOldest(leaving);
    this.moments.remove(leaving);
    this.firstIndex++;
    this.pyramid.dropBefore(this.firstIndex);
    const removals = ++this.removalsSinceRebuild;
    if (this.ring.length === 0) return;
    if (removals >= REBUILD_AFTER_WINDOWS * this.maxSamples || this.firstIndex > this.lastLargeIndex || this.anchorDrifted()) {
      this.rebuild(this.mean);
    }
  }

  /** Drops every sample with absolute index below `index` (warm-up truncation). */
  dropBefore(index: number): void {
    const target = Math.min(index, this.nextIndex);
    if (target <= this.firstIndex) return;
    const count = target - this.firstIndex;
    if (count * 4 >= this.ring.length) {
      // Cheaper to rebuild than to remove one by one.
      for (let i = 0; i < count; i++) this.ring.shift();
      this.firstIndex = target;
      this.rebuild(this.ring.length > 0 ? this.ring.at(0) : Number.NaN);
      return;
    }
    for (let i = 0; i < count; i++) this.shift();
    if (this.ring.length > 0 && this.anchorDrifted()) this.rebuild(this.mean);
  }

  /** Removes every sample; the next one starts a new window at the next absolute index. */
  clear(): void {
    this.cachedAcf = null;
    this.ring.clear();
    this.moments.reset();
    this.lags.reset();
    this.firstIndex = this.nextIndex;
    this.pyramid.reset(this.firstIndex);
    this.removalsSinceRebuild = 0;
    this.nextAnchorCheck = 16;
    this.pollution = 0;
    this.lastLargeIndex = -1;
  }

  /** Mean of the window. */
  get mean(): number {
    return this.anchor + this.moments.shiftedMean;
  }

  /** Sample variance (divisor n - 1). */
  get variance(): number {
    return this.moments.variance;
  }

  /** Shifted value of the i-th oldest sample. */
  shiftedAt(i: number): number {
    return this.ring.at(i) - this.anchor;
  }

  /**
   * Biased autocovariance at lags 0..min(maxLag, n - 1) from the maintained products. Cost O(maxLag).
   * Without `out` the result is cached until the window changes: callers must not modify it.
   */
  autocovariance(out?: Float64Array): Float64Array {
    if (out === undefined) {
      if (this.cachedAcf && this.cachedAcfFirst === this.firstIndex && this.cachedAcfNext === this.nextIndex && this.cachedAcfLags === this.maxLag) return this.cachedAcf;
      this.cachedAcf = this.computeAutocovariance();
      this.cachedAcfFirst = this.firstIndex;
      this.cachedAcfNext = this.nextIndex;
      this.cachedAcfLags = this.maxLag;
      return this.cachedAcf;
    }
    return this.computeAutocovariance(out);
  }

  private computeAutocovariance(out?: Float64Array): Float64Array {
    const ring = this.ring;
    const n = ring.length;
    const anchor = this.anchor;
    const edge = Math.min(n, this.maxLag);
    const front = new Float64Array(edge);
    const back = new Float64Array(edge);
    for (let i = 0; i < edge; i++) {
      front[i] = ring.at(i) - anchor;
      back[i] = ring.at(n - 1 - i) - anchor;
    }
    return autocovarianceFromProducts(this.lags.products(), n, this.moments.shiftedSum, front, back, out);
  }

  /** The window's values, oldest first (a copy). */
  values(): Float64Array {
    return this.ring.copyValues();
  }

  /** The newest `count` values of the window, oldest first (a copy). O(count). */
  newestValues(count: number): Float64Array {
    return this.ring.copyNewestValues(count);
  }

  /** Bytes held by the window's buffers. */
  get byteLength(): number {
    return this.ring.capacity * 16 + this.pyramid.byteLength + this.lags.byteLength;
  }

  /** Plain-data state: restoring it continues the series bit for bit (typed arrays are copies). */
  saveState(): WindowedSeriesState {
    return {
      record: 'windowed-series',
      version: 1,
      ring: this.ring.saveState(),
      moments: this.moments.saveState(),
      lags: this.lags.saveState(),
      pyramid: this.pyramid.saveState(),
      anchor: this.anchor,
      firstIndex: this.firstIndex,
      nextIndex: this.nextIndex,
      removalsSinceRebuild: this.removalsSinceRebuild,
      nextAnchorCheck: this.nextAnchorCheck,
      pollution: this.pollution,
      lastLargeIndex: this.lastLargeIndex,
      maxLag: this.maxLag,
    };
  }

  loadState(state: WindowedSeriesState): void {
    expectRecord(state, 'windowed-series', 1);
    this.cachedAcf = null;
    const maxLag = state.maxLag;
    if (maxLag !== this.maxLag) {
      this.maxLag = maxLag;
      this.lags = new LaggedProducts(maxLag, (i) => this.ring.at(i) - this.anchor);
    }
    this.ring.loadState(state.ring);
    this.moments.loadState(state.moments);
    this.lags.loadState(state.lags);
    this.pyramid.loadState(state.pyramid);
    ({ anchor: this.anchor, firstIndex: this.firstIndex, nextIndex: this.nextIndex, removalsSinceRebuild: this.removalsSinceRebuild, nextAnchorCheck: this.nextAnchorCheck, pollution: this.pollution, lastLargeIndex: this.lastLargeIndex } = state);
  }

  /**
   * Maintains more lags from now on (a window estimator needed lags beyond maxLag): the lagged
   * products are rebuilt over the window with the new count. Cost O(n * maxLag).
   */
  growLags(maxLag: number): void {
    if (maxLag <= this.maxLag) return;
    this.maxLag = maxLag;
    this.lags = new LaggedProducts(maxLag, (i) => this.ring.at(i) - this.anchor);
    this.rebuild(this.anchor);
  }

  /** Rebuilds every sum exactly from the stored samples, around `anchor`. Cost O(n * maxLag). */
  rebuild(anchor: number): void {
    this.cachedAcf = null;
    const n = this.ring.length;
    this.anchor = n > 0 ? anchor : Number.NaN;
    this.moments.reset();
    this.lags.reset();
    this.pyramid.reset(this.firstIndex);
    this.pollution = 0;
    this.lastLargeIndex = -1;
    for (let i = 0; i < n; i++) {
      const shifted = this.ring.at(i) - this.anchor;
      this.track(shifted, this.firstIndex + i);
      this.moments.add(shifted);
      this.lags.addNewest(shifted);
      this.pyramid.add(this.firstIndex + i, shifted);
    }
    this.removalsSinceRebuild = 0;
    this.nextAnchorCheck = Math.max(16, 2 * n);
  }

  /**
   * Round-off in the sums scales with the largest value that passed through them. Once every value
   * left in the window is POLLUTION_RATIO times smaller than that (a spike or an old level has slid
   * out), `shift` rebuilds the sums exactly.
   */
  private track(shifted: number, index: number): void {
    const size = Math.abs(shifted);
    if (size > this.pollution) this.pollution = size;
    if (size * POLLUTION_RATIO > this.pollution) this.lastLargeIndex = index;
  }

  private checkAnchor(): void {
    // Checked at doubling lengths (and after rebuilds), so the cost is amortised O(1).
    this.nextAnchorCheck = Math.max(16, 2 * this.ring.length);
    if (this.anchorDrifted()) this.rebuild(this.mean);
  }

  /**
   * True when the window's mean has moved more than REANCHOR_SIGMAS standard deviations from the
   * anchor (a level change has passed through a sliding window, or a warm-up has settled), so the
   * shifted values have grown large against their spread and the sums would lose digits.
   */
  private anchorDrifted(): boolean {
    const mean = this.moments.shiftedMean;
    const variance = this.moments.variance;
    const representable = 1e-10 * Math.abs(this.anchor);
    return mean * mean > REANCHOR_SIGMAS * REANCHOR_SIGMAS * variance + representable * representable;
  }
}
