import { AutocovarianceFft } from '../acf/autocovariance-fft.js';
import type { SeededRandom } from '../random/seeded-random.js';
import { automaticBlockLength } from './block-length.js';

/**
 * Stationary bootstrap of the mean, the median and a trimmed mean of an autocorrelated series: a
 * cross-check of the analytic (autocorrelation-aware) standard uncertainty, and the standard
 * uncertainty of robust location estimates for channels with spikes.
 *
 * Method: D. N. Politis & J. P. Romano (1994), "The stationary bootstrap", Journal of the American
 * Statistical Association 89(428), 1303-1313 (page numbers from memory). Each resample of length n
 * is built from blocks that start at a uniformly drawn index, have Geometric(p) lengths
 * (P(L = k) = p (1 - p)^(k - 1), mean 1/p = blockLength) and wrap around the end of the series;
 * the last block is cut at n. This is the scheme of R boot's `tsboot(sim = "geom")` (A. Canty &
 * B. D. Ripley, package boot; its `ts.array` read in the source: lengths 1 + rgeom(R, 1/l) cut at
 * n, starts sample.int(n), wrap-around with tsboot's default `endcorr = TRUE`).
 * Random draws, per block: the start, then the length (inversion: 1 + floor(ln(U) / ln(1 - p)),
 * U uniform on (0, 1]). The standard error is the sample sd of the R replicates (divisor R - 1), as
 * `sd(boot$t)`.
 * Statistics: the mean; the median (average of the two middle order statistics for even n, as R
 * `median`); the trimmed mean dropping floor(n * trim) values at each end (R `mean(x, trim)`), trim in
 * [0, 0.5). The estimate reported is the statistic of the original series.
 * Block length: by default the automatic stationary-bootstrap length of Politis & White (2004) with
 * the 2009 correction (block-length.ts), used unrounded (the geometric law needs only its mean) and
 * never below 1.
 *
 * Cost: O(R n) time (selection by Hoare's FIND, expected O(n) per order statistic, instead of a
 * sort), plus O(n log n) for the automatic block length; memory O(n + R) per statistic.
 */
export type BootstrapStatistic = 'mean' | 'median' | 'trimmed-mean';

export interface StationaryBootstrapOptions {
  /** Mean block length 1/p, at least 1; default automatic (Politis & White). */
  blockLength?: number;
  /** Number of bootstrap resamples R (at least 2). */
  replicates: number;
  random: SeededRandom;
  /** Default ['mean']. */
  statistics?: BootstrapStatistic[];
  /** Fraction dropped at each end for the trimmed mean; default 0.1. */
  trim?: number;
}

export interface BootstrapEstimate {
  /** The statistic of the original series. */
  estimate: number;
  /** Bootstrap standard error: sd of the replicates (divisor R - 1). */
  standardError: number;
  /** Mean of the replicates; bootstrapMean - estimate is the bootstrap estimate of the bias. */
  bootstrapMean: number;
}

export interface StationaryBootstrapResult {
  /** Mean block length used. */
  blockLength: number;
  blockLengthSource: 'given' | 'automatic';
  replicates: number;
  mean?: BootstrapEstimate;
  median?: BootstrapEstimate;
  trimmedMean?: BootstrapEstimate;
  reliable: boolean;
  note?: string;
}

