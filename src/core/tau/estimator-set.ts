import type { WindowedSeries } from '../window/windowed-series.js';
import type { PyramidLevelStats } from '../window/block-pyramid.js';
import { AutocovarianceFft } from '../acf/autocovariance-fft.js';
import { type EstimatorName, type MethodEstimatorName, type TauEstimate, tauFloor } from './tau-estimate.js';
import { sokalWindow } from './sokal-window.js';
import { geyerMonotone } from './geyer-monotone.js';
import { blocking, batchMeans, independentSamples } from './blocking.js';
import { autoregressiveSpectrum } from './autoregressive-spectrum.js';
import { overlappingBatchMeans } from './overlapping-batch-means.js';
import { lugsailBatchMeans } from './lugsail-batch-means.js';
import { longMemoryMean } from './long-memory-mean.js';
import { removeLines, type SpectralDiagnosis } from '../spectrum/spectral-diagnosis.js';

/**
 * Runs the estimators of the variance of a windowed mean over one window, applies the `auto` rule,
 * and says whether the estimators disagree.
 *
 * The `auto` rule (the default), chosen by the coverage benchmark (bench/coverage.js; figures in
 * DEVELOPERS.md):
 *   1. long memory in the spectral diagnosis -> Beran's law, var = s^2 n^(2H - 2) (no
 *      short-memory estimator is calibrated there; the verdict says so);
 *   2. otherwise the autoregressive spectral estimate at zero frequency (autoregressive-spectrum.ts)
 *      from the maintained autocovariance with the diagnosis' spectral lines removed (a limit
 *      cycle averages out; left in, it makes a lag-window sum read its first lobe as correlation).
 * It covers 0.93-0.97 on AR(1) (phi 0 to 0.99, normal and Student-t innovations), ARMA(1,1) and a
 * damped oscillation (AR(2) with complex roots), where Geyer's initial sequence overstates the
 * damped oscillation by 40 % or more and Sokal's window undercovers it.
 * The window estimators (Sokal, Geyer) read the maintained autocovariance and fall back to an FFT
 * of the whole window when their window runs past the maintained lags; the batch estimators read
 * the block pyramid; overlapping batch means pass over the window once.
 * Reading never changes the series: only `maintainLags`, called on the push path, grows the
 * maintained lags, so results and checkpoints do not depend on how often anyone reads.
 * Two estimates disagree when their log ratio exceeds three standard errors, taking
 * var(ln tau) = 2 / nu for each (the chi-square approximation behind the degrees of freedom).
 * Cost: O(maxLag^2 + levels) from the maintained sums (plus O(n) for overlapping batch means in
 *   `run`); O(n log n) when the FFT fallback is needed.
 */
export interface EstimatorSetResult {
  estimates: Record<MethodEstimatorName, TauEstimate>;
  /** What the `auto` rule gives, and why. */
  auto: AutoEstimate;
  /** Autocovariance used by the window estimators (lag 0 first). */
  gamma: Float64Array;
  /** True when gamma came from the FFT of the whole window. */
  fullWindowAcf: boolean;
  disagreements: string[];
}

export interface AutoEstimate {
  estimate: TauEstimate;
  reason: string;
}

export class EstimatorSet {
  private readonly fft: AutocovarianceFft;
  private cachedKey = '';
  private cachedGamma: Float64Array | null = null;

  /** `fft` may be shared by every channel of a process: it holds only transform tables and scratch space. */
  constructor(fft: AutocovarianceFft = new AutocovarianceFft()) {
    this.fft = fft;
  }

  /** Autocovariance over the whole window by FFT, cached while the window is unchanged. */
  fullAutocovariance(series: WindowedSeries): Float64Array {
    const key = `${series.firstIndex}:${series.nextIndex}`;
    if (this.cachedKey !== key || !this.cachedGamma) {
      this.cachedGamma = this.fft.compute(series.values(), series.length - 1);
      this.cachedKey = key;
    }
    return this.cachedGamma;
  }

