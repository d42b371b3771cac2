import type { WindowedSeries } from '../window/windowed-series.js';
import type { PyramidLevelStats } from '../window/block-pyramid.js';
import { AutocovarianceFft } from '../acf/autocovariance-fft.js';
import { type EstimatorName, type TauEstimate } from './tau-estimate.js';
import { sokalWindow } from './sokal-window.js';
import { geyerMonotone } from './geyer-monotone.js';
import { blocking, batchMeans, independentSamples } from './blocking.js';

/**
 * Runs every tau_int estimator over one window and says whether they disagree.
 *
 * The window estimators (Sokal, Geyer) read the maintained autocovariance and fall back to an FFT
 * autocovariance of the whole window when their window runs past the maintained lags; the batch
 * estimators read the block pyramid. Two estimates disagree when their log ratio exceeds three
 * standard errors, taking var(ln tau) = 2 / nu for each (the chi-square approximation behind the
 * degrees of freedom).
 * Cost: O(maxLag + levels) from the maintained sums; O(n log n) when the FFT fallback is needed.
 */
export interface EstimatorSetResult {
  estimates: Record<EstimatorName, TauEstimate>;
  /** Autocovariance used by the window estimators (lag 0 first). */
  gamma: Float64Array;
  /** True when gamma came from the FFT of the whole window. */
  fullWindowAcf: boolean;
  disagreements: string[];
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

  /**
   * One estimator only (the pipeline's periodic precision check): the window estimators read the
   * maintained lags and fall back to the FFT like `run`; the batch estimators read the pyramid.
   */
  estimate(series: WindowedSeries, method: EstimatorName): TauEstimate {
    const n = series.length;
    const variance = series.variance;
    if (method === 'iid') return independentSamples(n, variance);
    if (method === 'blocking' || method === 'batch-means') {
      const gamma = series.autocovariance();
      const levels = pyramidLevels(series, gamma);
      return method === 'blocking' ? blocking({ n, sampleVariance: variance, levels }) : batchMeans({ n, sampleVariance: variance, levels });
    }
    const windowEstimator = method === 'sokal' ? sokalWindow : geyerMonotone;
    const first = windowEstimator(series.autocovariance(), n, variance, false);
    if (!('needsLags' in first)) return first;
    const estimate = windowEstimator(this.fullAutocovariance(series), n, variance, true) as TauEstimate;
    // The window ran past the maintained lags: keep twice as many from now on, so later estimates
    // need no FFT (whose cost grows with the window), once the window is known well
    // (GROW_AFTER_WINDOWS samples per lag, or a full window that will not get longer: an early,
    // noisy window would fix a needlessly long lag range for good) and within MAX_GROWN_LAGS (beyond, the per-sample cost would outgrow an
    // occasional transform).
    if (series.maxLag < MAX_GROWN_LAGS && (n >= GROW_AFTER_WINDOWS * estimate.window || n >= series.maxSamples)) {
      series.growLags(Math.min(MAX_GROWN_LAGS, 2 * estimate.window + 8));
    }
    return estimate;
  }

  run(series: WindowedSeries, minimumLags: number): EstimatorSetResult {
    const n = series.length;
    const variance = series.variance;
    let gamma = series.autocovariance();
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
    const estimates: Record<EstimatorName, TauEstimate> = {
      blocking: blocking({ n, sampleVariance: variance, levels }),
      sokal: sokal as TauEstimate,
      geyer: geyer as TauEstimate,
      'batch-means': batchMeans({ n, sampleVariance: variance, levels }),
      iid: independentSamples(n, variance),
    };
    return { estimates, gamma, fullWindowAcf, disagreements: disagreements(estimates) };
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

const COMPARED: EstimatorName[] = ['blocking', 'sokal', 'geyer'];

function disagreements(estimates: Record<EstimatorName, TauEstimate>): string[] {
  const out: string[] = [];
  for (let a = 0; a < COMPARED.length; a++) {
    for (let b = a + 1; b < COMPARED.length; b++) {
      const ea = estimates[COMPARED[a] as EstimatorName];
      const eb = estimates[COMPARED[b] as EstimatorName];
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
