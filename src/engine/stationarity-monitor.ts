import { TwoSidedCusum, decisionIntervalForArl, type CusumState } from '../core/stationarity/cusum.js';
import { expectRecord, type StateRecord } from '../core/state/record.js';
import { varianceChangeTest } from '../core/stationarity/variance-change.js';
import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';
import { changeFits } from '../core/stationarity/change-point-fits.js';

/**
 * Watches a steady channel for the end of stationarity: a shift, a trend or a change in noise.
 *
 * The samples are averaged in blocks of `blockSize` (several times tau_int, so block means are
 * nearly independent and nearly normal), and each block mean feeds three detectors:
 *   - a two-sided CUSUM (E. S. Page (1954), Biometrika 41, 100-115) on self-starting
 *     standardised block means: z_j = (m_j - mean of the previous blocks) / (sigma_b sqrt(1 + 1/(j-1))),
 *     with sigma_b^2 = (long-run variance) / blockSize (D. M. Hawkins (1987), "Self-starting CUSUM
 *     charts for location and scale", The Statistician 36, 299-316: the running reference
 *     removes the Phase I estimation error that a frozen reference mean would carry into the
 *     false-alarm rate). Its decision interval comes from the false-alarm budget through
 *     Siegmund's approximation (core/stationarity/cusum.ts);
 *   - a variance-change F test: the sample variance of the last RECENT_BLOCKS block means against
 *     sigma_b^2 (core/stationarity/variance-change.ts);
 *   - a trend test on the last TREND_BLOCKS block means: the least-squares slope against its
 *     standard error sigma_b / sqrt(S_jj), which is autocorrelation-consistent because sigma_b comes
 *     from the long-run variance (W. K. Newey & K. D. West (1987), Econometrica 55, 703-708, for the
 *     principle; the block means carry the correlation).
 * The false-alarm budget (mean samples between false alarms on a stationary channel) is shared:
 * the CUSUM gets an in-control run length of 3 budgets, each test a per-test size of one tenth of
 * a budget's worth of tests, so that together they stay under one false alarm per budget
 * (1/3 + 1/10 + 1/10, with room for the error of the estimated long-run variance; measured in
 * bench/detect.js).
 *
 * On an alarm the cause is decided by fitting the block means since the reference start with a
 * step (level change at one block) and with a ramp (level constant, then linear from one block):
 * the better fit names the cause (shift or trend) and its break block is the change point; the
 * variance test names the cause variance.
 *
 * Cost: O(1) per sample (one addition), O(1) per block for the CUSUM, O(RECENT_BLOCKS) every
 * RECENT_BLOCKS blocks for the tests, O(K^2) in the K stored block means only when an alarm is
 * classified. Memory: HISTORY_BLOCKS doubles for the block means (8 KiB).
 */
export type BreakCause = 'shift' | 'trend' | 'variance';

export interface StationarityBreak {
  cause: BreakCause;
  /** Absolute sample index where the break is estimated to have begun. */
  changePoint: number;
  /** The statistic that raised it: CUSUM side and sum, test z or F ratio. */
  detail: string;
  /** For a trend: the fitted slope after the change point and its standard uncertainty, per sample. */
  slope?: { perSample: number; standardUncertainty: number };
  /** Log-likelihood lead of the named cause over the next best (classification only). */
  margin?: number;
}

export interface MonitorSettings {
  /** Samples per block. */
  blockSize: number;
  /** Long-run variance sigma_inf^2 = tau_int * variance, in squared data units. */
  longRunVariance: number;
  /** Degrees of freedom of that estimate. */
  longRunDof: number;
  /** Mean samples between false alarms. */
  falseAlarmSamples: number;
}

export interface MonitorState extends StateRecord<'stationarity-monitor', 1> {
  settings: MonitorSettings;
  cusum: CusumState;
  blockSum: number;
  blockCount: number;
  blockStart: number;
  historyLength: number;
  historyStart: number;
  blocks: number;
  referenceMean: number;
  origin: number;
  history: Float64Array;
  trace: Float32Array;
  traceCount: number;
}

