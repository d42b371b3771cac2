/**
 * The estimators of the variance of a windowed mean that plateau offers; `auto` is the default
 * rule (core/tau/estimator-set.ts: an autoregressive spectral estimate after removing spectral
 * lines, and Beran's long-memory law where the series has long memory).
 */
export const ESTIMATOR_NAMES = ['auto', 'ar', 'geyer', 'sokal', 'obm', 'lugsail', 'blocking', 'batch-means', 'iid'] as const;
export type EstimatorName = (typeof ESTIMATOR_NAMES)[number];
/** The estimators computed for every snapshot (all but the `auto` rule, which picks among them). */
export type MethodEstimatorName = Exclude<EstimatorName, 'auto'>;
/** What produced an estimate: one of the estimators, or the long-memory law. */
export type MethodName = MethodEstimatorName | 'beran';

export function isEstimatorName(name: string): name is EstimatorName {
  return (ESTIMATOR_NAMES as readonly string[]).includes(name);
}

/**
 * What every estimator of the variance of a windowed mean returns.
 * tauInt = n * varianceOfMean / sampleVariance, so n / tauInt is the effective sample size.
 */
export interface TauEstimate {
  method: MethodName;
  /** Integrated autocorrelation time, in samples. */
  tauInt: number;
  /** Estimated variance of the window mean (squared data units). */
  varianceOfMean: number;
  /** Degrees of freedom of that variance estimate (chi-square equivalent). */
  dof: number;
  /** Lags summed (window estimators) or samples per batch (batch estimators). */
  window: number;
  /** False when the estimator had too little data to be trusted; `note` says why. */
  reliable: boolean;
  note?: string;
}

/**
 * Floor on tau_int: n_eff may not exceed n * log10(n), the cap that ArviZ and Stan apply to
 * anticorrelated series (A. Vehtari et al. (2021), Bayesian Analysis 16(2), 667-718), so that a
 * sum of negative autocorrelations can never shrink the uncertainty to nothing.
 */
export function tauFloor(n: number): number {
  return n > 10 ? 1 / Math.log10(n) : 1;
}

/**
 * The estimate of a lag-window estimator (Sokal, Geyer) that summed lags 1..window: the variance
 * of the mean from tau_int, n / (2 window + 1) degrees of freedom, and a note when the window
 * holds fewer than 50 tau_int. O(1).
 */
export function lagWindowEstimate(method: MethodName, tauInt: number, sampleVariance: number, n: number, window: number, reliable: boolean): TauEstimate {
  return {
    method,
    tauInt,
    varianceOfMean: (sampleVariance * tauInt) / n,
    dof: n / (2 * window + 1),
    window,
    reliable,
    ...(reliable ? {} : { note: `window shorter than 50 tau_int (n = ${n}, tau_int = ${tauInt.toPrecision(3)})` }),
  };
}
