import { chiSquareQuantile as chisquareQuantile } from '../numeric/chi-square-quantile.js';

/**
 * Allan deviation (two-sample deviation) of fractional-frequency data, overlapping and
 * non-overlapping, with equivalent degrees of freedom, chi-square confidence intervals, and the
 * averaging limit: the averaging time beyond which the Allan deviation stops falling.
 *
 * For a channel, the Allan deviation at averaging factor m answers "how much do two successive
 * means of m samples differ": for white noise it falls as 1/sqrt(m) (AVAR = sigma^2 / m), and
 * where it stops falling, drift or flicker dominates and a longer averaging window no longer
 * makes the mean more precise.
 *
 * Definitions (W. J. Riley (2008), "Handbook of Frequency Stability Analysis", NIST Special
 * Publication 1065, sections 5.2.2 and 5.2.4, as given in the project's REFERENCES.md section 2.1;
 * D. W. Allan (1966), "Statistics of atomic frequency standards", Proc. IEEE 54(2), 221-230):
 * y_0..y_(N-1) fractional frequency at interval tau0, phase x_0 = 0, x_(i+1) = x_i + y_i tau0
 * (N + 1 phase points), tau = m tau0.
 *   overlapping:     AVAR = sum_{i=0}^{N-2m} (x_(i+2m) - 2 x_(i+m) + x_i)^2 / (2 tau^2 (N - 2m + 1)),
 *                    count = N - 2m + 1 terms;
 *   non-overlapping: M = floor(N / m) block means from the first sample,
 *                    AVAR = sum_{k} (ybar_(k+1) - ybar_k)^2 / (2 (M - 1)), count = M - 1 terms.
 * Numerics: the phase is accumulated from y minus its mean (the second differences do not change
 *   under a constant frequency offset) with Neumaier-compensated summation, so a large offset
 *   (fractional frequencies near 1e-9 on top of an offset, or rig readings near 1e7) cannot
 *   cancel the small differences that matter.
 *
 * Equivalent degrees of freedom (edf), for white frequency noise (white noise of the readings,
 * the case this tool cares about):
 *   overlapping: edf = (3 (Nx - 1) / (2m) - 2 (Nx - 2) / Nx) * 4m^2 / (4m^2 + 5), Nx = N + 1 phase
 *     points: D. A. Howe, D. W. Allan & J. A. Barnes (1981), "Properties of signal sources and
 *     measurement methods", Proc. 35th Annual Symposium on Frequency Control, A1-A47 (from memory),
 *     as tabulated in SP 1065 Table 5 (the formula and the meaning of N as phase points were read
 *     in allantools' ci.py, not in SP 1065 itself);
 *   non-overlapping: edf = 2 (M - 1)^2 / (3M - 4): the Satterthwaite moment match 2 E[Q]^2 / Var[Q]
 *     of Q = sum of squared successive differences of M independent normal block means (variance
 *     2 s^2, neighbour covariance -s^2), derived here; exactly 1 at M = 2.
 * Confidence interval (SP 1065 section 5.3, chi-square intervals): with q_p the chi-square
 *   quantile at edf degrees of freedom, low = adev sqrt(edf / q_((1+c)/2)),
 *   high = adev sqrt(edf / q_((1-c)/2)); default coverage c = 0.6827 (one-sigma bars, the usual
 *   choice for stability plots, common practice).
 * Other noise types (flicker, random walk) have fewer edf at long tau; these bars are then too
 *   narrow, which makes averagingLimit() somewhat quick to see a floor (documented there).
 *
 * Cost: O(N) to build the phase (once per call), then O(N) per averaging factor for the
 *   overlapping ADEV and O(N / m) for the non-overlapping one; O(N log N) for all octaves.
 *   Memory: N + 1 doubles for the phase.
 */
export interface AllanPoint {
  /** Averaging factor (samples per average). */
  m: number;
  /** Averaging time m * tau0, in the unit of tau0. */
  tau: number;
  /** Allan deviation, in the unit of y. */
  adev: number;
  /** Number of squared differences in the sum. */
  count: number;
  /** Equivalent chi-square degrees of freedom (white frequency noise). */
  edf: number;
  /** Lower and upper confidence limits of adev. */
  low: number;
  high: number;
}

export interface AllanOptions {
  /** Coverage of [low, high]; default 0.6827 (one sigma). */
  confidence?: number;
}

/** Two-sided one-sigma coverage, erf(1/sqrt(2)). */
export const ONE_SIGMA_COVERAGE = 0.6826894921370859;