const HISTORY_BLOCKS = 1024;
const TRACE_BLOCKS = 512;
const RECENT_BLOCKS = 16;
const TREND_BLOCKS = 64;
/** Blocks of self-starting reference before the CUSUM may alarm. */
const BURN_IN_BLOCKS = 8;
const CUSUM_REFERENCE = 0.5;
/** Blocks during which the long-run variance may still be refined. */
const REFERENCE_BLOCKS = 64;

export class StationarityMonitor {
  settings: MonitorSettings;
  private cusum: TwoSidedCusum;
  private blockSum = 0;
  private blockCount = 0;
  /** Absolute sample index of the first sample of the current block. */
  private blockStart = 0;
  /** Block means since the reference start (up to HISTORY_BLOCKS, oldest dropped), shifted by `origin`. */
  private history = new Float64Array(HISTORY_BLOCKS);
  private historyLength = 0;
  /** Absolute sample index where block 0 of `history` began. */
  private historyStart = 0;
  /** Blocks since the reference start. */
  private blocks = 0;
  /** Running mean of block means since the reference start (shifted). */
  private referenceMean = 0;
  /** Value subtracted from every sample (keeps the block sums small). */
  private origin = 0;
  private readonly thresholds: { varianceAlpha: number; trendZ: number };
  /** Recent CUSUM sums for display (upper, lower interleaved), a ring of TRACE_BLOCKS. */
  private trace = new Float32Array(2 * TRACE_BLOCKS);
  private traceCount = 0;

  constructor(settings: MonitorSettings, startIndex: number, origin: number) {
    this.settings = settings;
    this.cusum = new TwoSidedCusum({ reference: CUSUM_REFERENCE, decisionInterval: cusumInterval(settings) });
    this.blockStart = startIndex;
    this.historyStart = startIndex;
    this.origin = origin;
    this.thresholds = testThresholds(settings);
  }

  /** Adds a sample (absolute index `index`); returns a break when one is detected at this sample. */
  push(value: number, index: number): StationarityBreak | null {
    this.blockSum += value - this.origin;
    this.blockCount++;
    if (this.blockCount < this.settings.blockSize) return null;
    const mean = this.blockSum / this.blockCount;
    this.blockSum = 0;
    this.blockCount = 0;
    this.blockStart = index + 1;
    return this.addBlock(mean, index);
  }

  /**
   * After an alarm: keeps recording block means (no alarms), so that the break can be classified
   * again on more of what followed it (`reclassify`). O(1) per sample.
   */
  observe(value: number, index: number): void {
    this.blockSum += value - this.origin;
    this.blockCount++;
    if (this.blockCount < this.settings.blockSize) return;
    const mean = this.blockSum / this.blockCount;
    this.blockSum = 0;
    this.blockCount = 0;
    this.blockStart = index + 1;
    this.record(mean);
  }

  /**
   * The break's cause and change point from every block recorded so far: shortly after an alarm a
   * step and the start of a drift fit the few blocks since the change about equally well; a few
   * times as many blocks later the shapes separate (a drift keeps rising, a step stays flat).
   * O(K^2) in the K stored block means.
   */
  reclassify(index: number, detail: string, current: BreakCause): StationarityBreak {
    // With the shapes apart, the step needs no head start; the cause changes only on decisive
    // evidence (a log-likelihood lead of REVISE_MARGIN), so a revision cannot flip back and forth.
    const revised = this.classify(detail, index, undefined, 0);
    if (revised.cause === current || (revised.margin ?? 0) >= REVISE_MARGIN) return revised;
    return this.classify(detail, index, current, 0);
  }

