import type { SeededRandom } from '../random/seeded-random.js';

/**
 * Propagation of distributions by the Monte Carlo method (MCM) for a derived result y = f(x).
 *
 * Method: JCGM 101:2008, "Evaluation of measurement data - Supplement 1 to the GUM - Propagation of
 * distributions using a Monte Carlo method" (clause texts from memory; DERIVED-REFERENCES.md section 3):
 * - 7.2-7.6: draw M vectors of inputs from their probability distributions, evaluate the model for
 *   each, take y = mean of the M model values and u^2(y) = sum (y_r - y)^2 / (M - 1).
 * - 7.7: sort the model values; q = pM when pM is an integer, else floor(pM + 1/2). The
 *   probabilistically symmetric interval is [y_(r), y_(r+q)] with r = (M - q)/2, or (M - q + 1)/2 when
 *   that is not an integer (order statistics numbered from 1); the shortest is [y_(r*), y_(r*+q)]
 *   with r* minimising y_(r+q) - y_(r) over r = 1 .. M - q.
 * - 7.9.2: numerical tolerance: write u(y) as c x 10^l with c an n_dig-digit integer; delta = 10^l / 2.
 * - 7.9.4: adaptive procedure: blocks of max(J, 10^4) trials with J = ceil(100 / (1 - p)); after
 *   block h >= 2, s^2 = sum_r (v_r - vbar)^2 / (h (h - 1)) over the h block values v of y, u(y),
 *   y_low and y_high; stop when 2 s <= delta for all four, delta from u(y) over all trials so far;
 *   report from all h M values.
 * - 8.1: validation of the GUM uncertainty framework (see validateFirstOrder).
 * Input distributions (JCGM 101, 6.4): normal; rectangular on [low, high]; scaled and shifted t
 * (6.4.9) drawn by Bailey's polar method (R. W. Bailey (1994), "Polar generation of random variates
 * with the t-distribution", Mathematics of Computation 62(206), 779-781; from memory, checked against
 * the t quantiles in the tests); multivariate normal (6.4.8) as mean + L z with L the Cholesky factor
 * of the covariance (positive semi-definite matrices are accepted: a zero pivot gives a zero column).
 * Inputs map to model arrays in order; a multivariate normal of dimension d gives d arrays.
 *
 * Choices:
 * - The model is vectorised: it receives one Float64Array per model input (length = block length)
 *   and writes the model values into `out`, so the per-trial cost is the model's own arithmetic.
 * - Model values that are not finite (e.g. a division by a channel drawn as zero) are left out of
 *   every statistic and counted in `nonFiniteTrials`, with a note: the result then describes the
 *   finite part of the output distribution only.
 * - The adaptive stopping rule uses the probabilistically symmetric ends by default (`stopOn`), as
 *   the shortest interval's ends scatter far more where the output density is flat (JCGM 101 9.3);
 *   both intervals are reported from all values either way.
 *
 * Memory: every finite model value of the run is kept (8 bytes per trial: 8 MB at M = 10^6, 40 MB at
 * the default adaptive cap of 5 x 10^6 trials), because the shortest interval and the final
 * quantiles need all values; the adaptive store grows by doubling up to the cap (briefly 1.5 times
 * the store while it is copied). Input arrays hold one
 * block (p x block length x 8 bytes). Nothing else grows with M.
 * Cost: O(M (p + model)) to draw and evaluate, O(M log M) for the final sort (0.2 s at M = 10^6
 * here), plus O(b log b) per adaptive block of b trials for the block's intervals. Measured on this
 * 2-core machine: 0.3-0.6 s for M = 10^6 with the 4- and 5-input models of JCGM 101 9.2 and 9.3.
 * @throws RangeError for invalid distributions, options, or when fewer than two finite model values
 *   result.
 */