export function stationaryBootstrap(values: ArrayLike<number>, options: StationaryBootstrapOptions): StationaryBootstrapResult {
  const n = values.length;
  if (n < 3) throw new RangeError('stationaryBootstrap requires at least 3 values');
  const replicates = options.replicates;
  if (!Number.isInteger(replicates) || replicates < 2) throw new RangeError('stationaryBootstrap requires at least 2 replicates');
  const trim = options.trim ?? 0.1;
  if (!(trim >= 0 && trim < 0.5)) throw new RangeError('stationaryBootstrap requires trim in [0, 0.5)');
  const statistics = options.statistics ?? ['mean'];
  const notes: string[] = [];
  let blockLength: number;
  let blockLengthSource: 'given' | 'automatic';
  if (options.blockLength !== undefined) {
    if (!(options.blockLength >= 1) || !Number.isFinite(options.blockLength)) throw new RangeError('stationaryBootstrap requires a block length of at least 1');
    blockLength = options.blockLength;
    blockLengthSource = 'given';
  } else {
    const automatic = automaticBlockLength(values);
    blockLength = Math.max(1, automatic.stationary);
    blockLengthSource = 'automatic';
    if (!automatic.reliable) notes.push(`block length: ${automatic.note ?? 'unreliable'}`);
  }
  const wantMean = statistics.includes('mean');
  const wantMedian = statistics.includes('median');
  const wantTrimmed = statistics.includes('trimmed-mean');
  const needsSample = wantMedian || wantTrimmed;
  const x = Float64Array.from(values as ArrayLike<number>);
  const shift = x[0] as number; // sums of shifted values, so that an offset does not cost digits
  const meanReplicates = wantMean ? new Float64Array(replicates) : null;
  const medianReplicates = wantMedian ? new Float64Array(replicates) : null;
  const trimmedReplicates = wantTrimmed ? new Float64Array(replicates) : null;
  const sample = new Float64Array(needsSample ? n : 0);
  const p = 1 / blockLength;
  const logStay = p < 1 ? Math.log(1 - p) : 0;
  const random = options.random;

  for (let r = 0; r < replicates; r++) {
    let position = 0;
    let sum = 0;
    while (position < n) {
      const start = random.integer(n);
      const length = p < 1 ? 1 + Math.floor(Math.log(1 - random.uniform()) / logStay) : 1;
      const end = Math.min(n, position + length);
      let index = start;
      for (; position < end; position++) {
        const v = x[index] as number;
        sum += v - shift;
        if (needsSample) sample[position] = v;
        index++;
        if (index === n) index = 0;
      }
    }
    if (meanReplicates) meanReplicates[r] = shift + sum / n;
    if (medianReplicates) medianReplicates[r] = medianInPlace(sample);
    if (trimmedReplicates) trimmedReplicates[r] = trimmedMeanInPlace(sample, trim);
  }

  const result: StationaryBootstrapResult = { blockLength, blockLengthSource, replicates, reliable: true };
  const scratch = Float64Array.from(x);
  if (meanReplicates) result.mean = summarise(meanOf(x), meanReplicates);
  if (medianReplicates) result.median = summarise(medianInPlace(scratch), medianReplicates);
  if (trimmedReplicates) result.trimmedMean = summarise(trimmedMeanInPlace(scratch, trim), trimmedReplicates);
  if (blockLength > n / 3) notes.push(`mean block length ${blockLength.toPrecision(3)} is more than n / 3: too few independent blocks`);
  if (notes.length > 0) {
    result.reliable = false;
    result.note = notes.join('; ');
  }
  return result;
}

function summarise(estimate: number, replicates: Float64Array): BootstrapEstimate {
  const r = replicates.length;
  const centre = meanOf(replicates);
  let squares = 0;
  for (let i = 0; i < r; i++) squares += ((replicates[i] as number) - centre) ** 2;
  return { estimate, standardError: Math.sqrt(squares / (r - 1)), bootstrapMean: centre };
}

/** Two-pass mean (mean of the values shifted by the first, plus a residual correction). */
function meanOf(x: ArrayLike<number>): number {
  const n = x.length;
  const shift = x[0] as number;
  let sum = 0;
  for (let i = 0; i < n; i++) sum += (x[i] as number) - shift;
  const first = sum / n;
  let correction = 0;
  for (let i = 0; i < n; i++) correction += (x[i] as number) - shift - first;
  return shift + first + correction / n;
}