  /**
   * Updates the long-run variance (and its dof) as the estimate improves, during the reference
   * period only (the first REFERENCE_BLOCKS blocks, up to four times longer while the estimate has
   * fewer than 200 degrees of freedom: a sliding window's estimate may never get there): later, a
   * slow drift would inflate the estimate and hide itself. The block size stays.
   */
  /** Whether the long-run variance is still being refined (the reference period). */
  get refining(): boolean {
    return this.blocks < REFERENCE_BLOCKS || (this.settings.longRunDof < 200 && this.blocks < 4 * REFERENCE_BLOCKS);
  }

  refresh(longRunVariance: number, longRunDof: number): void {
    if (!(longRunVariance > 0) || !this.refining) return;
    this.settings = { ...this.settings, longRunVariance, longRunDof };
  }

  get blockTotal(): number {
    return this.blocks;
  }

  /** Absolute index of the first sample the monitor took as its reference (while its history holds it). */
  get referenceStart(): number {
    return this.historyStart;
  }

  /** The CUSUM sums of the most recent blocks (up to TRACE_BLOCKS), oldest first, with the block length. */
  cusumTrace(): { blockSize: number; decisionInterval: number; upper: number[]; lower: number[] } {
    const count = Math.min(this.traceCount, TRACE_BLOCKS);
    const upper: number[] = [];
    const lower: number[] = [];
    for (let i = this.traceCount - count; i < this.traceCount; i++) {
      const slot = i % TRACE_BLOCKS;
      upper.push(this.trace[2 * slot] as number);
      lower.push(this.trace[2 * slot + 1] as number);
    }
    return { blockSize: this.settings.blockSize, decisionInterval: this.cusum.decisionInterval, upper, lower };
  }

  /** The current CUSUM sums in standard deviations (for display). */
  get cusumSums(): { upper: number; lower: number; decisionInterval: number } {
    return { upper: this.cusum.upper, lower: this.cusum.lower, decisionInterval: this.cusum.decisionInterval };
  }

  saveState(): MonitorState {
    return {
      record: 'stationarity-monitor',
      version: 1,
      settings: { ...this.settings },
      cusum: this.cusum.state(),
      blockSum: this.blockSum,
      blockCount: this.blockCount,
      blockStart: this.blockStart,
      historyLength: this.historyLength,
      historyStart: this.historyStart,
      blocks: this.blocks,
      referenceMean: this.referenceMean,
      origin: this.origin,
      history: this.history.slice(),
      trace: this.trace.slice(),
      traceCount: this.traceCount,
    };
  }

  static fromState(state: MonitorState): StationarityMonitor {
    expectRecord(state, 'stationarity-monitor', 1);
    const monitor = new StationarityMonitor(state.settings, 0, 0);
    monitor.cusum = TwoSidedCusum.restore(state.cusum);
    ({ blockSum: monitor.blockSum, blockCount: monitor.blockCount, blockStart: monitor.blockStart, historyLength: monitor.historyLength, historyStart: monitor.historyStart, blocks: monitor.blocks, referenceMean: monitor.referenceMean, origin: monitor.origin } = state);
    monitor.history.set(state.history);
    monitor.trace.set(state.trace);
    monitor.traceCount = state.traceCount;
    return monitor;
  }

