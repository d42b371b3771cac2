import { sampleCovariance } from '../multivariate/sample-covariance.js';

/**
 * Means of simultaneously observed quantities and the covariance of those means (Type A).
 *
 * For n sets of simultaneous observations (q_k, r_k, ...), the estimate of each quantity is its
 * arithmetic mean and the covariance of two means is
 *   s(qbar, rbar) = sum_k (q_k - qbar)(r_k - rbar) / (n (n - 1))
 * (JCGM 100:2008, 5.2.3, eq. (17)); on the diagonal this is s^2(qbar) = s^2(q)/n (eq. (5)). It is the
 * input of the first-order law for correlated inputs (GUM H.2.3, approach 1) and, applied to per-set
 * derived values, gives GUM H.2.4, approach 2.
 * Computed as the sample covariance of src/core/multivariate/sample-covariance.ts (two passes on
 * values shifted by the first set, divisor n - 1) divided by n. The observations are taken as
 * independent from set to set; for autocorrelated series use the windowed-mean estimators of
 * src/core/tau instead.
 *
 * Cost: O(n m^2) time for m quantities, O(n m + m^2) memory (the sets are copied into rows).
 * @throws RangeError when fewer than two sets are given, the series lengths differ, or a value is not finite.
 */
export interface MeanCovariance {
  /** Number of observation sets n. */
  count: number;
  means: Float64Array;
  /** Covariance of the means, m x m row-major (eq. 17). */
  covariance: Float64Array;
}

export function meanCovariance(series: ArrayLike<number>[]): MeanCovariance {
  const m = series.length;
  if (m === 0) throw new RangeError('meanCovariance requires at least one quantity');
  const n = (series[0] as ArrayLike<number>).length;
  if (n < 2) throw new RangeError('meanCovariance requires at least two observation sets');
  const rows = new Float64Array(n * m);
  series.forEach((s, a) => {
    if (s.length !== n) throw new RangeError(`meanCovariance requires series of equal length (${n}), series ${a} has ${s.length}`);
    for (let k = 0; k < n; k++) {
      const v = s[k] as number;
      if (!Number.isFinite(v)) throw new RangeError(`meanCovariance: series ${a} has a non-finite value at ${k}`);
      rows[k * m + a] = v;
    }
  });
  const { means, covariance } = sampleCovariance(rows, n, m);
  for (let i = 0; i < covariance.length; i++) covariance[i] = (covariance[i] as number) / n; // s^2/n: eq. (17)
  return { count: n, means, covariance };
}
