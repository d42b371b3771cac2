/**
 * Cholesky factorisation of a symmetric p x p matrix, as a positive-definiteness test and for its
 * log-determinant.
 *
 * Method: the column-by-column Cholesky-Banachiewicz recurrence, L L^T = S (G. H. Golub &
 * C. F. Van Loan (2013), Matrix Computations, 4th ed., Johns Hopkins, algorithm 4.2.1, from memory).
 * The matrix is positive definite exactly when every pivot is positive; a pivot at or below
 * `relativeTolerance` times the largest diagonal counts as not positive definite, so that a matrix
 * that is singular up to round-off is reported as such instead of giving a huge, meaningless
 * inverse or determinant. log det S = 2 * sum log L_ii.
 * Only the lower triangle of S is read. Row-major storage, S[i * p + j].
 *
 * Cost: p^3 / 6 multiply-adds, p^2 doubles for the factor.
 */
export interface CholeskyResult {
  /** Lower-triangular factor, row-major p x p (upper triangle zero). */
  factor: Float64Array;
  /** Natural logarithm of det S. */
  logDeterminant: number;
}

/** Default pivot tolerance, relative to the largest diagonal element. */
export const PIVOT_TOLERANCE = 1e-13;

/** The Cholesky factor and log-determinant, or null when S is not (numerically) positive definite. */
export function cholesky(matrix: ArrayLike<number>, p: number, relativeTolerance = PIVOT_TOLERANCE): CholeskyResult | null {
  if (!Number.isInteger(p) || p < 1) throw new RangeError('cholesky requires a dimension of at least 1');
  if (matrix.length < p * p) throw new RangeError('cholesky requires a p x p matrix');
  let largestDiagonal = 0;
  for (let i = 0; i < p; i++) {
    const d = matrix[i * p + i] as number;
    if (!Number.isFinite(d)) return null;
    largestDiagonal = Math.max(largestDiagonal, Math.abs(d));
  }
  if (!(largestDiagonal > 0)) return null;
  const floor = relativeTolerance * largestDiagonal;
  const factor = new Float64Array(p * p);
  let logDeterminant = 0;
  for (let j = 0; j < p; j++) {
    let pivot = matrix[j * p + j] as number;
    for (let k = 0; k < j; k++) pivot -= (factor[j * p + k] as number) ** 2;
    if (!(pivot > floor)) return null;
    const root = Math.sqrt(pivot);
    factor[j * p + j] = root;
    logDeterminant += 2 * Math.log(root);
    for (let i = j + 1; i < p; i++) {
      let s = matrix[i * p + j] as number;
      for (let k = 0; k < j; k++) s -= (factor[i * p + k] as number) * (factor[j * p + k] as number);
      if (!Number.isFinite(s)) return null;
      factor[i * p + j] = s / root;
    }
  }
  return { factor, logDeterminant };
}

/**
 * Correlation matrix r_ij = S_ij / sqrt(S_ii S_jj) of a covariance matrix, or null when a diagonal
 * element is not positive (a constant channel has no correlation). Cost: O(p^2).
 */
export function correlationFromCovariance(covariance: ArrayLike<number>, p: number): Float64Array | null {
  const scale = new Float64Array(p);
  for (let i = 0; i < p; i++) {
    const d = covariance[i * p + i] as number;
    if (!(d > 0) || !Number.isFinite(d)) return null;
    scale[i] = 1 / Math.sqrt(d);
  }
  const out = new Float64Array(p * p);
  for (let i = 0; i < p; i++) {
    for (let j = 0; j < p; j++) {
      const r = i === j ? 1 : (covariance[i * p + j] as number) * (scale[i] as number) * (scale[j] as number);
      // Round-off can push |r| a hair past 1; clamp so that callers may take acos/atanh safely.
      out[i * p + j] = Math.max(-1, Math.min(1, r));
    }
  }
  return out;
}