  /** The `auto` rule over the maintained autocovariance (see the module comment). O(maxLag^2). */
  auto(series: WindowedSeries, diagnosis: SpectralDiagnosis | null, gamma: Float64Array = series.autocovariance()): AutoEstimate {
    const n = series.length;
    const variance = series.variance;
    const memory = diagnosis?.longMemory;
    if (memory?.detected) {
      const shortMemory = autoregressiveSpectrum(gamma, n, variance);
      const beran = longMemoryMean(n, variance, memory.hurst, memory.m);
      // Never narrower than the short-memory estimate.
      const estimate = beran.varianceOfMean >= shortMemory.varianceOfMean ? beran : { ...beran, tauInt: shortMemory.tauInt, varianceOfMean: shortMemory.varianceOfMean };
      return { estimate, reason: `long memory (Hurst exponent ${memory.hurst.toFixed(2)} +/- ${memory.standardError.toFixed(2)}): Beran's n^(2H-2) law` };
    }
    const lines = diagnosis?.lines ?? [];
    const noise = diagnosis?.lineFreeNoise;
    if (lines.length > 0 && noise) {
      // The noise under the lines, fitted on the samples with the sinusoids subtracted (the
      // diagnosis'); S(0) is a property of the process, so it holds for the window as it grows.
      const tauInt = Math.max(noise.spectrumAtZero / variance, tauFloor(n));
      const estimate: TauEstimate = { method: 'ar', tauInt, varianceOfMean: (variance * tauInt) / n, dof: Math.max(1, Math.min(n - 1, 2 / noise.logSpectrumVariance)), window: noise.order, reliable: n >= 50 * tauInt, ...(n >= 50 * tauInt ? {} : { note: `window shorter than 50 tau_int (n = ${n}, tau_int = ${tauInt.toPrecision(3)})` }) };
      const periods = lines.map((line) => line.period.toFixed(1)).join(', ');
      return { estimate, reason: `autoregressive spectrum at zero of the samples with ${lines.length === 1 ? 'a periodic component' : `${lines.length} periodic components`} (period ${periods} samples) subtracted` };
    }
    if (lines.length > 0) {
      const estimate = autoregressiveSpectrum(removeLines(gamma, n, lines), n, variance);
      const periods = lines.map((line) => line.period.toFixed(1)).join(', ');
      return { estimate, reason: `autoregressive spectrum at zero, after removing ${lines.length === 1 ? 'a periodic component' : `${lines.length} periodic components`} (period ${periods} samples)` };
    }
    const estimate = autoregressiveSpectrum(gamma, n, variance);
    return { estimate, reason: `autoregressive spectrum at zero (order ${estimate.window} by AIC)` };
  }

  /** One estimator only, read-only (the precision check and the light summary). */
  estimate(series: WindowedSeries, method: EstimatorName, diagnosis: SpectralDiagnosis | null): TauEstimate {
    const n = series.length;
    const variance = series.variance;
    switch (method) {
      case 'auto':
        return this.auto(series, diagnosis).estimate;
      case 'ar':
        return autoregressiveSpectrum(series.autocovariance(), n, variance);
      case 'iid':
        return independentSamples(n, variance);
      case 'obm':
        return overlappingBatchMeans(series.values(), variance);
      case 'blocking':
      case 'batch-means':
      case 'lugsail': {
        const levels = pyramidLevels(series, series.autocovariance());
        if (method === 'lugsail') return lugsailBatchMeans({ n, sampleVariance: variance, levels });
        return method === 'blocking' ? blocking({ n, sampleVariance: variance, levels }) : batchMeans({ n, sampleVariance: variance, levels });
      }
      case 'sokal':
      case 'geyer': {
        const windowEstimator = method === 'sokal' ? sokalWindow : geyerMonotone;
        const first = windowEstimator(series.autocovariance(), n, variance, false);
        if (!('needsLags' in first)) return first;
        return windowEstimator(this.fullAutocovariance(series), n, variance, true) as TauEstimate;
      }
    }
  }

  /**
   * Push path only: when a window estimator's window ran past the maintained lags, keep twice as
   * many from now on (later estimates then need no FFT, whose cost grows with the window), once the
   * window is known well (GROW_AFTER_WINDOWS samples per lag, or a full window that will not get
   * longer: an early, noisy window would fix a needlessly long lag range for good) and within
   * MAX_GROWN_LAGS (beyond, the per-sample cost would outgrow an occasional transform).
   */
  maintainLags(series: WindowedSeries, estimate: TauEstimate): void {
    if (estimate.method !== 'geyer' && estimate.method !== 'sokal') return;
    if (estimate.window <= series.maxLag || series.maxLag >= MAX_GROWN_LAGS) return;
    const n = series.length;
    if (n >= GROW_AFTER_WINDOWS * estimate.window || n >= series.maxSamples) series.growLags(Math.min(MAX_GROWN_LAGS, 2 * estimate.window + 8));
  }

