import { laggedProductSums } from '../acf/direct-autocovariance.js';
import { type TauEstimate, tauFloor } from './tau-estimate.js';

/**
 * Variance of a windowed mean from the spectral density at zero frequency of an autoregressive fit
 * (the AR spectral estimator).
 *
 * A stationary AR(p) process x_t = sum_j phi_j x_(t-j) + e_t with innovations variance sigma^2 has
 * spectral density at zero S(0) = sigma^2 / (1 - sum_j phi_j)^2 (normalised so that
 * Var(mean of n) ~ S(0) / n). Fitting the AR model to the window and reading S(0) from it is the
 * estimator P. Heidelberger & P. D. Welch (1981), "A spectral method for confidence interval
 * generation and run length control in simulations", Comm. ACM 24(4), 233-245, and their 1983
 * paper use for run-length control, and the one behind R coda's `spectrum0.ar` and `effectiveSize`
 * (both from memory; core/stationarity/spectrum0-ar.ts reproduces coda on a whole window).
 *
 * Unlike a lag-window sum (Sokal, Geyer), the AR fit follows a damped oscillation through its
 * negative lobes: Geyer's initial sequence stops at the first negative pair and overstates the
 * variance of an AR(2) with complex roots, Sokal's window can stop in a trough and understate it.
 *
 * Method, from the biased autocovariance gamma_0..gamma_L about the window mean (the maintained
 * lags: no pass over the window):
 * 1. Levinson-Durbin recursion (N. Levinson (1947), J. Math. Phys. 25, 261-278; J. Durbin (1960),
 *    Rev. Int. Statist. Inst. 28, 233-244) for the Yule-Walker fits of orders 1..maxOrder, with
 *    maxOrder = min(L, floor(10 log10 n)) (R's `ar` default order.max);
 * 2. order p by AIC, n ln sigma2_p + 2p (H. Akaike (1974), IEEE Trans. Autom. Control 19(6),
 *    716-723), the first minimiser, as R `ar.yw`;
 * 3. sigma2 = sigma2_p n / (n - p - 1) (coda's var.pred), S(0) = sigma2 / (1 - sum phi)^2,
 *    tau_int = S(0) / s^2 (s^2 the sample variance).
 * Degrees of freedom by the delta method on ln S(0): the Yule-Walker estimates are asymptotically
 *   normal with covariance sigma^2 Gamma_p^(-1) / n (Brockwell & Davis (1991), "Time Series: Theory
 *   and Methods", Theorem 8.1.1; from memory), so
 *   Var(ln S) ~ 2 / n + 4 / (1 - sum phi)^2 * sigma^2 * 1' Gamma_p^(-1) 1 / n,
 *   nu = 2 / Var(ln S) (a chi-square with nu degrees of freedom has Var(ln) ~ 2 / nu). For AR(1) this
 *   is n / (2 tau_int + 1), the same scale as a lag window's n / (2M + 1).
 * Choices: `reliable` is false when AIC chose the largest order tried (the model may need more lags
 *   than are maintained) or the window holds fewer than 50 tau_int.
 * Cost: O(maxOrder^2) for the recursion and O(p^3 / 6) for the Cholesky solve behind nu; no pass
 *   over the samples. Memory O(maxOrder^2) scratch.
 */
export interface ArFit {
  order: number;
  coefficients: Float64Array;
  /** Innovations variance with the n / (n - p - 1) correction. */
  innovationsVariance: number;
  /** Largest order tried. */
  maxOrder: number;
  /** S(0) = sigma2 / (1 - sum phi)^2. */
  spectrumAtZero: number;
  /** Var(ln S(0)) by the delta method. */
  logSpectrumVariance: number;
}

/**
 * Levinson-Durbin recursion for the Yule-Walker fits of orders 1..maxOrder from a biased
 * autocovariance, keeping the order that minimises n ln sigma2_k + penalty k (AIC for penalty 2, BIC
 * for ln n), the first minimiser as R's `ar.yw`. Stops at an order whose innovations variance is no
 * longer positive (a perfectly predictable series). Returns the chosen order, its coefficients and
 * its innovations variance sigma2_p (without the n / (n - p - 1) correction). O(maxOrder^2).
 */
