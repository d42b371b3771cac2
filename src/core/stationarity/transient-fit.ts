import { changeFits } from './change-point-fits.js';
/**
 * Warm-up transient fit: the record since the window began, as block means, fitted by a level plus
 * a decaying exponential, mu + A exp(-t / T), and the bias that the rest of the transient leaves in
 * the mean of any later part of the record.
 *
 * Why a model: a warm-up that has fallen below the noise is invisible to tests on the part that is
 * kept, yet it still biases the kept mean (a slow approach of a few tenths of the noise, over a
 * fifth of the record, biases the mean by half its uncertainty). The early, visible part of the
 * transient tells its time constant; extrapolated, it says where the remaining bias is small
 * against the uncertainty of the mean. Heating and cooling of a thermal mass, the settling of a
 * flow loop and of a bath are close to first-order, so the exponential is the natural shape (common
 * practice; the "time constant" of a first-order lag). Shapes it does not describe still leave a
 * large residual, which the confirming tests on the kept part see.
 *
 * Method: for each time constant T on a geometric grid from half a block to eight record lengths,
 * least squares of the block means y_k on (1, g_k(T)), g_k(T) the mean of exp(-t / T) over block k
 * (exact for any block size); the T with the smallest residual sum of squares is kept (the profile
 * least-squares estimate of a separable nonlinear model: the linear parameters are solved for each
 * value of the nonlinear one, G. H. Golub & V. Pereyra (1973), "The differentiation of pseudo-inverses and nonlinear least
 * squares problems whose variables separate", SIAM J. Numer. Anal. 10(2), 413-432; from memory).
 * Significance: the fall in the residual sum of squares against a constant, in units of the
 *   variance of a block mean sigma_b^2 = min(S(0) / b, RSS / (K - 3)) (S(0) the long-run variance
 *   of the steady noise from the caller; the residual variance of the fit when smaller, since an
 *   S(0) estimated over a window that still holds the transient is inflated by it), must exceed
 *   `threshold` (16: a chi-square with two degrees of freedom exceeds
 *   it with probability 3e-4; the scan over T makes the real false-alarm rate somewhat larger,
 *   measured in bench/verdict.js). Blocks are first merged until each spans at least four tau_int,
 *   so that neighbouring block means are nearly independent.
 * Bias of the mean of samples [c, n) (absolute indices): A sum_(t = c..n-1) q^(t - origin) / (n - c),
 *   q = exp(-1 / T), summed in closed form with expm1 (no cancellation when T is long).
 * Cost: O(K * grid) for K <= capacity blocks and about 80 grid points (the exponentials by
 *   recurrence); O(1) per bias. Called on the pipeline's geometric check schedule.
 */
export interface TransientFit {
  /** The exponential explains significantly more than a constant. */
  significant: boolean;
  /** (RSS of a constant - RSS of the fit) / sigma_b^2. */
  improvement: number;
  level: number;
  amplitude: number;
  /** Time constant, samples. */
  timeConstant: number;
  /** Absolute index where the fitted record begins (t = 0). */
  origin: number;
  /**
   * The fitted exponential has decayed within the record (T <= span / DECAYED_SPANS): a warm-up
   * seen to settle. A longer T is a level still moving across the whole record (a drift, or a
   * warm-up far from its end), which no cut can make steady.
   */
  decays: boolean;
  /** Samples per block used in the fit, and the number of blocks. */
  blockSize: number;
  blocks: number;
  /** Residual sum of squares of the fit, and the block variance it was judged against. */
  rss: number;
  blockVariance: number;
  /**
   * The long-run variance the fit implies for the noise: the caller's S(0), or the block variance
   * times the block size when that is smaller (S(0) from a window that holds the transient is
   * inflated by it). Tolerances on the kept mean use this.
   */
  longRunVariance: number;
  /** The block means fitted (oldest first). */
  means: Float64Array;
  /**
   * Residual variance of the fit over the noise variance of a block mean told by the successive
   * differences of the block means (their median, robust to the few large differences of a sharp
   * transition and to the small ones of a smooth one): near 1 when the exponential describes the
   * record, far above it when the warm-up has another shape (a ramp and hold, a step, an S-curve).
   */
  lackOfFit: number;
  /** Variance of one block mean told by the successive differences (see lackOfFit). */
  noiseVariance: number;
  /**
   * A faster lag fitted together with the main one (two-lag-fit.ts: a sensor or a downstream
   * stage lagging a slower source), whose bias transientBias adds; null for one lag.
   */
  second: { timeConstant: number; amplitude: number } | null;
  /**
   * The longest time constant still consistent with the record (profile least squares within
   * 3.84 block variances of the best fit: an approximate 95 % interval for T, one parameter) and
   * its amplitude: a slow tail that a young record cannot rule out yet.
   */
  slowest: { timeConstant: number; amplitude: number };
  /** The shortest time constant still consistent with the record, likewise, and its amplitude. */
  fastest: { timeConstant: number; amplitude: number };
}