/** Overlapping Allan deviation at each averaging factor with at least one term (others are skipped). */
export function overlappingAllanDeviation(y: ArrayLike<number>, factors: readonly number[], tau0: number, options: AllanOptions = {}): AllanPoint[] {
  checkInputs(y, factors, tau0);
  const confidence = checkConfidence(options.confidence);
  const n = y.length;
  const phase = demeanedPhase(y);
  const points: AllanPoint[] = [];
  for (const m of factors) {
    const count = n - 2 * m + 1;
    if (count < 1) continue;
    let squares = 0;
    for (let i = 0; i < count; i++) {
      const difference = (phase[i + 2 * m] as number) - 2 * (phase[i + m] as number) + (phase[i] as number);
      squares += difference * difference;
    }
    const variance = squares / (2 * m * m * count);
    points.push(makePoint(m, tau0, Math.sqrt(variance), count, overlappingWhiteFmEdf(n + 1, m), confidence));
  }
  return points;
}

/** Non-overlapping Allan deviation at each averaging factor with at least two blocks (others are skipped). */
export function nonOverlappingAllanDeviation(y: ArrayLike<number>, factors: readonly number[], tau0: number, options: AllanOptions = {}): AllanPoint[] {
  checkInputs(y, factors, tau0);
  const confidence = checkConfidence(options.confidence);
  const phase = demeanedPhase(y);
  const points: AllanPoint[] = [];
  for (const m of factors) {
    const blocks = Math.floor(y.length / m);
    if (blocks < 2) continue;
    let squares = 0;
    let previous = ((phase[m] as number) - (phase[0] as number)) / m;
    for (let k = 1; k < blocks; k++) {
      const current = ((phase[(k + 1) * m] as number) - (phase[k * m] as number)) / m;
      squares += (current - previous) ** 2;
      previous = current;
    }
    const adev = Math.sqrt(squares / (2 * (blocks - 1)));
    points.push(makePoint(m, tau0, adev, blocks - 1, nonOverlappingWhiteFmEdf(blocks), confidence));
  }
  return points;
}

/**
 * Non-overlapping Allan deviation at factor m from M >= 2 consecutive block means of m samples
 * each (e.g. one level of the block pyramid; any common shift of the means cancels). Null when
 * fewer than two block means are given. Cost O(M).
 */
export function allanFromBlockMeans(blockMeans: ArrayLike<number>, m: number, tau0 = 1, options: AllanOptions = {}): AllanPoint | null {
  if (!Number.isInteger(m) || m < 1) throw new RangeError('allan deviation requires integer averaging factors of at least 1');
  if (!(tau0 > 0) || !Number.isFinite(tau0)) throw new RangeError('allan deviation requires a positive sample interval');
  const confidence = checkConfidence(options.confidence);
  const blocks = blockMeans.length;
  if (blocks < 2) return null;
  let squares = 0;
  for (let k = 1; k < blocks; k++) squares += ((blockMeans[k] as number) - (blockMeans[k - 1] as number)) ** 2;
  if (!Number.isFinite(squares)) throw new RangeError('allan deviation requires finite block means');
  return allanFromDifferences(m, blocks, squares, tau0, confidence);
}

/**
 * Non-overlapping Allan deviation at factor m from the sum of squared differences of `blocks`
 * successive block means (what the block pyramid maintains): sqrt(squares / (2 (blocks - 1))).
 * Null for fewer than two blocks. O(1) plus two chi-square quantiles.
 */
function allanFromDifferences(m: number, blocks: number, squares: number, tau0 = 1, confidence = ONE_SIGMA_COVERAGE): AllanPoint | null {
  if (blocks < 2 || !(squares >= 0)) return null;
  return makePoint(m, tau0, Math.sqrt(squares / (2 * (blocks - 1))), blocks - 1, nonOverlappingWhiteFmEdf(blocks), confidence);
}

/** Averaging factors 1, 2, 4, ... up to the largest that leaves at least 2 overlapping terms (2m <= n - 1). */
export function octaveFactors(n: number): number[] {
  if (!Number.isInteger(n) || n < 0) throw new RangeError('octaveFactors requires a non-negative integer sample count');
  const factors: number[] = [];
  for (let m = 1; n - 2 * m + 1 >= 2; m *= 2) factors.push(m);
  return factors;
}

/** Howe, Allan & Barnes (1981) edf of the overlapping AVAR for white FM noise; phaseCount = N + 1. */
export function overlappingWhiteFmEdf(phaseCount: number, m: number): number {
  const nx = phaseCount;
  const edf = ((3 * (nx - 1)) / (2 * m) - (2 * (nx - 2)) / nx) * ((4 * m * m) / (4 * m * m + 5));
  return Math.max(edf, MIN_EDF);
}

/** edf of the non-overlapping AVAR from M independent normal block means: 2 (M - 1)^2 / (3M - 4). */
export function nonOverlappingWhiteFmEdf(blocks: number): number {
  return Math.max((2 * (blocks - 1) ** 2) / (3 * blocks - 4), MIN_EDF);
}