export function levinsonDurbin(gamma: ArrayLike<number>, n: number, maxOrder: number, penalty = 2): { order: number; coefficients: Float64Array; variance: number } {
  const gamma0 = gamma[0] as number;
  let phi = new Float64Array(maxOrder + 1);
  let next = new Float64Array(maxOrder + 1);
  let variance = gamma0;
  let bestOrder = 0;
  let bestVariance = gamma0;
  let bestCriterion = n * Math.log(gamma0);
  let best = new Float64Array(0);
  for (let k = 1; k <= maxOrder; k++) {
    let numerator = gamma[k] as number;
    for (let j = 1; j < k; j++) numerator -= (phi[j] as number) * (gamma[k - j] as number);
    const reflection = numerator / variance;
    for (let j = 1; j < k; j++) next[j] = (phi[j] as number) - reflection * (phi[k - j] as number);
    next[k] = reflection;
    const swap = phi;
    phi = next;
    next = swap;
    variance *= 1 - reflection * reflection;
    if (!(variance > 0)) break;
    const criterion = n * Math.log(variance) + penalty * k;
    if (criterion < bestCriterion) {
      bestCriterion = criterion;
      bestOrder = k;
      bestVariance = variance;
      best = phi.slice(1, k + 1);
    }
  }
  return { order: bestOrder, coefficients: best, variance: bestVariance };
}

/** Yule-Walker AR fit with AIC order selection from a biased autocovariance (lag 0 first). */
export function fitAutoregression(gamma: ArrayLike<number>, n: number, orderCap = Number.POSITIVE_INFINITY, penalty = 2): ArFit | null {
  const gamma0 = gamma[0] as number;
  if (!(gamma0 > 0) || n < 8) return null;
  const maxOrder = Math.max(0, Math.min(gamma.length - 1, Math.floor(10 * Math.log10(n)), n - 2, orderCap));
  const { order: bestOrder, coefficients: best, variance: bestVariance } = levinsonDurbin(gamma, n, maxOrder, penalty);
  const innovationsVariance = (bestVariance * n) / (n - bestOrder - 1);
  let sum = 0;
  for (let j = 0; j < bestOrder; j++) sum += best[j] as number;
  const denominator = 1 - sum;
  const spectrumAtZero = innovationsVariance / (denominator * denominator);
  let logSpectrumVariance = 2 / n;
  if (bestOrder > 0) {
    const quadratic = onesQuadraticForm(gamma, bestOrder);
    logSpectrumVariance += (4 / (denominator * denominator)) * ((bestVariance * quadratic) / n);
  }
  return { order: bestOrder, coefficients: best, innovationsVariance, maxOrder, spectrumAtZero, logSpectrumVariance };
}

/** 1' Gamma_p^(-1) 1 for the Toeplitz matrix of gamma_0..gamma_(p-1), by Cholesky. O(p^3 / 6). */
function onesQuadraticForm(gamma: ArrayLike<number>, p: number): number {
  const l = new Float64Array(p * p);
  for (let i = 0; i < p; i++) {
    for (let j = 0; j <= i; j++) {
      let s = gamma[i - j] as number;
      for (let k = 0; k < j; k++) s -= (l[i * p + k] as number) * (l[j * p + k] as number);
      if (i === j) {
        if (!(s > 0)) return Number.POSITIVE_INFINITY;
        l[i * p + i] = Math.sqrt(s);
      } else l[i * p + j] = s / (l[j * p + j] as number);
    }
  }
  // Solve L y = 1; then 1' Gamma^-1 1 = |y|^2.
  const y = new Float64Array(p);
  let total = 0;
  for (let i = 0; i < p; i++) {
    let s = 1;
    for (let k = 0; k < i; k++) s -= (l[i * p + k] as number) * (y[k] as number);
    y[i] = s / (l[i * p + i] as number);
    total += (y[i] as number) ** 2;
  }
  return total;
}

