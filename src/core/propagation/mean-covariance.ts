/**
 * Means of simultaneously observed quantities and the covariance of those means (Type A).
 *
 * For n sets of simultaneous observations (q_k, r_k, ...), the estimate of each quantity is its
 * arithmetic mean and the covariance of two means is
 *   s(qbar, rbar) = sum_k (q_k - qbar)(r_k - rbar) / (n (n - 1))
 * (JCGM 100:2008, 5.2.3, eq. (17)); on the diagonal this is s^2(qbar) = s^2(q)/n (eq. (5)). It is the
 * input of the first-order law for correlated inputs (GUM H.2.3, approach 1) and, applied to per-set
 * derived values, gives GUM H.2.4, approach 2.
 * Choice: two passes (mean first, then centred cross-products), so values near 1e7 with a small spread
 * keep their digits. The observations are taken as independent from set to set; for autocorrelated
 * series use the windowed-mean estimators of src/core/tau instead.
 *
 * Cost: O(n m^2) time for m quantities, O(m^2) memory.
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
  const means = new Float64Array(m);
  for (let a = 0; a < m; a++) {
    const s = series[a] as ArrayLike<number>;
    if (s.length !== n) throw new RangeError(`meanCovariance requires series of equal length (${n}), series ${a} has ${s.length}`);
    let sum = 0;
    for (let k = 0; k < n; k++) {
      const v = s[k] as number;
      if (!Number.isFinite(v)) throw new RangeError(`meanCovariance: series ${a} has a non-finite value at ${k}`);
      sum += v;
    }
    means[a] = sum / n;
  }
  const covariance = new Float64Array(m * m);
  const divisor = n * (n - 1);
  for (let a = 0; a < m; a++) {
    const sa = series[a] as ArrayLike<number>;
    const ma = means[a] as number;
    for (let b = a; b < m; b++) {
      const sb = series[b] as ArrayLike<number>;
      const mb = means[b] as number;
      let sum = 0;
      for (let k = 0; k < n; k++) sum += ((sa[k] as number) - ma) * ((sb[k] as number) - mb);
      covariance[a * m + b] = sum / divisor;
      covariance[b * m + a] = sum / divisor;
    }
  }
  return { count: n, means, covariance };
}
