/**
 * Sample covariance matrix of the rows of an n x p row-major array (divisor n - 1), the marginal
 * covariance Lambda that the multivariate effective sample size compares with the long-run
 * covariance (Vats, Flegal & Jones 2019; R `cov()`).
 *
 * Two passes on values shifted by the first row: the column means of the shifted values (with a
 * second-pass round-off correction), then the cross-products of the deviations, so that large
 * offsets do not cancel (T. F. Chan, G. H. Golub & R. J. LeVeque (1983), "Algorithms for computing
 * the sample variance: analysis and recommendations", The American Statistician 37(3), 242-247).
 * The shift matters beyond the two passes: a mean near 1e7 is itself rounded to about 1e-9, and
 * that error would reach every deviation; the shifted mean is rounded at the scale of the spread.
 *
 * Cost: O(n p^2) time, O(p^2) memory.
 */
export interface SampleCovarianceResult {
  means: Float64Array;
  /** p x p, divisor n - 1. */
  covariance: Float64Array;
}

export function sampleCovariance(rows: ArrayLike<number>, n: number, p: number): SampleCovarianceResult {
  if (!Number.isInteger(p) || p < 1) throw new RangeError('sampleCovariance requires at least one column');
  if (!Number.isInteger(n) || n < 2) throw new RangeError('sampleCovariance requires at least 2 rows');
  if (rows.length < n * p) throw new RangeError('sampleCovariance requires n * p values');
  const { shift, shiftedMeans, means } = shiftedColumnMeans(rows, n, p);
  const covariance = new Float64Array(p * p);
  const deviation = new Float64Array(p);
  for (let t = 0; t < n; t++) {
    for (let i = 0; i < p; i++) deviation[i] = (rows[t * p + i] as number) - (shift[i] as number) - (shiftedMeans[i] as number);
    for (let i = 0; i < p; i++) {
      const di = deviation[i] as number;
      for (let j = 0; j <= i; j++) covariance[i * p + j] = (covariance[i * p + j] as number) + di * (deviation[j] as number);
    }
  }
  for (let i = 0; i < p; i++) {
    for (let j = 0; j <= i; j++) {
      const v = (covariance[i * p + j] as number) / (n - 1);
      covariance[i * p + j] = v;
      covariance[j * p + i] = v;
    }
  }
  return { means, covariance };
}

/** Column means of an n x p row-major array, taken on values shifted by the first row, two-pass. */
export interface ShiftedColumnMeans {
  /** The first row. */
  shift: Float64Array;
  /** Means of (value - shift). */
  shiftedMeans: Float64Array;
  /** shift + shiftedMeans. */
  means: Float64Array;
}

export function shiftedColumnMeans(rows: ArrayLike<number>, n: number, p: number): ShiftedColumnMeans {
  const shift = new Float64Array(p);
  for (let i = 0; i < p; i++) shift[i] = rows[i] as number;
  const shiftedMeans = new Float64Array(p);
  for (let t = 0; t < n; t++) for (let i = 0; i < p; i++) shiftedMeans[i] = (shiftedMeans[i] as number) + ((rows[t * p + i] as number) - (shift[i] as number));
  for (let i = 0; i < p; i++) shiftedMeans[i] = (shiftedMeans[i] as number) / n;
  const correction = new Float64Array(p);
  for (let t = 0; t < n; t++) {
    for (let i = 0; i < p; i++) correction[i] = (correction[i] as number) + ((rows[t * p + i] as number) - (shift[i] as number) - (shiftedMeans[i] as number));
  }
  const means = new Float64Array(p);
  for (let i = 0; i < p; i++) {
    shiftedMeans[i] = (shiftedMeans[i] as number) + (correction[i] as number) / n;
    means[i] = (shift[i] as number) + (shiftedMeans[i] as number);
  }
  return { shift, shiftedMeans, means };
}