export interface TransientFitInput {
  /** Block means, oldest first. */
  means: ArrayLike<number>;
  blockSize: number;
  /** Absolute index of the first sample of block 0. */
  origin: number;
  /** Long-run variance S(0) of the steady noise (Var(mean of n) ~ S(0) / n). */
  longRunVariance: number;
  /** Integrated autocorrelation time of the steady noise, samples. */
  tauInt: number;
  /** Minimum fall of the residual sum of squares, in block variances. Default 16. */
  threshold?: number;
}

/** A fit decays within the record when its time constant is at most span / DECAYED_SPANS (e^-3 left). */
export const DECAYED_SPANS = 3;
/** Fall of the residual sum of squares (in block variances) that makes a fit significant. */
export const DEFAULT_THRESHOLD = 16;
/** Fewest blocks a fit needs. */
export const MIN_FIT_BLOCKS = 16;
export const GRID_RATIO = 1.12;

/**
 * The block means a fit works on: the input's blocks merged so that each spans at least four
 * tau_int, keeping at least 2 MIN_FIT_BLOCKS blocks where the record allows (an inflated tau_int
 * must not leave too few to fit); null when fewer than MIN_FIT_BLOCKS remain.
 */
export function fitBlocks(input: TransientFitInput): { y: Float64Array; b: number } | null {
  const group = Math.max(1, Math.min(Math.ceil((4 * Math.max(1, input.tauInt)) / input.blockSize), Math.floor(input.means.length / (2 * MIN_FIT_BLOCKS))));
  const K = Math.floor(input.means.length / group);
  if (K < MIN_FIT_BLOCKS) return null;
  const y = new Float64Array(K);
  for (let k = 0; k < K; k++) {
    let s = 0;
    for (let j = 0; j < group; j++) s += input.means[k * group + j] as number;
    y[k] = s / group;
  }
  return { y, b: input.blockSize * group };
}

