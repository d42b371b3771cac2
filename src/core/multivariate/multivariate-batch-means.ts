import chisquareQuantile from '@stdlib/stats-base-dists-chisquare-quantile';
import { cholesky } from './cholesky.js';
import { shiftedColumnMeans, type ShiftedColumnMeans } from './sample-covariance.js';

/**
 * Multivariate batch means: the long-run (asymptotic) covariance matrix of the means of p channels,
 * and from it the covariance of the channel means and the multivariate effective sample size.
 *
 * Method: D. Vats, J. M. Flegal & G. L. Jones (2019), "Multivariate output analysis for Markov
 * chain Monte Carlo", Biometrika 106(2), 321-337 (doi:10.1093/biomet/asz002; arXiv:1512.07713).
 * With n rows Y_t (one value per channel), batch size b and a = floor(n / b) batches of means
 * Ybar_k over consecutive rows,
 *   Sigma_b = b / (a - 1) * sum_k (Ybar_k - Ybar)(Ybar_k - Ybar)^T,
 * which estimates Sigma in the central limit theorem sqrt(n) (Ybar - theta) -> N_p(0, Sigma); the
 * covariance of the mean vector is then Sigma / n. The conventions are those of the R package
 * mcmcse 1.5-0 (`mcse.multi(method = "bm")`, read in its source; see DERIVED-REFERENCES.md
 * section 4): the batches cover the first a * b rows, the overall mean Ybar uses all n rows, and
 * b = 1 gives the sample covariance.
 * Lugsail (mcmcse's default r = 3, c = 1/2; D. Vats & J. M. Flegal (2022), "Lugsail lag windows for
 * estimating time-average covariance matrices", Biometrika 109(3), 735-750, from memory):
 *   Sigma_L = Sigma_b / (1 - c) - c / (1 - c) * Sigma_floor(b / r) = 2 Sigma_b - Sigma_floor(b / r),
 * whose first-order bias is (1 - r c) / (1 - c) times the O(1/b) downward bias of Sigma_b: zero for
 * r = 2, and for r = 3 a deliberate over-correction (-1 times: Sigma + Gamma_1 / b, with
 * Gamma_1 = sum_k |k| R(k)), so that the estimate errs on the large side; the price is more
 * variance. As in mcmcse, lugsail is skipped when b < 2r, and the plain Sigma_b is used when a
 * diagonal of Sigma_L is <= 0 or Sigma_L is not positive definite (mcse.multi's `adjust = TRUE`);
 * `lugsailUsed` says which one came back.
 * Choices: the default batch size is floor(sqrt(n)) (mcmcse's `size = "sqroot"`, the rule of the
 *   paper); mcmcse's own default, the AR-based `batchSize()` of Liu, Vats & Flegal, is not
 *   implemented here. Plain batch means is the default (lugsail on request); mcmcse defaults to
 *   lugsail. Values are shifted by the first row and deviations from the overall mean are summed
 *   per batch (not raw values), so that channel offsets do not cancel and the rounding of a mean
 *   near a large offset does not reach the deviations.
 * Positive definiteness needs a > p (a - 1 degrees of freedom): with a <= p batches the estimate is
 * reported as not positive definite even when the rows past a * b make it numerically so; otherwise
 * it is checked by Cholesky. Either way it is reported, not thrown. `reliable` also asks for at
 * least MIN_BATCHES batches.
 *
 * Cost: O(n p + a p^2) time (twice that with lugsail), O(p^2 + p) memory besides the input.
 */
export interface MultivariateBatchMeansOptions {
  /** Rows per batch; default floor(sqrt(n)). */
  batchSize?: number;
  /** Lugsail correction (default false). */
  lugsail?: boolean;
  /** Lugsail ratio r (default 3, as mcmcse); the smaller batch size is floor(b / r). */
  lugsailRatio?: number;
}

export interface MultivariateBatchMeansResult {
  /** Sigma-hat, p x p row-major: the long-run covariance, n * Cov(mean vector). */
  covariance: Float64Array;
  /** Sigma-hat / n: the covariance of the channel means, in squared data units. */
  meanCovariance: Float64Array;
  batchSize: number;
  batches: number;
  /** Column means over all n rows. */
  means: Float64Array;
  /** True when the lugsail estimate was returned. */
  lugsailUsed: boolean;
  /** Whether `covariance` passed the Cholesky test. */
  positiveDefinite: boolean;
  /** Positive definite and at least MIN_BATCHES batches. */
  reliable: boolean;
  note?: string;
}

/** Fewest batches for a `reliable` estimate (the project's blocking rule uses the same floor). */
export const MIN_BATCHES = 8;

