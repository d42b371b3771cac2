/**
 * Residuals of a series about its mean or about its least-squares line on t = 1..n, computed in
 * centred form, shared by the stationarity tests (KPSS residuals, the constant-series check of the
 * AR spectral density at zero).
 *
 * Method: ordinary least squares on (1, t) written about the means (x - xbar, t - tbar), which is
 * the numerically stable form of the normal equations (no n * sum(t^2) - (sum t)^2 cancellation);
 * sum_t (t - tbar)^2 = n (n^2 - 1) / 12 exactly. The mean is the two-pass corrected mean
 * (xbar = s/n, then xbar += sum(x - xbar)/n), which returns a constant series' value exactly, so a
 * constant series has residuals exactly 0.
 * Cost: O(n) time, one Float64Array of n values.
 */

/** Two-pass corrected mean of values[from..to) (to exclusive). */
export function correctedMean(values: ArrayLike<number>, from = 0, to = values.length): number {
  const count = to - from;
  let sum = 0;
  for (let i = from; i < to; i++) sum += values[i] as number;
  let mean = sum / count;
  let correction = 0;
  for (let i = from; i < to; i++) correction += (values[i] as number) - mean;
  mean += correction / count;
  return mean;
}

export interface LinearResiduals {
  /** The residuals e_t, t = 1..n. */
  residuals: Float64Array;
  /** Sample standard deviation of the residuals, sqrt(sum e^2 / (n - 1)) (as R's sd(residuals(lm))). */
  residualSd: number;
  /** Magnitude of the data, max |x_t|, the scale of the relative constant check. */
  scale: number;
}

/** The mean, the OLS slope on t = 1..n about tbar (0 without a trend) and max |x_t|. */
function lineFit(values: ArrayLike<number>, trend: boolean): { mean: number; slope: number; scale: number } {
  const n = values.length;
  if (n < 2) throw new RangeError('linearResiduals requires at least 2 samples');
  const mean = correctedMean(values);
  let scale = 0;
  let sxt = 0;
  const tMean = (n + 1) / 2;
  for (let i = 0; i < n; i++) {
    const x = values[i] as number;
    const a = Math.abs(x);
    if (a > scale) scale = a;
    if (trend) sxt += (i + 1 - tMean) * (x - mean);
  }
  return { mean, slope: trend ? sxt / ((n * (n * n - 1)) / 12) : 0, scale };
}

/**
 * Residuals about the mean (`trend = false`) or about the OLS line on t = 1..n (`trend = true`).
 * @throws RangeError when fewer than 2 values are given.
 */
export function linearResiduals(values: ArrayLike<number>, trend: boolean): LinearResiduals {
  const n = values.length;
  const { mean, slope, scale } = lineFit(values, trend);
  const tMean = (n + 1) / 2;
  const residuals = new Float64Array(n);
  let sumSquares = 0;
  for (let i = 0; i < n; i++) {
    const e = ((values[i] as number) - mean) - slope * (i + 1 - tMean);
    residuals[i] = e;
    sumSquares += e * e;
  }
  return { residuals, residualSd: Math.sqrt(sumSquares / (n - 1)), scale };
}

/**
 * The residual standard deviation and scale of linearResiduals, without keeping the residuals:
 * the same arithmetic, no allocation (the constant check of every S(0) estimate).
 * @throws RangeError when fewer than 2 values are given.
 */
export function linearResidualSd(values: ArrayLike<number>, trend: boolean): Omit<LinearResiduals, 'residuals'> {
  const n = values.length;
  const { mean, slope, scale } = lineFit(values, trend);
  const tMean = (n + 1) / 2;
  let sumSquares = 0;
  for (let i = 0; i < n; i++) {
    const e = ((values[i] as number) - mean) - slope * (i + 1 - tMean);
    sumSquares += e * e;
  }
  return { residualSd: Math.sqrt(sumSquares / (n - 1)), scale };
}