export type InputDistribution =
  | { kind: 'normal'; mean: number; sd: number }
  | { kind: 'rectangular'; low: number; high: number }
  | { kind: 't'; mean: number; scale: number; dof: number }
  | { kind: 'multivariate-normal'; mean: ArrayLike<number>; covariance: ArrayLike<number> };

/** Vectorised model: one array per model input (all of the block length), results written into `out`. */
export type VectorModel = (inputs: Float64Array[], out: Float64Array) => void;

export interface AdaptiveOptions {
  /** n_dig: significant digits of u(y) to be stable (7.9.2). */
  significantDigits: number;
  /** Cap on the trials; reaching it ends the run with converged = false. */
  maxTrials?: number;
  /** Which interval's ends enter the stopping rule. */
  stopOn?: 'symmetric' | 'shortest' | 'both';
}

export interface MonteCarloOptions {
  inputs: InputDistribution[];
  model: VectorModel;
  /** Coverage probability p. */
  confidence: number;
  random: SeededRandom;
  /** Fixed number of trials M (default 10^6, JCGM 101 7.2.1) when `adaptive` is absent. */
  trials?: number;
  adaptive?: AdaptiveOptions;
  /** Return the sorted finite model values (8 bytes per trial kept alive). */
  keepSortedValues?: boolean;
}

export interface MonteCarloResult {
  value: number;
  standardUncertainty: number;
  /** Probabilistically symmetric coverage interval. */
  low: number;
  high: number;
  /** Shortest coverage interval. */
  shortestLow: number;
  shortestHigh: number;
  confidence: number;
  /** Trials drawn, finite or not. */
  trials: number;
  /** Blocks (adaptive) or model calls (fixed M). */
  blocks: number;
  /** Adaptive: whether the stopping rule was met before the cap; fixed M: null. */
  converged: boolean | null;
  /** Numerical tolerance delta of 7.9.2 from the final u(y) (adaptive only). */
  tolerance: number | null;
  nonFiniteTrials: number;
  note?: string;
  sortedValues?: Float64Array;
}

export const DEFAULT_TRIALS = 1_000_000;
/** Adaptive cap: 5 x 10^6 trials, 40 MB of kept values. */
export const DEFAULT_MAX_TRIALS = 5_000_000;
/** Trials per model call with a fixed M: bounds the input arrays to p x 0.5 MB. */
const FIXED_CHUNK = 65_536;

export function monteCarloPropagation(options: MonteCarloOptions): MonteCarloResult {
  const { confidence, random, model } = options;
  if (!(confidence > 0 && confidence < 1)) throw new RangeError('monteCarloPropagation requires a coverage probability in (0, 1)');
  const samplers = options.inputs.map(prepareInput);
  const width = samplers.reduce((sum, s) => sum + s.dimension, 0);
  if (width === 0) throw new RangeError('monteCarloPropagation requires at least one input');

  if (options.adaptive) return runAdaptive(options, options.adaptive, samplers, width);

  const total = options.trials ?? DEFAULT_TRIALS;
  if (!Number.isInteger(total) || total < 2) throw new RangeError('monteCarloPropagation requires an integer number of trials >= 2');
  const chunk = Math.min(total, FIXED_CHUNK);
  const arrays = allocate(width, chunk);
  const out = new Float64Array(chunk);
  const store = new Float64Array(total);
  let kept = 0;
  let blocks = 0;
  for (let done = 0; done < total; done += chunk) {
    const length = Math.min(chunk, total - done);
    const views = length === chunk ? arrays : arrays.map((a) => a.subarray(0, length));
    const outView = length === chunk ? out : out.subarray(0, length);
    draw(samplers, random, views, length);
    model(views, outView);
    kept = keepFinite(outView, store, kept);
    blocks++;
  }
  return summarise(store.subarray(0, kept), total, blocks, null, null, confidence, options.keepSortedValues === true);
}

