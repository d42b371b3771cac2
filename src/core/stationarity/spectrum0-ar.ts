import { laggedProductSums } from '../acf/direct-autocovariance.js';
import { correctedMean, linearResidualSd } from './linear-residuals.js';
import { levinsonDurbin } from '../tau/autoregressive-spectrum.js';

/**
 * Spectral density at frequency zero from an autoregressive fit, as R coda's `spectrum0.ar`.
 *
 * S(0) is normalised so that Var(mean of n values) ~ S(0) / n (S(0) = gamma_0 * tau_int). It is the
 * variance estimate behind coda's effectiveSize, the Heidelberger-Welch test and Geweke's z.
 *
 * Method (coda 0.19-4 `spectrum0.ar`, with R 4.2 `stats::ar.yw`, read from the installed R):
 * 1. Fit x ~ t by least squares (t = 1..n); if the residual standard deviation is "zero" the series
 *    is a constant (or a straight line): S(0) = 0, order 0.
 * 2. Otherwise fit an AR(p) by Yule-Walker: demean; biased autocovariances
 *    gamma_k = (1/n) sum (x_t - xbar)(x_(t+k) - xbar); Levinson-Durbin recursion
 *    (N. Levinson (1947), "The Wiener RMS error criterion in filter design and prediction",
 *    J. Math. Phys. 25, 261-278; J. Durbin (1960), "The fitting of time-series models",
 *    Rev. Int. Statist. Inst. 28, 233-244; from memory) for every order k <= order.max =
 *    min(n - 1, floor(10 log10 n)), with innovations variances sigma2_k = sigma2_(k-1) (1 - phi_kk^2),
 *    sigma2_0 = gamma_0.
 * 3. Order p = the first minimiser of AIC(k) = n ln sigma2_k + 2k (H. Akaike (1974), "A new look at
 *    the statistical model identification", IEEE Trans. Autom. Control 19(6), 716-723; from memory).
 * 4. var.pred = sigma2_p * n / (n - (p + 1)); S(0) = var.pred / (1 - sum_j phi_(p,j))^2.
 *
 * Choice (the constant check): coda calls `all.equal(sd(residuals), 0)`, which is TRUE when the
 * residual sd is at most sqrt(DBL_EPSILON) = 2^-26 ~ 1.49e-8 in absolute terms. That threshold has
 * units: a signal whose natural scale is 1e-9 (fractional frequency, pressures in bar of a vacuum
 * gauge) is declared constant, its S(0) is 0 and every uncertainty built on it is 0 (checked on the
 * committed 1e-9 white-noise series: coda returns spec = 0). The default here is therefore
 * *relative*: constant when sd(residuals) <= constantTolerance * max|x_t|, with
 * constantTolerance = 1e-13 (about 450 units in the last place: a constant or exactly linear series
 * leaves rounding residuals of a few ulp, while any real signal is far above that).
 * `{ constantCheck: 'absolute' }` reproduces coda (tolerance 2^-26 unless given).
 *
 * Short series: for n <= 11, order.max = n - 1 and AIC may choose p = n - 1; var.pred and S(0) are
 * then +Infinity (n - (p + 1) = 0), as in R. Callers should not rely on S(0) below a few tens of
 * samples.
 * Cost: O(n * order.max) time for the autocovariances (order.max <= 10 log10 n, e.g. 40 at
 *   n = 10^4), O(order.max^2) for the recursion; O(n) memory (one residual array). Call on
 *   snapshots, not per sample.
 * @throws RangeError when fewer than 2 values are given.
 */
export interface Spectrum0ArOptions {
  /** 'relative' (default): sd(residuals) <= constantTolerance * max|x|; 'absolute': coda's rule. */
  constantCheck?: 'relative' | 'absolute';
  /** Threshold of the constant check: default 1e-13 (relative) or 2^-26 (absolute, coda's). */
  constantTolerance?: number;
}

export interface Spectrum0ArResult {
  /** S(0), the spectral density at zero frequency (Var(mean) ~ spectrum / n); 0 for a constant series. */
  spectrum: number;
  /** AR order p chosen by AIC (0 for a constant series). */
  order: number;
  /** Innovations variance of the AR(p) fit with coda's n / (n - (p + 1)) correction (0 when constant). */
  varPred: number;
  /** phi_(p,1..p), the AR coefficients (empty when p = 0). */
  coefficients: Float64Array;
  /** order.max = min(n - 1, floor(10 log10 n)), the largest order tried. */
  orderMax: number;
  /** True when the constant check fired (spectrum = 0). */
  constant: boolean;
}

/** coda's all.equal tolerance: sqrt(.Machine$double.eps) = 2^-26. */
export const CODA_CONSTANT_TOLERANCE = 2 ** -26;
/** Default relative tolerance of the constant check. */
export const RELATIVE_CONSTANT_TOLERANCE = 1e-13;

/** True when the values are constant (or exactly linear in t) under the chosen check. */
export function isConstantSeries(values: ArrayLike<number>, options: Spectrum0ArOptions = {}): boolean {
  if (values.length < 3) return true; // a line passes exactly through any two points
  const { residualSd, scale } = linearResidualSd(values, true);
  if (options.constantCheck === 'absolute') {
    return residualSd <= (options.constantTolerance ?? CODA_CONSTANT_TOLERANCE);
  }
  return residualSd <= (options.constantTolerance ?? RELATIVE_CONSTANT_TOLERANCE) * scale;
}

export function spectrum0Ar(values: ArrayLike<number>, options: Spectrum0ArOptions = {}): Spectrum0ArResult {
  const n = values.length;
  if (n < 2) throw new RangeError('spectrum0Ar requires at least 2 samples');
  const orderMax = Math.min(n - 1, Math.floor(10 * Math.log10(n)));
  if (isConstantSeries(values, options)) {
    return { spectrum: 0, order: 0, varPred: 0, coefficients: new Float64Array(0), orderMax, constant: true };
  }

  // ar.yw demeans, then acf demeans again (a no-op up to rounding, kept for fidelity).
  const centred = new Float64Array(n);
  const mean = correctedMean(values);
  for (let i = 0; i < n; i++) centred[i] = (values[i] as number) - mean;
  const mean2 = correctedMean(centred);
  for (let i = 0; i < n; i++) centred[i] = (centred[i] as number) - mean2;
  const gamma = laggedProductSums(centred, orderMax);
  for (let k = 0; k <= orderMax; k++) gamma[k] = (gamma[k] as number) / n;

  // Levinson-Durbin with AIC (core/tau/autoregressive-spectrum.ts), up to coda's order.max.
  const { order: bestOrder, coefficients: bestCoefficients, variance: bestVariance } = levinsonDurbin(gamma, n, orderMax);
  const varPred = (bestVariance * n) / (n - (bestOrder + 1));
  let coefficientSum = 0;
  for (let j = 0; j < bestOrder; j++) coefficientSum += bestCoefficients[j] as number;
  const spectrum = varPred / (1 - coefficientSum) ** 2;
  return { spectrum, order: bestOrder, varPred, coefficients: bestCoefficients, orderMax, constant: false };
}