/**
 * Averaging limit: the smallest averaging factor after which the Allan deviation no longer falls.
 *
 * Rule (on the points sorted by m):
 *  1. candidate = the smallest point i such that no later point j is significantly below it by
 *     the points' own error bars (high_j < low_i would be significant);
 *  2. if the only such point is the last one, ADEV still falls at the largest m: null;
 *  3. the fall must also be seen to end: some later point j must lie significantly above the
 *     white-noise continuation of the candidate, low_j > high_i * sqrt(m_i / m_j), with both bars
 *     recomputed from edf at `confirmConfidence` (default 0.95); otherwise null. Without this
 *     step, the error bars that widen over the last octaves of pure white noise would pass for a
 *     floor (our addition to the rule as first stated). The stricter coverage keeps the chance of
 *     a false floor on white noise low although several later points are compared (measured:
 *     see test/core/allan/allan-deviation.test.ts).
 * The bars assume white FM noise; under flicker or random-walk noise they are too narrow at long
 * tau, so a floor is seen somewhat early rather than late.
 * Returns null also for fewer than two points and for constant data (all deviations zero).
 * Cost O(P^2) chi-square quantiles for P points (P is about log2 N).
 */
export interface AveragingLimitOptions {
  /** Coverage of the bars that confirm the end of the fall (step 3); default 0.95. */
  confirmConfidence?: number;
}

export function averagingLimit(points: readonly AllanPoint[], options: AveragingLimitOptions = {}): { m: number; tau: number; adev: number } | null {
  const confirm = options.confirmConfidence ?? 0.95;
  if (!(confirm > 0 && confirm < 1)) throw new RangeError('averaging limit requires a confirmation confidence between 0 and 1');
  const sorted = [...points].sort((a, b) => a.m - b.m);
  const last = sorted.length - 1;
  if (last < 1) return null;
  for (let i = 0; i < last; i++) {
    const candidate = sorted[i] as AllanPoint;
    let significantlyBelow = false;
    for (let j = i + 1; j <= last && !significantlyBelow; j++) significantlyBelow = (sorted[j] as AllanPoint).high < candidate.low;
    if (significantlyBelow) continue;
    const candidateHigh = candidate.adev * Math.sqrt(candidate.edf / chisquareQuantile((1 - confirm) / 2, candidate.edf));
    for (let j = i + 1; j <= last; j++) {
      const later = sorted[j] as AllanPoint;
      const laterLow = later.adev * Math.sqrt(later.edf / chisquareQuantile((1 + confirm) / 2, later.edf));
      if (laterLow > candidateHigh * Math.sqrt(candidate.m / later.m)) return { m: candidate.m, tau: candidate.tau, adev: candidate.adev };
    }
    return null;
  }
  return null;
}

/** Smallest edf reported (keeps the chi-square quantiles finite for degenerate tiny sets). */
const MIN_EDF = 0.5;

function makePoint(m: number, tau0: number, adev: number, count: number, edf: number, confidence: number): AllanPoint {
  const upperQuantile = chisquareQuantile((1 + confidence) / 2, edf);
  const lowerQuantile = chisquareQuantile((1 - confidence) / 2, edf);
  const low = adev * Math.sqrt(edf / upperQuantile);
  const high = lowerQuantile > 0 ? adev * Math.sqrt(edf / lowerQuantile) : Number.MAX_VALUE;
  return { m, tau: m * tau0, adev, count, edf, low, high: adev === 0 ? 0 : high };
}

/** Phase of y minus its mean (tau0 = 1): x_0 = 0, x_(i+1) = x_i + (y_i - mean), Neumaier-compensated. */
function demeanedPhase(y: ArrayLike<number>): Float64Array {
  const n = y.length;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += y[i] as number;
  mean /= n;
  // Second pass on the residuals of the first mean removes its rounding (two-pass mean).
  let correction = 0;
  for (let i = 0; i < n; i++) correction += (y[i] as number) - mean;
  mean += correction / n;
  const phase = new Float64Array(n + 1);
  let sum = 0;
  let compensation = 0;
  for (let i = 0; i < n; i++) {
    const term = (y[i] as number) - mean;
    const next = sum + term;
    compensation += Math.abs(sum) >= Math.abs(term) ? sum - next + term : term - next + sum;
    sum = next;
    phase[i + 1] = sum + compensation;
  }
  return phase;
}

function checkInputs(y: ArrayLike<number>, factors: readonly number[], tau0: number): void {
  if (!(tau0 > 0) || !Number.isFinite(tau0)) throw new RangeError('allan deviation requires a positive sample interval');
  for (const m of factors) {
    if (!Number.isInteger(m) || m < 1) throw new RangeError('allan deviation requires integer averaging factors of at least 1');
  }
  for (let i = 0; i < y.length; i++) {
    if (!Number.isFinite(y[i] as number)) throw new RangeError('allan deviation requires finite data');
  }
}

function checkConfidence(confidence: number | undefined): number {
  const c = confidence ?? ONE_SIGMA_COVERAGE;
  if (!(c > 0 && c < 1)) throw new RangeError('allan deviation requires a confidence between 0 and 1');
  return c;
}