function runAdaptive(options: MonteCarloOptions, adaptive: AdaptiveOptions, samplers: Sampler[], width: number): MonteCarloResult {
  const { confidence, random, model } = options;
  const digits = adaptive.significantDigits;
  if (!Number.isInteger(digits) || digits < 1) throw new RangeError('monteCarloPropagation requires significantDigits to be an integer >= 1');
  const blockSize = adaptiveBlockSize(confidence);
  const maxTrials = adaptive.maxTrials ?? DEFAULT_MAX_TRIALS;
  if (!(maxTrials >= 2 * blockSize)) throw new RangeError(`monteCarloPropagation requires maxTrials >= two blocks (${2 * blockSize})`);
  const stopOn = adaptive.stopOn ?? 'symmetric';
  const arrays = allocate(width, blockSize);
  const out = new Float64Array(blockSize);
  let store = new Float64Array(Math.min(maxTrials, 16 * blockSize));
  let kept = 0;
  let trials = 0;
  let blocks = 0;
  // Running moments of all finite values so far (Chan, Golub & LeVeque merge of block moments).
  let count = 0;
  let mean = 0;
  let sumSquares = 0;
  // Running moments of the block values of y, u, y_low, y_high, shortest low and high (Welford).
  const blockStats = [0, 1, 2, 3, 4, 5].map(() => ({ mean: 0, m2: 0 }));
  let usableBlocks = 0;
  let converged = false;
  while (trials + blockSize <= maxTrials) {
    draw(samplers, random, arrays, blockSize);
    model(arrays, out);
    trials += blockSize;
    blocks++;
    if (kept + blockSize > store.length) {
      const grown = new Float64Array(Math.min(maxTrials, 2 * store.length));
      grown.set(store.subarray(0, kept));
      store = grown;
    }
    const start = kept;
    kept = keepFinite(out, store, kept);
    const block = store.subarray(start, kept);
    const n = block.length;
    if (n < 2 || intervalCount(n, confidence) >= n) continue;
    block.sort();
    const moments = twoPassMoments(block);
    const interval = coverageIntervals(block, confidence);
    const delta = moments.mean - mean;
    const merged = count + n;
    sumSquares += moments.sumSquares + (delta * delta * count * n) / merged;
    mean += (delta * n) / merged;
    count = merged;
    usableBlocks++;
    const values = [moments.mean, Math.sqrt(moments.sumSquares / (n - 1)), interval.low, interval.high, interval.shortestLow, interval.shortestHigh];
    values.forEach((v, i) => {
      const s = blockStats[i] as { mean: number; m2: number };
      const d = v - s.mean;
      s.mean += d / usableBlocks;
      s.m2 += d * (v - s.mean);
    });
    if (usableBlocks < 2) continue;
    const tolerance = numericalTolerance(Math.sqrt(sumSquares / (count - 1)), digits);
    const watched = stopOn === 'symmetric' ? [0, 1, 2, 3] : stopOn === 'shortest' ? [0, 1, 4, 5] : [0, 1, 2, 3, 4, 5];
    const h = usableBlocks;
    if (watched.every((i) => 2 * Math.sqrt((blockStats[i] as { m2: number }).m2 / (h * (h - 1))) <= tolerance)) {
      converged = true;
      break;
    }
  }
  const result = summarise(store.subarray(0, kept), trials, blocks, converged, digits, confidence, options.keepSortedValues === true);
  if (!converged) result.note = joinNotes(result.note, `adaptive procedure stopped at the cap of ${maxTrials} trials before ${digits} significant digits of u(y) were stable`);
  return result;
}

/** Block size of the adaptive procedure (JCGM 101 7.9.4): max(J, 10^4), J = ceil(100 / (1 - p)). */
export function adaptiveBlockSize(confidence: number): number {
  // 1e-9 keeps ceil from stepping up on round-off, e.g. 100 / (1 - 0.95) = 2000.0000000000005.
  return Math.max(Math.ceil(100 / (1 - confidence) - 1e-9), 10_000);
}