export function autoregressiveSpectrum(gamma: ArrayLike<number>, n: number, sampleVariance: number): TauEstimate {
  const fit = sampleVariance > 0 ? fitAutoregression(gamma, n) : null;
  if (!fit) {
    return { method: 'ar', tauInt: 1, varianceOfMean: n > 0 ? sampleVariance / n : 0, dof: Math.max(0, n - 1), window: 0, reliable: false, note: n < 8 ? 'fewer than eight samples' : 'constant window: no variation to estimate' };
  }
  const tauInt = Math.max(fit.spectrumAtZero / sampleVariance, tauFloor(n));
  const dof = Math.max(1, Math.min(n - 1, 2 / fit.logSpectrumVariance));
  const atCap = fit.order === fit.maxOrder && fit.maxOrder > 0;
  const short = n < 50 * Math.max(1, tauInt);
  const reliable = !atCap && !short;
  return {
    method: 'ar',
    tauInt,
    varianceOfMean: (sampleVariance * tauInt) / n,
    dof,
    window: fit.order,
    reliable,
    ...(reliable ? {} : { note: atCap ? `AIC chose the largest order tried (${fit.maxOrder}): the autoregression may need more lags` : `window shorter than 50 tau_int (n = ${n}, tau_int = ${tauInt.toPrecision(3)})` }),
  };
}

/**
 * The autoregressive estimate over a stretch of values (a part of a window whose maintained lags
 * cover more than the stretch): lagged products up to order.max, then `autoregressiveSpectrum`.
 * Cost: O(m * order.max), order.max = min(64, floor(10 log10 m)).
 */
export function autoregressiveSpectrumOfValues(values: ArrayLike<number>): TauEstimate {
  const m = values.length;
  if (m < 8) return autoregressiveSpectrum(new Float64Array(1), m, 0);
  let mean = 0;
  for (let i = 0; i < m; i++) mean += values[i] as number;
  mean /= m;
  let correction = 0;
  for (let i = 0; i < m; i++) correction += (values[i] as number) - mean;
  mean += correction / m;
  const centred = new Float64Array(m);
  for (let i = 0; i < m; i++) centred[i] = (values[i] as number) - mean;
  const maxLag = Math.min(64, m - 2, Math.floor(10 * Math.log10(m)));
  const gamma = laggedProductSums(centred, maxLag);
  let squares = 0;
  for (let k = 0; k <= maxLag; k++) gamma[k] = (gamma[k] as number) / m;
  squares = (gamma[0] as number) * m;
  return autoregressiveSpectrum(gamma, m, squares / (m - 1));
}

/**
 * Variance of the mean of `blockSize` consecutive samples under the fitted autoregression:
 * (1 / b^2) [b gamma_0 + 2 sum_(k=1..b-1) (b - k) gamma_k], with gamma_0..gamma_p those the
 * Yule-Walker fit reproduces (the sample values) and gamma_k = sum_j phi_j gamma_(k-j) beyond
 * (the model's own autocovariance; Brockwell & Davis (1991), section 3.3; from memory). For b much
 * longer than the correlation it tends to S(0) / b; for a short block, or a damped oscillation whose
 * first lobe outweighs the rest, it differs from S(0) / b, which is what a monitor of block means
 * must be scaled by. Cost: O(b p).
 */
export function blockMeanVariance(gamma: ArrayLike<number>, fit: ArFit, blockSize: number): number {
  const b = Math.max(1, Math.floor(blockSize));
  const p = fit.order;
  const model = new Float64Array(b);
  for (let k = 0; k < b; k++) {
    if (k <= p && k < gamma.length) {
      model[k] = gamma[k] as number;
      continue;
    }
    let value = 0;
    for (let j = 1; j <= p; j++) value += (fit.coefficients[j - 1] as number) * (model[k - j] as number);
    model[k] = value;
  }
  let total = b * (model[0] as number);
  for (let k = 1; k < b; k++) total += 2 * (b - k) * (model[k] as number);
  return Math.max(total / (b * b), 0);
}