export function fitTransient(input: TransientFitInput): TransientFit | null {
  const { longRunVariance, origin } = input;
  if (!(longRunVariance > 0)) return null;
  const blocks = fitBlocks(input);
  if (!blocks) return null;
  const { y, b } = blocks;
  const K = y.length;
  const shift = y[K - 1] as number;
  let mean = 0;
  for (let k = 0; k < K; k++) mean += (y[k] as number) - shift;
  mean /= K;
  let rss0 = 0;
  for (let k = 0; k < K; k++) rss0 += ((y[k] as number) - shift - mean) ** 2;
  const sigma2 = longRunVariance / b;
  let best: { T: number; A: number; mu: number; rss: number } | null = null;
  const profile: { T: number; A: number; rss: number }[] = [];
  const span = K * b;
  // The profile at one time constant: the amplitude and level solved by least squares, and the
  // residual sum of squares (from rss0 on the grid; summed directly where `direct`, which keeps
  // its digits when a transient far above the noise leaves rss a millionth of rss0).
  const at = (T: number, direct = false): { T: number; A: number; mu: number; rss: number } | null => {
    // g_k = q^(k b) (1 - q^b) / (b (1 - q)), q = exp(-1/T); computed by recurrence.
    const stepDecay = Math.exp(-b / T);
    const g0 = firstBlockDecay(T, b);
    let g = g0;
    let sg = 0;
    let sgg = 0;
    let syg = 0;
    for (let k = 0; k < K; k++) {
      const d = (y[k] as number) - shift - mean;
      sg += g;
      sgg += g * g;
      syg += d * g;
      g *= stepDecay;
    }
    const gMean = sg / K;
    const sxx = sgg - K * gMean * gMean;
    if (!(sxx > 1e-300)) return null;
    const A = syg / sxx; // the d are centred, so sum d (g - gMean) = syg
    let rss = rss0 - A * A * sxx;
    if (direct) {
      rss = 0;
      g = g0;
      for (let k = 0; k < K; k++) {
        rss += ((y[k] as number) - shift - mean - A * (g - gMean)) ** 2;
        g *= stepDecay;
      }
    }
    return { T, A, mu: shift + mean - A * gMean, rss };
  };
  for (let T = b / 2; T <= 8 * span; T *= GRID_RATIO) {
    const point = at(T);
    if (!point) continue;
    profile.push({ T, A: point.A, rss: point.rss });
    if (!best || point.rss < best.rss) best = point;
  }
  // The grid's step (12 %) is far coarser than the time constant of a warm-up tens or hundreds of
  // noise deviations high is known: refine between the neighbouring grid points by golden-section
  // search on log T (40 steps: a relative precision near 1e-9).
  if (best) {
    let low = Math.log(best.T / GRID_RATIO);
    let high = Math.log(best.T * GRID_RATIO);
    const ratio = (Math.sqrt(5) - 1) / 2;
    let x1 = high - ratio * (high - low);
    let x2 = low + ratio * (high - low);
    let f1 = at(Math.exp(x1), true)?.rss ?? Number.POSITIVE_INFINITY;
    let f2 = at(Math.exp(x2), true)?.rss ?? Number.POSITIVE_INFINITY;
    for (let i = 0; i < 40; i++) {
      if (f1 <= f2) {
        high = x2; x2 = x1; f2 = f1;
        x1 = high - ratio * (high - low);
        f1 = at(Math.exp(x1), true)?.rss ?? Number.POSITIVE_INFINITY;
      } else {
        low = x1; x1 = x2; f1 = f2;
        x2 = low + ratio * (high - low);
        f2 = at(Math.exp(x2), true)?.rss ?? Number.POSITIVE_INFINITY;
      }
    }
    const refined = at(Math.exp((low + high) / 2), true);
    const gridBest = at(best.T, true);
    if (refined && gridBest && refined.rss < gridBest.rss) best = refined;
    else if (gridBest) best = gridBest;
  }
  if (!best) return null;
  // The block variance: from the caller's S(0), or from the fit's own residuals when they are
  // smaller. S(0) from a window that still holds the transient is inflated by it (the transient
  // then hides itself); blocks of at least 4 tau_int leave residuals that are nearly independent.
  const residualVariance = best.rss / (K - 3);
  const blockVariance = Math.min(sigma2, Math.max(residualVariance, Number.MIN_VALUE));
  const improvement = (rss0 - best.rss) / blockVariance;
  const noiseVariance = differenceVariance(y);
  let slowest = { timeConstant: best.T, amplitude: best.A };
  let fastest = { timeConstant: best.T, amplitude: best.A };
  for (const point of profile) {
    if (point.rss > best.rss + 3.84 * blockVariance) continue;
    if (point.T > slowest.timeConstant) slowest = { timeConstant: point.T, amplitude: point.A };
    if (point.T < fastest.timeConstant) fastest = { timeConstant: point.T, amplitude: point.A };
  }
  return {
    significant: improvement > (input.threshold ?? DEFAULT_THRESHOLD),
    improvement,
    level: best.mu,
    amplitude: best.A,
    timeConstant: best.T,
    origin,
    decays: best.T <= span / DECAYED_SPANS,
    blockSize: b,
    blocks: K,
    rss: best.rss,
    blockVariance,
    longRunVariance: blockVariance * b,
    means: y,
    lackOfFit: residualVariance / noiseVariance,
    noiseVariance,
    second: null,
    slowest,
    fastest,
  };
}

/**
 * Residual sum of squares of the best ramp that ends and then holds (a straight approach to the set
 * point, then steady: y = a + s max(0, c - k)) fitted to block means: three parameters like the
 * exponential, so the two compare directly (changeFits on the reversed record). O(K^2).
 */
export function rampAndHoldRss(means: Float64Array): number {
  return changeFits(means.slice().reverse()).ramp.rss;
}

/** The mean of exp(-t / T) over the first block (t = 0 .. b - 1); block k's is this times exp(-k b / T). */
export function firstBlockDecay(T: number, b: number): number {
  return -Math.expm1(-b / T) / (b * -Math.expm1(-1 / T));
}

/** out[k] = the mean of exp(-t / T) over block k (b samples from t = k b), by recurrence. */
export function blockDecays(T: number, b: number, out: Float64Array): Float64Array {
  const stepDecay = Math.exp(-b / T);
  let g = firstBlockDecay(T, b);
  for (let k = 0; k < out.length; k++) {
    out[k] = g;
    g *= stepDecay;
  }
  return out;
}