/**
 * Numerical tolerance of JCGM 101 7.9.2: write |value| as c x 10^l with c an integer of
 * `significantDigits` digits; delta = 10^l / 2. Example (7.9.2): u = 0.000 35, n_dig = 2 gives
 * delta = 0.000 005. Returns 0 for a zero value.
 */
export function numericalTolerance(value: number, significantDigits: number): number {
  if (!Number.isInteger(significantDigits) || significantDigits < 1) throw new RangeError('numericalTolerance requires significantDigits >= 1');
  const magnitude = Math.abs(value);
  if (!Number.isFinite(magnitude)) throw new RangeError('numericalTolerance requires a finite value');
  if (magnitude === 0) return 0;
  let exponent = Math.floor(Math.log10(magnitude)) - (significantDigits - 1);
  // Correct log10 round-off and the case where rounding c adds a digit (0.000 996 -> 10 x 10^-4).
  const upper = 10 ** significantDigits;
  const lower = 10 ** (significantDigits - 1);
  while (Math.round(magnitude / 10 ** exponent) >= upper) exponent++;
  while (Math.round(magnitude / 10 ** exponent) < lower) exponent--;
  return 0.5 * 10 ** exponent;
}

/** q = pM when pM is an integer, else floor(pM + 1/2) (JCGM 101 7.7.1). */
function intervalCount(total: number, confidence: number): number {
  const pm = confidence * total;
  const nearest = Math.round(pm);
  // pM computed in floating point: within 1e-9 of an integer counts as that integer.
  return Math.abs(pm - nearest) <= 1e-9 ? nearest : Math.floor(pm + 0.5);
}

export interface CoverageIntervals {
  low: number;
  high: number;
  shortestLow: number;
  shortestHigh: number;
}

/**
 * Probabilistically symmetric and shortest coverage intervals from sorted model values (JCGM 101
 * 7.7). Cost O(M).
 * @throws RangeError when M - q < 1 (too few values for this coverage probability).
 */
export function coverageIntervals(sorted: Float64Array, confidence: number): CoverageIntervals {
  const total = sorted.length;
  const q = intervalCount(total, confidence);
  if (total - q < 1) throw new RangeError(`coverageIntervals requires more than ${q} values at p = ${confidence}`);
  const r = (total - q) % 2 === 0 ? (total - q) / 2 : (total - q + 1) / 2;
  // Order statistic y_(k), numbered from 1, is sorted[k - 1].
  const low = sorted[r - 1] as number;
  const high = sorted[r + q - 1] as number;
  let best = 1;
  let bestWidth = Infinity;
  for (let start = 1; start <= total - q; start++) {
    const w = (sorted[start + q - 1] as number) - (sorted[start - 1] as number);
    if (w < bestWidth) {
      bestWidth = w;
      best = start;
    }
  }
  return { low, high, shortestLow: sorted[best - 1] as number, shortestHigh: sorted[best + q - 1] as number };
}

export interface FirstOrderValidation {
  /** |y - U_p - y_low| */
  lowDifference: number;
  /** |y + U_p - y_high| */
  highDifference: number;
  /** delta of 7.9.2 from u and n_dig. */
  tolerance: number;
  validated: boolean;
}

/**
 * Validation of the GUM uncertainty framework by the Monte Carlo method (JCGM 101:2008, 8.1, from
 * memory): d_low = |y - U_p - y_low|, d_high = |y + U_p - y_high|, with y and U_p from the GUM
 * framework and y_low, y_high the ends of the MCM interval; the GUM result is validated when both
 * are <= delta, the numerical tolerance of u (7.9.2) at n_dig significant digits. Choice: pass the
 * probabilistically symmetric MCM interval (low, high), which compares like with like for the
 * symmetric y +- U_p; which interval 8.1 prescribes is not verified (from memory). Disagreement is
 * expected for strongly non-linear models and for non-normal outputs (JCGM 101 9.2.3, 9.2.4, 9.3, 9.4).
 */