  private addBlock(mean: number, index: number): StationarityBreak | null {
    const { blockSize, longRunVariance, longRunDof } = this.settings;
    // The long-run variance is an estimate with nu degrees of freedom; scaling by its value one
    // standard error high (1 + sqrt(2 / nu)) keeps an early, uncertain estimate from crowding the
    // false-alarm budget in the first hours of monitoring.
    const sigmaBlock = Math.sqrt((longRunVariance * (1 + Math.sqrt(2 / Math.max(1, longRunDof)))) / blockSize);
    const j = this.blocks; // blocks before this one
    this.record(mean);
    let alarm: 'up' | 'down' | null = null;
    if (j >= 1 && sigmaBlock > 0) {
      const z = (mean - this.referenceMean) / (sigmaBlock * Math.sqrt(1 + 1 / j));
      // Winsorised at +/- Z_CLIP: one wild block (heavy-tailed noise, a spike) moves the sums by at
      // most Z_CLIP - k, while a real shift of a few sigma_b is untouched (the robust CUSUM of J. M.
      // Lucas & R. B. Crosier (1982), "Robust CUSUM: a robustness study for CUSUM quality control
      // schemes", Commun. Statist. Theory Methods 11(23), 2669-2687; from memory).
      const side = this.cusum.update(Math.max(-Z_CLIP, Math.min(Z_CLIP, z)));
      if (j >= BURN_IN_BLOCKS) alarm = side;
      const slot = this.traceCount % TRACE_BLOCKS;
      this.trace[2 * slot] = this.cusum.upper;
      this.trace[2 * slot + 1] = this.cusum.lower;
      this.traceCount++;
    }
    this.referenceMean += (mean - this.referenceMean) / (j + 1);
    this.blocks = j + 1;
    if (alarm) {
      const detail = `CUSUM ${alarm === 'up' ? 'upper' : 'lower'} sum ${(alarm === 'up' ? this.cusum.upper : this.cusum.lower).toFixed(2)} over h = ${this.cusum.decisionInterval.toFixed(2)}`;
      return this.classify(detail, index);
    }
    if (this.blocks >= BURN_IN_BLOCKS + RECENT_BLOCKS && this.blocks % RECENT_BLOCKS === 0 && sigmaBlock > 0) {
      const recent = this.recentVariance(sigmaBlock);
      // Heavy-tailed noise makes the variance of a sample variance larger than the normal
      // theory's 2 / (n - 1): Var(s^2) / sigma^4 = 2 / (n - 1) + kappa / n for excess kurtosis kappa
      // (a standard result for the sample variance; e.g. G. E. P. Box (1953), Biometrika 40,
      // 318-335, on the non-robustness of variance tests; from memory), so the recent variance gets
      // the chi-square degrees of freedom 2 / that, kappa from the stored block means.
      // (The kurtosis only ever weakens the test, so it is worked out only when the normal-theory
      // test would fire.)
      const reference = { longRunVariance, dof: Math.max(1, this.settings.longRunDof) };
      let test = varianceChangeTest({ longRunVariance: recent * blockSize, dof: RECENT_BLOCKS - 1 }, reference, this.thresholds.varianceAlpha);
      if (test.changed && test.direction === 'up') {
        const kappa = this.blockKurtosis();
        test = varianceChangeTest({ longRunVariance: recent * blockSize, dof: 2 / (2 / (RECENT_BLOCKS - 1) + kappa / RECENT_BLOCKS) }, reference, this.thresholds.varianceAlpha);
      }
      // Only more noise breaks the averaging: less noise leaves the stated uncertainty conservative.
      if (test.changed && test.direction === 'up') {
        const start = this.historyStart + (this.historyLength - RECENT_BLOCKS) * blockSize;
        return { cause: 'variance', changePoint: Math.max(this.historyStart, start), detail: `variance of the last ${RECENT_BLOCKS} block means ${test.ratio?.toFixed(2)} times the reference (p = ${test.pValue?.toPrecision(2)})` };
      }
      const trendZ = this.recentSlopeZ(sigmaBlock);
      if (trendZ !== null && Math.abs(trendZ) > this.thresholds.trendZ) return this.classify(`slope of the last ${Math.min(TREND_BLOCKS, this.historyLength)} block means z = ${trendZ.toFixed(2)}`, index, 'trend');
    }
    return null;
  }

  private record(mean: number): void {
    if (this.historyLength === HISTORY_BLOCKS) {
      this.history.copyWithin(0, 1);
      this.historyLength--;
      this.historyStart += this.settings.blockSize;
    }
    this.history[this.historyLength++] = mean;
  }

