import { linearResiduals } from './linear-residuals.js';
import { RELATIVE_CONSTANT_TOLERANCE } from './spectrum0-ar.js';

/**
 * KPSS test of the null hypothesis that a series is stationary around a level (or a linear trend)
 * against a unit-root alternative.
 *
 * Method: D. Kwiatkowski, P. C. B. Phillips, P. Schmidt & Y. Shin (1992), "Testing the null
 * hypothesis of stationarity against the alternative of a unit root: How sure are we that economic
 * time series have a unit root?", J. Econometrics 54(1-3), 159-178 (not read; the statistic and
 * table as coded in R tseries 0.10-53 `kpss.test` and statsmodels 0.13.5 `kpss`, which agree):
 * - residuals e_t = x_t - xbar (level) or the OLS residuals on (1, t), t = 1..n (trend);
 * - partial sums S_t = sum_(j<=t) e_j; eta = sum_t S_t^2 / n^2;
 * - long-run variance with Bartlett weights (W. K. Newey & K. D. West (1987), "A simple, positive
 *   semi-definite, heteroskedasticity and autocorrelation consistent covariance matrix",
 *   Econometrica 55(3), 703-708; from memory):
 *   s2(l) = (1/n) [sum e_t^2 + 2 sum_(s=1..l) (1 - s/(l+1)) sum_(t=s+1..n) e_t e_(t-s)];
 * - statistic = eta / s2(l), large values reject stationarity.
 * Lag l: a number, or 'short' = trunc(4 (n/100)^(1/4)) (tseries lshort = TRUE), 'long' =
 * trunc(12 (n/100)^(1/4)) (tseries lshort = FALSE), 'legacy' = min(ceil(12 (n/100)^(1/4)), n - 1)
 * (statsmodels nlags = 'legacy'), or 'auto' (default, statsmodels nlags = 'auto'), the
 * data-dependent rule of B. Hobijn, P. H. Franses & M. Ooms, "Generalizations of the KPSS-test for
 * stationarity" (Econometric Institute Report 9802, Erasmus University Rotterdam, 1998; Statistica
 * Neerlandica 58(4), 483-502, 2004; from memory; after D. W. K. Andrews (1991), Econometrica 59(3),
 * 817-858): c = trunc(n^(2/9)), s0 = gamma_0 + 2 sum_(i<=c) gamma_i,
 * s1 = 2 sum_(i<=c) i gamma_i (gamma_i = (1/n) sum e_t e_(t-i)), l = trunc(1.1447 ((s1/s0)^2)^(1/3)
 * n^(1/3)), capped at n - 1.
 * Choice of default: 'auto', because the fixed short rule (l = 8 at n = 2000) leaves the long-run
 * variance of strongly autocorrelated sensor noise (tau_int of tens of samples) underestimated and
 * the test then rejects stationary series.
 * Critical values: KPSS (1992) Table 1 (asymptotic upper-tail): level 0.347 / 0.463 / 0.574 / 0.739,
 * trend 0.119 / 0.146 / 0.176 / 0.216 at 10 / 5 / 2.5 / 1 %. p-value: linear interpolation of
 * p in (0.10, 0.05, 0.025, 0.01) over these, clipped at the ends as tseries (approx(rule = 2)) and
 * statsmodels (np.interp) do: a statistic below the 10 % value returns 0.10 (the true p-value is
 * greater, `pValueBound: 'greater'`), one above the 1 % value returns 0.01 (the true p-value is
 * smaller, `pValueBound: 'smaller'`).
 * Constant series (residual sd <= 1e-13 max|x|): the statistic is 0/0; it is reported as 0 with
 * `reliable: false` and a note.
 * Cost: O(n * l) time (l ~ 4-12 (n/100)^(1/4), or n^(2/9) more for 'auto'); O(n) memory.
 * @throws RangeError for fewer than 3 samples or a lag outside 0..n-1.
 */
export type KpssLags = number | 'short' | 'long' | 'legacy' | 'auto';

export interface KpssOptions {
  /** Test trend stationarity (residuals about a fitted line) instead of level stationarity. */
  trend?: boolean;
  /** Truncation lag of the long-run variance, or a rule; default 'auto'. */
  lags?: KpssLags;
}

export interface KpssCriticalValues {
  '0.1': number;
  '0.05': number;
  '0.025': number;
  '0.01': number;
}

export interface KpssResult {
  statistic: number;
  /** Truncation lag used. */
  lags: number;
  /** Interpolated p-value, clipped to [0.01, 0.10]. */
  pValue: number;
  /** 'exact' when interpolated; 'greater' / 'smaller' when clipped (true p-value beyond the table). */
  pValueBound: 'exact' | 'greater' | 'smaller';
  criticalValues: KpssCriticalValues;
  /** statistic <= the 5 % critical value (stationarity not rejected at 5 %). */
  stationaryAt5Percent: boolean;
  /** s2(l), the Bartlett long-run variance of the residuals. */
  longRunVariance: number;
  reliable: boolean;
  note?: string;
}