/** Variance of one value of y from the median squared successive difference (2 sigma^2 chi-square(1), median 0.4549). */
export function differenceVariance(y: Float64Array): number {
  const d = new Float64Array(y.length - 1);
  for (let k = 1; k < y.length; k++) d[k - 1] = ((y[k] as number) - (y[k - 1] as number)) ** 2;
  d.sort();
  const m = d.length;
  const median = m % 2 === 1 ? (d[(m - 1) >> 1] as number) : ((d[m / 2 - 1] as number) + (d[m / 2] as number)) / 2;
  return Math.max(median / (2 * 0.45493642311957283), Number.MIN_VALUE);
}

/**
 * The fitted transient's mean over samples [from, to) (absolute indices): the bias it leaves there;
 * or that of the slowest or the fastest transient the record is still consistent with.
 */
export function transientBias(fit: TransientFit, from: number, to: number, which: 'best' | 'slowest' | 'fastest' = 'best'): number {
  if (to <= from) return 0;
  const T = which === 'best' ? fit.timeConstant : fit[which].timeConstant;
  const amplitude = which === 'best' ? fit.amplitude : fit[which].amplitude;
  const a = Math.max(0, from - fit.origin);
  const length = to - from;
  // sum_(t = a .. a + length - 1) exp(-t / T) = exp(-a / T) (1 - exp(-length / T)) / (1 - exp(-1 / T))
  const lag = (A: number, tc: number) => (A * Math.exp(-a / tc) * -Math.expm1(-length / tc)) / -Math.expm1(-1 / tc);
  return (lag(amplitude, T) + (fit.second ? lag(fit.second.amplitude, fit.second.timeConstant) : 0)) / length;
}

/**
 * The earliest start in [from, to - minKept] (on a grid of `step` samples) whose kept mean carries a
 * transient bias of at most `tolerance` times its standard uncertainty sqrt(S(0) / kept); null when
 * none does (the transient still dominates: not steady yet).
 */
export function admissibleStart(fit: TransientFit, from: number, to: number, tolerance: number, minKept: number, which: 'best' | 'slowest' | 'fastest' = 'best'): number | null {
  const step = Math.max(1, Math.floor(fit.blockSize / 4));
  for (let c = from; c <= to - minKept; c += step) {
    if (Math.abs(transientBias(fit, c, to, which)) <= tolerance * Math.sqrt(fit.longRunVariance / (to - c))) return c;
  }
  return null;
}

/**
 * Samples after `at` until the fitted transient has fallen to `level` (absolute value), or 0 when it
 * already has; Infinity for a fit that does not decay.
 */
export function samplesUntilBelow(fit: TransientFit, at: number, level: number): number {
  const A = Math.abs(fit.amplitude);
  if (!(level > 0)) return Number.POSITIVE_INFINITY;
  if (A <= level) return 0;
  const reached = fit.origin + fit.timeConstant * Math.log(A / level);
  return Math.max(0, Math.ceil(reached - at));
}

const BREAK_MARGIN = 10;

/**
 * Whether a decaying warm-up from the start of the record explains it about as well as a break:
 * a step at some block c, or a ramp from block c on, each fitted to the same block means by least
 * squares (three parameters each, like the exponential, so their residual sums compare directly;
 * the profile-likelihood comparison of stationarity-monitor.ts classify). A ramp that starts in the
 * first quarter of the record is the record moving since it began: a warm-up, whatever its shape.
 * Cost: O(K^2) for the ramp over K blocks; run only when the stationarity monitor alarms.
 */
export function warmupExplains(fit: TransientFit): boolean {
  const K = fit.means.length;
  const fits = changeFits(fit.means);
  const stepRss = fits.step.rss;
  const rampRss = fits.ramp.rss;
  const rampAt = fits.ramp.at;
  // A break has to fit decisively better (BREAK_MARGIN block variances: a log-likelihood lead of 5)
  // for the record not to count as a warm-up: a weak warm-up and a step fitted to the same noise
  // trade places at random, while a real late step or drift wins by far.
  if (fit.rss <= Math.min(stepRss, rampRss) + BREAK_MARGIN * fit.blockVariance) return true;
  return rampRss <= stepRss && rampAt < K / 4;
}