  /** Excess kurtosis of the stored block means (0 when they look normal or are too few), clipped to [0, 20]. */
  private blockKurtosis(): number {
    const k = this.historyLength;
    if (k < 32) return 0;
    let mean = 0;
    for (let i = 0; i < k; i++) mean += this.history[i] as number;
    mean /= k;
    let m2 = 0;
    for (let i = 0; i < k; i++) m2 += ((this.history[i] as number) - mean) ** 2;
    m2 /= k;
    if (!(m2 > 0) || !Number.isFinite(m2)) return 0;
    // Fourth moment of the standardised deviations: no overflow however large the values.
    const sd = Math.sqrt(m2);
    let m4 = 0;
    for (let i = 0; i < k; i++) m4 += (((this.history[i] as number) - mean) / sd) ** 4;
    const excess = m4 / k - 3;
    return Number.isFinite(excess) ? Math.max(0, Math.min(20, excess)) : 20;
  }

  /**
   * Sample variance of the last RECENT_BLOCKS block means, each deviation winsorised at
   * VARIANCE_CLIP sigma_b: a single wild block cannot fake a change of noise, while a real increase
   * shows in most blocks (a doubled spread puts only 4.6 % of block means beyond the clip).
   */
  private recentVariance(sigmaBlock: number): number {
    let sum = 0;
    const from = this.historyLength - RECENT_BLOCKS;
    for (let i = from; i < this.historyLength; i++) sum += this.history[i] as number;
    const m = sum / RECENT_BLOCKS;
    const clip = VARIANCE_CLIP * sigmaBlock;
    let squares = 0;
    for (let i = from; i < this.historyLength; i++) squares += Math.min(clip, Math.abs((this.history[i] as number) - m)) ** 2;
    return squares / (RECENT_BLOCKS - 1);
  }

  /** z of the least-squares slope of the last TREND_BLOCKS block means. */
  private recentSlopeZ(sigmaBlock: number): number | null {
    const count = Math.min(TREND_BLOCKS, this.historyLength);
    if (count < RECENT_BLOCKS) return null;
    const from = this.historyLength - count;
    const centre = (count - 1) / 2;
    let sxy = 0;
    let sxx = 0;
    for (let i = 0; i < count; i++) {
      const x = i - centre;
      sxy += x * (this.history[from + i] as number);
      sxx += x * x;
    }
    return sxy / sxx / (sigmaBlock / Math.sqrt(sxx));
  }