/** KPSS (1992) Table 1, level stationarity (eta_mu). */
export const KPSS_LEVEL_CRITICAL_VALUES: Readonly<KpssCriticalValues> = Object.freeze({ '0.1': 0.347, '0.05': 0.463, '0.025': 0.574, '0.01': 0.739 });
/** KPSS (1992) Table 1, trend stationarity (eta_tau). */
export const KPSS_TREND_CRITICAL_VALUES: Readonly<KpssCriticalValues> = Object.freeze({ '0.1': 0.119, '0.05': 0.146, '0.025': 0.176, '0.01': 0.216 });

const SIGNIFICANCE = [0.1, 0.05, 0.025, 0.01] as const;

/** sum_(t=lag..n-1) e_t e_(t-lag). */
function laggedProduct(e: Float64Array, lag: number): number {
  let s = 0;
  for (let t = lag; t < e.length; t++) s += (e[t] as number) * (e[t - lag] as number);
  return s;
}

/** Hobijn-Franses-Ooms automatic lag as statsmodels 0.13.5 `_kpss_autolag`. */
function autoLag(e: Float64Array): number {
  const n = e.length;
  const covarianceLags = Math.trunc(Math.pow(n, 2 / 9));
  let s0 = laggedProduct(e, 0) / n;
  let s1 = 0;
  for (let i = 1; i <= covarianceLags; i++) {
    const product = laggedProduct(e, i) / (n / 2);
    s0 += product;
    s1 += i * product;
  }
  const ratio = s1 / s0;
  const gammaHat = 1.1447 * Math.pow(ratio * ratio, 1 / 3);
  const lag = Math.trunc(gammaHat * Math.pow(n, 1 / 3));
  return Number.isFinite(lag) ? Math.min(lag, n - 1) : 0;
}

function resolveLags(lags: KpssLags, e: Float64Array): number {
  const n = e.length;
  const root = Math.pow(n / 100, 0.25);
  switch (lags) {
    case 'short':
      return Math.trunc(4 * root);
    case 'long':
      return Math.trunc(12 * root);
    case 'legacy':
      return Math.min(Math.ceil(12 * root), n - 1);
    case 'auto':
      return autoLag(e);
    default:
      if (!Number.isInteger(lags) || lags < 0 || lags >= n) {
        throw new RangeError(`kpss lags must be an integer in 0..${n - 1}`);
      }
      return lags;
  }
}

/** Linear interpolation of the p-value over the table, clipped at both ends. */
export function kpssPValue(statistic: number, critical: KpssCriticalValues): { pValue: number; bound: 'exact' | 'greater' | 'smaller' } {
  const values = [critical['0.1'], critical['0.05'], critical['0.025'], critical['0.01']];
  if (statistic <= values[0]!) return { pValue: SIGNIFICANCE[0], bound: statistic < values[0]! ? 'greater' : 'exact' };
  if (statistic >= values[3]!) return { pValue: SIGNIFICANCE[3], bound: statistic > values[3]! ? 'smaller' : 'exact' };
  let i = 0;
  while (statistic > values[i + 1]!) i++;
  const x0 = values[i]!;
  const x1 = values[i + 1]!;
  const p0 = SIGNIFICANCE[i]!;
  const p1 = SIGNIFICANCE[i + 1]!;
  return { pValue: p0 + ((statistic - x0) * (p1 - p0)) / (x1 - x0), bound: 'exact' };
}

export function kpss(values: ArrayLike<number>, options: KpssOptions = {}): KpssResult {
  const n = values.length;
  if (n < 3) throw new RangeError('kpss requires at least 3 samples');
  const trend = options.trend === true;
  const criticalValues = { ...(trend ? KPSS_TREND_CRITICAL_VALUES : KPSS_LEVEL_CRITICAL_VALUES) };
  const { residuals, residualSd, scale } = linearResiduals(values, trend);
  const lags = resolveLags(options.lags ?? 'auto', residuals);

  if (residualSd <= RELATIVE_CONSTANT_TOLERANCE * scale) {
    return {
      statistic: 0, lags, pValue: SIGNIFICANCE[0], pValueBound: 'greater', criticalValues, stationaryAt5Percent: true,
      longRunVariance: 0, reliable: false,
      note: `residuals are zero to rounding (the series is ${trend ? 'exactly linear' : 'constant'}): statistic 0/0 reported as 0`,
    };
  }
  let partial = 0;
  let eta = 0;
  for (let t = 0; t < n; t++) {
    partial += residuals[t] as number;
    eta += partial * partial;
  }
  eta /= n * n;
  let longRun = laggedProduct(residuals, 0);
  for (let s = 1; s <= lags; s++) longRun += 2 * (1 - s / (lags + 1)) * laggedProduct(residuals, s);
  longRun /= n;
  const statistic = eta / longRun;
  const { pValue, bound } = kpssPValue(statistic, criticalValues);
  return {
    statistic, lags, pValue, pValueBound: bound, criticalValues,
    stationaryAt5Percent: statistic <= criticalValues['0.05'], longRunVariance: longRun, reliable: true,
  };
}