export function validateFirstOrder(
  gum: { value: number; expandedUncertainty: number },
  mcm: { low: number; high: number },
  significantDigits: number,
  standardUncertainty: number,
): FirstOrderValidation {
  const tolerance = numericalTolerance(standardUncertainty, significantDigits);
  const lowDifference = Math.abs(gum.value - gum.expandedUncertainty - mcm.low);
  const highDifference = Math.abs(gum.value + gum.expandedUncertainty - mcm.high);
  return { lowDifference, highDifference, tolerance, validated: lowDifference <= tolerance && highDifference <= tolerance };
}

// ------------------------------------------------------------------------------------------------

interface Sampler {
  dimension: number;
  fill(random: SeededRandom, arrays: Float64Array[], offset: number, length: number): void;
}

function prepareInput(distribution: InputDistribution, index: number): Sampler {
  const fail = (what: string): never => {
    throw new RangeError(`monteCarloPropagation input ${index} (${distribution.kind}): ${what}`);
  };
  switch (distribution.kind) {
    case 'normal': {
      const { mean, sd } = distribution;
      if (!Number.isFinite(mean) || !(sd >= 0) || !Number.isFinite(sd)) fail('requires a finite mean and sd >= 0');
      return {
        dimension: 1,
        fill(random, arrays, offset, length) {
          const a = arrays[offset] as Float64Array;
          for (let r = 0; r < length; r++) a[r] = mean + sd * random.normal();
        },
      };
    }
    case 'rectangular': {
      const { low, high } = distribution;
      if (!Number.isFinite(low) || !Number.isFinite(high) || !(high >= low)) fail('requires finite low <= high');
      const span = high - low;
      return {
        dimension: 1,
        fill(random, arrays, offset, length) {
          const a = arrays[offset] as Float64Array;
          for (let r = 0; r < length; r++) a[r] = low + span * random.uniform();
        },
      };
    }
    case 't': {
      const { mean, scale, dof } = distribution;
      if (!Number.isFinite(mean) || !(scale >= 0) || !Number.isFinite(scale) || !(dof > 0)) fail('requires a finite mean, scale >= 0 and dof > 0');
      return {
        dimension: 1,
        fill(random, arrays, offset, length) {
          const a = arrays[offset] as Float64Array;
          for (let r = 0; r < length; r++) a[r] = mean + scale * studentT(random, dof);
        },
      };
    }
    case 'multivariate-normal': {
      const d = distribution.mean.length;
      if (d === 0 || distribution.covariance.length !== d * d) fail(`requires a mean of length d >= 1 and a d x d covariance`);
      const mean = Float64Array.from(distribution.mean);
      const factor = cholesky(Float64Array.from(distribution.covariance), d, fail);
      const z = new Float64Array(d);
      return {
        dimension: d,
        fill(random, arrays, offset, length) {
          for (let r = 0; r < length; r++) {
            for (let i = 0; i < d; i++) z[i] = random.normal();
            for (let i = 0; i < d; i++) {
              let v = mean[i] as number;
              for (let k = 0; k <= i; k++) v += (factor[i * d + k] as number) * (z[k] as number);
              (arrays[offset + i] as Float64Array)[r] = v;
            }
          }
        },
      };
    }
    default:
      return fail('unknown distribution kind');
  }
}

/** Student's t deviate with real dof > 0 by Bailey's (1994) polar method. */
function studentT(random: SeededRandom, dof: number): number {
  let u: number;
  let w: number;
  do {
    u = 2 * random.uniform() - 1;
    const v = 2 * random.uniform() - 1;
    w = u * u + v * v;
  } while (w >= 1 || w === 0);
  return u * Math.sqrt((dof * (w ** (-2 / dof) - 1)) / w);
}

/**
 * Lower Cholesky factor L (row-major) with L L^T = covariance; accepts positive semi-definite
 * matrices (pivots within 1e-12 of the largest variance of zero give zero columns).
 */