  /**
   * Shift, trend or variance: the block means since the reference start are fitted by three
   * one-change models (step and ramp: core/stationarity/change-point-fits.ts) with the reference
   * block variance sigma_b^2 known before the change:
   *   step      the level changes at block c                    (maximised over c and the two levels)
   *   ramp      the level is constant, then linear from block c (over c, level and slope)
   *   variance  the level stays, the spread changes at block c  (over c and the new spread)
   * Each has three free parameters, so their maximised log-likelihoods compare directly; the
   * largest names the cause and its c is the change point (the profile-likelihood change-point
   * estimate; D. V. Hinkley (1970), "Inference about the change-point in a sequence of random
   * variables", Biometrika 57(1), 1-17, from memory). The step gets a small head start
   * (STEP_PREFERENCE, in log-likelihood units): shortly after a break the shapes are hard to tell
   * apart, and a set-point change or a valve is the most common event on a rig. bench/detect.js
   * reports how often each kind of change is named correctly.
   * Cost: O(k^2) in the k stored block means, at alarm time only.
   */
  private classify(detail: string, index: number, forced?: BreakCause, stepPreference = STEP_PREFERENCE): StationarityBreak {
    const k = this.historyLength;
    const y = this.history;
    const { blockSize } = this.settings;
    const sigma2 = Math.max(this.settings.longRunVariance / blockSize, Number.MIN_VALUE);
    let total = 0;
    for (let i = 0; i < k; i++) total += y[i] as number;
    const mean = total / k;
    const fits = changeFits(y, k);
    const squares = fits.squares;
    const bestStep = Number.isFinite(fits.step.rss) ? -fits.step.rss / (2 * sigma2) + stepPreference : Number.NEGATIVE_INFINITY;
    const stepAt = fits.step.at;
    const bestRamp = Number.isFinite(fits.ramp.rss) ? -fits.ramp.rss / (2 * sigma2) : Number.NEGATIVE_INFINITY;
    const rampAt = fits.ramp.at;
    const rampSlope = fits.ramp.slope;
    const rampSxx = fits.ramp.sxx;
    // Variance: level = mean of all blocks; the spread after c is fitted.
    let bestVariance = Number.NEGATIVE_INFINITY;
    let varianceAt = Math.max(1, k - 1);
    let suffix = 0;
    for (let c = k - 1; c >= 1; c--) {
      suffix += ((y[c] as number) - mean) ** 2;
      const post = k - c;
      if (post < 3) continue;
      const pre = squares - suffix;
      const ratio = Math.max(suffix / (post * sigma2), Number.MIN_VALUE);
      const ll = -pre / (2 * sigma2) - (post / 2) * (Math.log(ratio) + 1);
      if (ll > bestVariance) {
        bestVariance = ll;
        varianceAt = c;
      }
    }
    let cause: BreakCause = 'shift';
    let block = stepAt;
    if (forced) {
      cause = forced;
      block = forced === 'trend' ? rampAt : forced === 'variance' ? varianceAt : stepAt;
    } else if (bestRamp > bestStep && bestRamp >= bestVariance) {
      cause = 'trend';
      block = rampAt;
    } else if (bestVariance > bestStep && bestVariance > bestRamp) {
      cause = 'variance';
      block = varianceAt;
    }
    const changePoint = Math.min(index, this.historyStart + block * blockSize);
    const scores = { shift: bestStep, trend: bestRamp, variance: bestVariance };
    const others = (Object.keys(scores) as BreakCause[]).filter((c) => c !== cause).map((c) => scores[c]);
    const margin = scores[cause] - Math.max(...others);
    if (cause !== 'trend') return { cause, changePoint, detail, margin };
    // Slope per block of the ramp, its standard error sigma_b / sqrt(S_uu); per sample by / blockSize.
    const slope = { perSample: rampSlope / blockSize, standardUncertainty: Math.sqrt(sigma2 / rampSxx) / blockSize };
    return { cause, changePoint, detail: `${detail}; slope ${slope.perSample.toPrecision(3)} \u00b1 ${slope.standardUncertainty.toPrecision(2)} per sample`, slope, margin };
  }
}

/** Winsorisation of the standardised block means fed to the CUSUM. */
const Z_CLIP = 3;
/** Winsorisation of the block-mean deviations in the variance test (in sigma_b). */
const VARIANCE_CLIP = 4;
/** Log-likelihood lead a reclassification needs to change a break's cause (a likelihood ratio of e^2). */
const REVISE_MARGIN = 2;
/** Log-likelihood head start of the step model in classification (about one block's worth of evidence). */
const STEP_PREFERENCE = 0.5;

function cusumInterval(settings: MonitorSettings): number {
  const blocksPerBudget = settings.falseAlarmSamples / settings.blockSize;
  return decisionIntervalForArl(Math.max(10, 3 * blocksPerBudget), CUSUM_REFERENCE);
}

function testThresholds(settings: MonitorSettings): { varianceAlpha: number; trendZ: number } {
  const testsPerBudget = Math.max(1, settings.falseAlarmSamples / (settings.blockSize * RECENT_BLOCKS));
  const alpha = Math.min(0.01, 1 / (10 * testsPerBudget));
  return { varianceAlpha: alpha, trendZ: normalQuantile(1 - alpha / 2, 0, 1) };
}