  run(series: WindowedSeries, minimumLags: number, diagnosis: SpectralDiagnosis | null): EstimatorSetResult {
    const n = series.length;
    const variance = series.variance;
    const maintained = series.autocovariance();
    let gamma = maintained;
    let fullWindowAcf = false;
    const wantLags = Math.min(n - 1, minimumLags);
    if (gamma.length - 1 < wantLags) {
      gamma = this.fullAutocovariance(series);
      fullWindowAcf = true;
    }
    let sokal = sokalWindow(gamma, n, variance, fullWindowAcf);
    let geyer = geyerMonotone(gamma, n, variance, fullWindowAcf);
    if ('needsLags' in sokal || 'needsLags' in geyer) {
      gamma = this.fullAutocovariance(series);
      fullWindowAcf = true;
      sokal = sokalWindow(gamma, n, variance, true);
      geyer = geyerMonotone(gamma, n, variance, true);
    }
    const levels = pyramidLevels(series, gamma);
    // The autoregression reads the maintained lags, as the push path does, so the snapshot states
    // the same estimate the precision events were raised on.
    const auto = this.auto(series, diagnosis, maintained);
    const estimates: Record<MethodEstimatorName, TauEstimate> = {
      ar: autoregressiveSpectrum(maintained, n, variance),
      geyer: geyer as TauEstimate,
      sokal: sokal as TauEstimate,
      obm: overlappingBatchMeans(series.values(), variance),
      lugsail: lugsailBatchMeans({ n, sampleVariance: variance, levels }),
      blocking: blocking({ n, sampleVariance: variance, levels }),
      'batch-means': batchMeans({ n, sampleVariance: variance, levels }),
      iid: independentSamples(n, variance),
    };
    return { estimates, auto, gamma, fullWindowAcf, disagreements: disagreements(estimates) };
  }
}

/** Level statistics from the raw samples (level 0) up the pyramid. */
export function pyramidLevels(series: WindowedSeries, gamma: Float64Array): PyramidLevelStats[] {
  const n = series.length;
  const levels: PyramidLevelStats[] = [];
  const gamma0 = gamma[0] ?? 0;
  levels.push({
    blockSize: 1,
    count: n,
    mean: series.moments.shiftedMean,
    biasedVariance: gamma0,
    lagOneAutocovariance: gamma[1] ?? 0,
    successiveDifferenceSquares: 0,
  });
  for (let j = 1; ; j++) {
    const stats = series.pyramid.stats(j);
    if (!stats) break;
    levels.push(stats);
  }
  return levels;
}

/** Most lags the pipeline will maintain by itself; longer windows use the FFT of the window. */
export const MAX_GROWN_LAGS = 384;
/** Samples per lag of the window estimate before the maintained lags grow to it. */
const GROW_AFTER_WINDOWS = 50;

const COMPARED: MethodEstimatorName[] = ['ar', 'geyer', 'sokal', 'blocking'];

function disagreements(estimates: Record<MethodEstimatorName, TauEstimate>): string[] {
  const out: string[] = [];
  for (let a = 0; a < COMPARED.length; a++) {
    for (let b = a + 1; b < COMPARED.length; b++) {
      const ea = estimates[COMPARED[a] as MethodEstimatorName];
      const eb = estimates[COMPARED[b] as MethodEstimatorName];
      if (!(ea.tauInt > 0 && eb.tauInt > 0 && ea.dof > 0 && eb.dof > 0)) continue;
      const spread = 3 * Math.sqrt(2 / ea.dof + 2 / eb.dof);
      const logRatio = Math.log(ea.tauInt / eb.tauInt);
      if (Math.abs(logRatio) > spread) {
        out.push(`${ea.method} tau_int ${ea.tauInt.toPrecision(3)} and ${eb.method} ${eb.tauInt.toPrecision(3)} differ by more than their sampling error`);
      }
    }
  }
  return out;
}