/** Median of `a` (reordered in place): the middle order statistic, or the average of the two. */
export function medianInPlace(a: Float64Array): number {
  const n = a.length;
  const k = n >> 1;
  const upper = selectInPlace(a, k, 0, n - 1);
  if (n % 2 === 1) return upper;
  // After selection every element left of k is <= a[k]; the lower middle is their maximum.
  let lower = a[0] as number;
  for (let i = 1; i < k; i++) if ((a[i] as number) > lower) lower = a[i] as number;
  return (lower + upper) / 2;
}

/** Mean of the order statistics g ... n - 1 - g with g = floor(n * trim) (`a` reordered in place). */
export function trimmedMeanInPlace(a: Float64Array, trim: number): number {
  const n = a.length;
  const g = Math.floor(n * trim);
  if (g === 0) return meanOf(a);
  if (2 * g >= n) return medianInPlace(a);
  selectInPlace(a, g, 0, n - 1);
  selectInPlace(a, n - 1 - g, g, n - 1);
  return meanOf(a.subarray(g, n - g));
}

/**
 * Hoare's FIND (C. A. R. Hoare (1961), "Algorithm 65: Find", Communications of the ACM 4(7),
 * 321-322, from memory):
 * reorders a[lo..hi] so that a[k] is the value of rank k, everything left of it <= a[k] and
 * everything right of it >= a[k]. Median-of-three pivots; equal keys split evenly, so the many ties
 * of a bootstrap resample do not make it quadratic. Expected O(hi - lo).
 */
export function selectInPlace(a: Float64Array, k: number, lo: number, hi: number): number {
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    const x = a[lo] as number;
    const y = a[mid] as number;
    const z = a[hi] as number;
    const pivot = x < y ? (y < z ? y : x < z ? z : x) : x < z ? x : y < z ? z : y;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while ((a[i] as number) < pivot) i++;
      while ((a[j] as number) > pivot) j--;
      if (i <= j) {
        const t = a[i] as number;
        a[i] = a[j] as number;
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else break;
  }
  return a[k] as number;
}

/**
 * The exact stationary-bootstrap variance of the resample mean (no Monte Carlo), Politis & Romano
 * (1994), as checked by simulation in DERIVED-REFERENCES.md section 5:
 *   Var*(mean*) = (1/n) [R(0) + 2 sum_{i=1}^{n-1} b_n(i) R(i)],
 *   b_n(i) = (1 - i/n) q^i + (i/n) q^(n-i), q = 1 - 1/blockLength,
 * with R the ordinary sample autocovariance (divisor n, no wrap-around): the wrap-around of the
 * resample blocks shows up as the q^(n-i) term, and a circular R inside b_n would count it twice.
 * Cost: O(n log n) (all n - 1 lags by FFT), O(n) memory.
 */
export function stationaryBootstrapVarianceOfMean(values: ArrayLike<number>, blockLength: number): number {
  const n = values.length;
  if (n < 2) throw new RangeError('stationaryBootstrapVarianceOfMean requires at least 2 values');
  if (!(blockLength >= 1) || !Number.isFinite(blockLength)) throw new RangeError('stationaryBootstrapVarianceOfMean requires a block length of at least 1');
  const gamma = new AutocovarianceFft().compute(values, n - 1);
  const q = 1 - 1 / blockLength;
  const powers = new Float64Array(n + 1);
  powers[0] = 1;
  for (let i = 1; i <= n; i++) powers[i] = (powers[i - 1] as number) * q;
  let total = gamma[0] as number;
  for (let i = 1; i < n; i++) {
    const weight = (1 - i / n) * (powers[i] as number) + (i / n) * (powers[n - i] as number);
    total += 2 * weight * (gamma[i] as number);
  }
  return Math.max(0, total) / n;
}