function cholesky(covariance: Float64Array, d: number, fail: (what: string) => never): Float64Array {
  let largest = 0;
  for (let i = 0; i < covariance.length; i++) if (!Number.isFinite(covariance[i] as number)) fail('covariance has a non-finite entry');
  for (let i = 0; i < d; i++) largest = Math.max(largest, covariance[i * d + i] as number);
  const tolerance = 1e-12 * largest;
  for (let i = 0; i < d; i++) {
    for (let j = 0; j < i; j++) {
      if (Math.abs((covariance[i * d + j] as number) - (covariance[j * d + i] as number)) > tolerance) fail('covariance is not symmetric');
    }
  }
  const factor = new Float64Array(d * d);
  for (let j = 0; j < d; j++) {
    let pivot = covariance[j * d + j] as number;
    for (let k = 0; k < j; k++) pivot -= (factor[j * d + k] as number) ** 2;
    if (pivot < -tolerance) fail('covariance is not positive semi-definite');
    if (pivot <= tolerance) continue; // zero column: this direction has no variance
    const root = Math.sqrt(pivot);
    factor[j * d + j] = root;
    for (let i = j + 1; i < d; i++) {
      let v = covariance[i * d + j] as number;
      for (let k = 0; k < j; k++) v -= (factor[i * d + k] as number) * (factor[j * d + k] as number);
      factor[i * d + j] = v / root;
    }
  }
  return factor;
}

function allocate(width: number, length: number): Float64Array[] {
  return Array.from({ length: width }, () => new Float64Array(length));
}

function draw(samplers: Sampler[], random: SeededRandom, arrays: Float64Array[], length: number): void {
  let offset = 0;
  for (const sampler of samplers) {
    sampler.fill(random, arrays, offset, length);
    offset += sampler.dimension;
  }
}

/** Appends the finite values of `values` to `store` from `kept`; returns the new count. */
function keepFinite(values: Float64Array, store: Float64Array, kept: number): number {
  let k = kept;
  for (let r = 0; r < values.length; r++) {
    const v = values[r] as number;
    if (Number.isFinite(v)) store[k++] = v;
  }
  return k;
}

/** Mean and centred sum of squares by the corrected two-pass algorithm (Chan, Golub & LeVeque 1983). */
function twoPassMoments(values: Float64Array): { mean: number; sumSquares: number } {
  const n = values.length;
  let sum = 0;
  for (let r = 0; r < n; r++) sum += values[r] as number;
  const first = sum / n;
  let deviations = 0;
  let squares = 0;
  for (let r = 0; r < n; r++) {
    const d = (values[r] as number) - first;
    deviations += d;
    squares += d * d;
  }
  return { mean: first + deviations / n, sumSquares: Math.max(0, squares - (deviations * deviations) / n) };
}

function summarise(
  values: Float64Array,
  trials: number,
  blocks: number,
  converged: boolean | null,
  digits: number | null,
  confidence: number,
  keepSorted: boolean,
): MonteCarloResult {
  const kept = values.length;
  if (kept < 2) throw new RangeError(`monteCarloPropagation: the model gave ${kept} finite value(s) in ${trials} trials`);
  values.sort();
  const { mean, sumSquares } = twoPassMoments(values);
  const standardUncertainty = Math.sqrt(sumSquares / (kept - 1));
  const interval = coverageIntervals(values, confidence);
  const nonFiniteTrials = trials - kept;
  const result: MonteCarloResult = {
    value: mean,
    standardUncertainty,
    ...interval,
    confidence,
    trials,
    blocks,
    converged,
    tolerance: digits === null ? null : numericalTolerance(standardUncertainty, digits),
    nonFiniteTrials,
  };
  if (nonFiniteTrials > 0) result.note = `${nonFiniteTrials} of ${trials} trials gave a non-finite model value and were left out`;
  if (keepSorted) result.sortedValues = values;
  return result;
}

function joinNotes(a: string | undefined, b: string): string {
  return a === undefined ? b : `${a}; ${b}`;
}