export function multivariateBatchMeans(rows: ArrayLike<number>, n: number, p: number, options: MultivariateBatchMeansOptions = {}): MultivariateBatchMeansResult {
  if (!Number.isInteger(p) || p < 1) throw new RangeError('multivariateBatchMeans requires at least one column');
  if (!Number.isInteger(n) || n < 2) throw new RangeError('multivariateBatchMeans requires at least 2 rows');
  if (rows.length < n * p) throw new RangeError('multivariateBatchMeans requires n * p values');
  const batchSize = options.batchSize ?? Math.floor(Math.sqrt(n));
  if (!Number.isInteger(batchSize) || batchSize < 1) throw new RangeError('multivariateBatchMeans requires a positive integer batch size');
  const batches = Math.floor(n / batchSize);
  if (batches < 2) throw new RangeError('multivariateBatchMeans requires a batch size that leaves at least 2 batches');
  const ratio = options.lugsailRatio ?? 3;
  if (!(ratio >= 1)) throw new RangeError('multivariateBatchMeans requires a lugsail ratio of at least 1');

  const centre = shiftedColumnMeans(rows, n, p);
  const means = centre.means;
  const plain = batchMeansCovariance(rows, n, p, batchSize, centre);
  const notes: string[] = [];
  let covariance = plain;
  let lugsailUsed = false;
  if (options.lugsail) {
    if (batchSize < 2 * ratio) {
      notes.push(`batch size ${batchSize} below 2r = ${2 * ratio}: lugsail not applied`);
    } else {
      const small = batchMeansCovariance(rows, n, p, Math.floor(batchSize / ratio), centre);
      ({ covariance, lugsailUsed } = chooseLugsail(plain, small, p, notes));
    }
  }
  return assembleBatchMeansResult(covariance, n, p, batchSize, batches, means, lugsailUsed, notes);
}

/** Assembles the result, with the positive-definiteness and batch-count checks. */
export function assembleBatchMeansResult(
  covariance: Float64Array,
  n: number,
  p: number,
  batchSize: number,
  batches: number,
  means: Float64Array,
  lugsailUsed: boolean,
  notes: string[],
): MultivariateBatchMeansResult {
  // With a <= p batches the deviations span at most a - 1 dimensions, plus whatever the rows past
  // a * b add (mcmcse's mean over all n): a determinant resting on those is meaningless.
  const enoughBatches = batches > p;
  const positiveDefinite = enoughBatches && cholesky(covariance, p) !== null;
  if (!enoughBatches) notes.push(`${batches} batches for ${p} channels: at least ${p + 1} are needed for a positive definite estimate`);
  else if (!positiveDefinite) notes.push('estimate not positive definite');
  else if (batches < MIN_BATCHES) notes.push(`fewer than ${MIN_BATCHES} batches`);
  const meanCovariance = new Float64Array(p * p);
  for (let i = 0; i < p * p; i++) meanCovariance[i] = (covariance[i] as number) / n;
  const reliable = positiveDefinite && batches >= MIN_BATCHES;
  return {
    covariance,
    meanCovariance,
    batchSize,
    batches,
    means,
    lugsailUsed,
    positiveDefinite,
    reliable,
    ...(notes.length > 0 ? { note: notes.join('; ') } : {}),
  };
}

/**
 * The lugsail estimate 2 Sigma_b - Sigma_small, or Sigma_b when the lugsail one has a diagonal <= 0
 * or is not positive definite while Sigma_b is (mcmcse mcse.multi's fallbacks); appends the reason
 * to `notes`.
 */
export function chooseLugsail(plain: Float64Array, small: ArrayLike<number>, p: number, notes: string[]): { covariance: Float64Array; lugsailUsed: boolean } {
  const lugsail = lugsailCombination(plain, small);
  if (!diagonalPositive(lugsail, p)) {
    notes.push('lugsail gave a diagonal <= 0: plain batch means used');
    return { covariance: plain, lugsailUsed: false };
  }
  if (cholesky(lugsail, p) === null && cholesky(plain, p) !== null) {
    notes.push('lugsail estimate not positive definite: plain batch means used');
    return { covariance: plain, lugsailUsed: false };
  }
  return { covariance: lugsail, lugsailUsed: true };
}

/** 2 Sigma_b - Sigma_small, i.e. Sigma_b / (1 - c) - c Sigma_small / (1 - c) with c = 1/2. */
export function lugsailCombination(plain: ArrayLike<number>, small: ArrayLike<number>): Float64Array {
  const c = 0.5;
  const out = new Float64Array(plain.length);
  for (let i = 0; i < out.length; i++) out[i] = (plain[i] as number) / (1 - c) - (c / (1 - c)) * (small[i] as number);
  return out;
}