/**
 * Whether a bootstrap standard error and an analytic standard uncertainty of the same mean agree.
 *
 * Rule (ours): compare on the log scale, d = ln(bootstrapSe / analyticU), against the spread d would
 * have if both estimated the same quantity, from the independent sources of error that are known:
 * - the bootstrap's Monte Carlo error: the sd of R replicates has relative variance about
 *   1 / (2 (R - 1)) for a normal bootstrap distribution (common practice);
 * - when `sampleCount` and `blockLength` are given, the stationary-bootstrap variance estimator's
 *   own sampling error: relative variance D_SB b / (n sigma^4) = 2 b / n for the variance (Politis &
 *   White 2004 with the 2009 D_SB = 2 g(0)^2), i.e. b / (2 n) for the standard error;
 * - when `analyticDof` (nu) is given, the analytic uncertainty's: 1 / (2 nu) (a chi-square
 *   variance estimate with nu degrees of freedom).
 * The variances add (treated as independent; the two estimates share data and are positively
 * correlated, so this overstates the spread and errs towards "agree": on AR(1) series with
 * phi = 0.7, n = 2000, ln(ratio) against Sokal's window spread by about 0.05 where the first two
 * terms allow 0.087). They disagree when |d| is more than `threshold` (default 3) such standard
 * deviations. With only `replicates` given the rule checks the Monte Carlo error alone, which is
 * right for comparing the bootstrap with its own closed form, and too strict for comparing it with
 * another estimator. For a test-point record pass sampleCount and blockLength (the bootstrap's own
 * sampling error); add analyticDof to allow for the analytic side too.
 * Cost: O(1).
 */
export interface AnalyticComparisonOptions {
  /** Series length n, for the bootstrap estimator's own sampling error. */
  sampleCount?: number;
  /** Mean block length b used by the bootstrap, with sampleCount. */
  blockLength?: number;
  /** Effective degrees of freedom of the analytic uncertainty. */
  analyticDof?: number;
  /** Standard deviations of ln(ratio) allowed; default 3. */
  threshold?: number;
}

export interface AnalyticComparison {
  agrees: boolean;
  /** bootstrapSe / analyticU; null when either is not positive. */
  ratio: number | null;
  /** sd of ln(ratio) expected under agreement. */
  logRatioStandardDeviation: number;
  /** |ln(ratio)| / logRatioStandardDeviation; null when ratio is. */
  zScore: number | null;
  note: string;
}

export function compareWithAnalytic(bootstrapSe: number, analyticU: number, replicates: number, options: AnalyticComparisonOptions = {}): AnalyticComparison {
  if (!Number.isInteger(replicates) || replicates < 2) throw new RangeError('compareWithAnalytic requires at least 2 replicates');
  const threshold = options.threshold ?? 3;
  let variance = 1 / (2 * (replicates - 1));
  const parts = [`Monte Carlo (R = ${replicates})`];
  const { sampleCount, blockLength, analyticDof } = options;
  if (sampleCount !== undefined && blockLength !== undefined && sampleCount > 0 && blockLength >= 1) {
    variance += blockLength / (2 * sampleCount);
    parts.push(`bootstrap estimator (b = ${blockLength.toPrecision(3)}, n = ${sampleCount})`);
  }
  if (analyticDof !== undefined && analyticDof > 0 && Number.isFinite(analyticDof)) {
    variance += 1 / (2 * analyticDof);
    parts.push(`analytic (nu = ${analyticDof.toPrecision(3)})`);
  }
  const spread = Math.sqrt(variance);
  if (!(bootstrapSe > 0) || !(analyticU > 0) || !Number.isFinite(bootstrapSe) || !Number.isFinite(analyticU)) {
    const bothZero = bootstrapSe === 0 && analyticU === 0;
    return { agrees: bothZero, ratio: null, logRatioStandardDeviation: spread, zScore: null, note: bothZero ? 'both uncertainties are zero' : 'one uncertainty is zero or not finite: cannot compare' };
  }
  const ratio = bootstrapSe / analyticU;
  const zScore = Math.abs(Math.log(ratio)) / spread;
  const agrees = zScore <= threshold;
  const note = `${agrees ? 'agree' : 'disagree'}: bootstrap / analytic = ${ratio.toPrecision(3)}, ${zScore.toPrecision(3)} sd of ln(ratio) allowing for ${parts.join(', ')}`;
  return { agrees, ratio, logRatioStandardDeviation: spread, zScore, note };
}