export function diagonalPositive(matrix: ArrayLike<number>, p: number): boolean {
  for (let i = 0; i < p; i++) if (!((matrix[i * p + i] as number) > 0)) return false;
  return true;
}

/** b / (a - 1) * sum_k (Ybar_k - Ybar)(Ybar_k - Ybar)^T over the first a * b rows. */
function batchMeansCovariance(rows: ArrayLike<number>, n: number, p: number, batchSize: number, centre: ShiftedColumnMeans): Float64Array {
  const { shift, shiftedMeans } = centre;
  const batches = Math.floor(n / batchSize);
  const out = new Float64Array(p * p);
  const deviation = new Float64Array(p);
  for (let k = 0; k < batches; k++) {
    deviation.fill(0);
    const start = k * batchSize;
    for (let t = start; t < start + batchSize; t++) {
      for (let i = 0; i < p; i++) deviation[i] = (deviation[i] as number) + ((rows[t * p + i] as number) - (shift[i] as number) - (shiftedMeans[i] as number));
    }
    for (let i = 0; i < p; i++) deviation[i] = (deviation[i] as number) / batchSize;
    for (let i = 0; i < p; i++) {
      const di = deviation[i] as number;
      for (let j = 0; j <= i; j++) out[i * p + j] = (out[i * p + j] as number) + di * (deviation[j] as number);
    }
  }
  const scale = batchSize / (batches - 1);
  for (let i = 0; i < p; i++) {
    for (let j = 0; j <= i; j++) {
      const v = (out[i * p + j] as number) * scale;
      out[i * p + j] = v;
      out[j * p + i] = v;
    }
  }
  return out;
}

/**
 * Multivariate effective sample size, mESS = n * (det Lambda / det Sigma)^(1/p) (Vats, Flegal &
 * Jones 2019; mcmcse `multiESS`, read in its source), with Lambda the sample covariance (divisor n - 1) and
 * Sigma the long-run covariance. Determinants through Cholesky log-determinants. Returns null when
 * either matrix is not positive definite (mESS is then undefined). Cost: O(p^3).
 */
export function multivariateEss(n: number, sampleCovariance: ArrayLike<number>, longRunCovariance: ArrayLike<number>, p: number): number | null {
  const lambda = cholesky(sampleCovariance, p);
  const sigma = cholesky(longRunCovariance, p);
  if (lambda === null || sigma === null) return null;
  const ess = n * Math.exp((lambda.logDeterminant - sigma.logDeterminant) / p);
  return Number.isFinite(ess) ? ess : null;
}

/**
 * Minimum effective sample size for estimating p means with a confidence region of relative volume
 * epsilon at level 1 - alpha (Vats, Flegal & Jones 2019, the fixed-volume stopping rule; formula as
 * coded and documented in mcmcse `minESS`, read in its source):
 *   mESS >= 2^(2/p) pi / (p Gamma(p/2))^(2/p) * chi2_(1-alpha, p) / epsilon^2,
 * rounded to the nearest integer as mcmcse does. 8123 at p = 3 and 6146 at p = 1 for
 * alpha = epsilon = 0.05 (DERIVED-REFERENCES.md section 4). log Gamma(p/2) is computed exactly for
 * integer p from (p/2 - 1)! or the half-integer product. Cost: O(p) plus one chi-square quantile.
 */
export function minimumEss(p: number, alpha = 0.05, epsilon = 0.05): number {
  if (!Number.isInteger(p) || p < 1) throw new RangeError('minimumEss requires a positive integer dimension');
  if (!(alpha > 0 && alpha < 1)) throw new RangeError('minimumEss requires alpha in (0, 1)');
  if (!(epsilon > 0 && epsilon < 1)) throw new RangeError('minimumEss requires epsilon in (0, 1)');
  const critical = chisquareQuantile(1 - alpha, p);
  const exponent = 2 / p;
  const logMinimum = exponent * Math.LN2 + Math.log(Math.PI) - exponent * Math.log(p) - exponent * logGammaHalf(p) - 2 * Math.log(epsilon) + Math.log(critical);
  return Math.round(Math.exp(logMinimum));
}

/** log Gamma(p / 2) for a positive integer p, exactly from the recurrence Gamma(x + 1) = x Gamma(x). */
function logGammaHalf(p: number): number {
  // Gamma(1) = 1, Gamma(1/2) = sqrt(pi); step up by ones.
  let x = p % 2 === 0 ? 1 : 0.5;
  let sum = p % 2 === 0 ? 0 : 0.5 * Math.log(Math.PI);
  while (x < p / 2) {
    sum += Math.log(x);
    x += 1;
  }
  return sum;
}
