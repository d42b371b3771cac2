import { besselKScaled } from './bessel-k.js';
import { correctedMean } from './linear-residuals.js';
import { type Spectrum0ArOptions, spectrum0Ar } from './spectrum0-ar.js';

/**
 * Heidelberger-Welch stationarity and half-width test, as R coda's `heidel.diag`.
 *
 * Method: P. Heidelberger & P. D. Welch (1983), "Simulation run length control in the presence of
 * an initial transient", Operations Research 31(6), 1109-1144, with the Cramer-von Mises form of
 * L. Schruben (1982), "Detecting initialization bias in simulation output", Operations Research
 * 30(3), 569-590 (both from memory). Implemented step for step as coda 0.19-4 `heidel.diag` (code
 * read from the installed package):
 * 1. Candidate starts: R's seq(1, n/2, by = n/10), i.e. discards of 0, 10, 20, 30 and 40 % (50 % is
 *    never tried). A non-integer start is moved as coda's window.mcmc does: to the next time above
 *    it, unless a time lies within a relative 1e-5 of it (then R's trunc(start + 0.5) applies).
 * 2. S0 = spectrum0.ar of the second half (times from n/2 to n), computed once and kept for every start.
 * 3. For each start, Y = the kept part (m values), B_j = sum_(i<=j) (Y_i - Ybar),
 *    I = sum_j B_j^2 / (m^2 S0), the Cramer-von Mises statistic of the scaled Brownian bridge. The
 *    start passes when F(I) < 1 - pvalue (F the Cramer-von Mises distribution function); the first
 *    passing start is kept. B_j is accumulated from centred values (coda subtracts ybar * j from a
 *    plain cumulative sum, which loses digits when |mean| >> spread); equal in exact arithmetic.
 * 4. Half-width test on the kept part only: halfwidth = 1.96 sqrt(S0ci / m) with S0ci =
 *    spectrum0.ar of the kept part (recomputed, not the second-half S0; 1.96 is fixed, it does not
 *    follow pvalue); passed when |halfwidth / Ybar| <= eps. The test is relative to the mean, so a
 *    zero-mean signal fails it.
 * 5. The reported statistic and p-value (1 - F(I)) are those of the last start tried, also when
 *    the test failed.
 *
 * Choices (where this departs from coda unless `codaExact: true`):
 * - F: coda sums the first 4 terms of the Anderson-Darling series (`pcramer`, exported below). That
 *   truncation is accurate where the decision is taken (I near 0.46) but turns down for I above
 *   about 3 (coda: F(10) = 0.9969, F(100) = 0.8175), so a grossly non-stationary series passes:
 *   on the committed AR(1) series with a +25 step at mid-run coda reports "passed" from the first
 *   start. The default sums the series until its terms vanish (`cramerVonMisesCdf`), which is
 *   monotone; the two agree to 1e-10 for I < 1.57, so decisions at any pvalue above 2e-4 and
 *   p-values below that I are unchanged.
 * - The constant check of spectrum0.ar is relative by default (see spectrum0-ar.ts).
 * - Where coda stops with an error or returns NaN (second half constant: S0 = 0), the result is
 *   `stationary: false` with `reliable: false`, null statistic and a note.
 *
 * Cost: up to 5 passes of O(n) for the statistic plus two spectrum0Ar fits, O(n * 10 log10 n) in
 *   all; O(n) memory. A batch test: run it on snapshots (e.g. when a warm-up window grows by 10 %),
 *   not per sample.
 * @throws RangeError when fewer than 4 values are given or eps/pvalue are out of range.
 */
export interface HeidelbergerWelchOptions {
  /** Relative half-width target of the half-width test (coda eps, default 0.1). */
  eps?: number;
  /** Significance level of the stationarity test (coda pvalue, default 0.05). */
  pvalue?: number;
  /** Reproduce coda exactly: 4-term pcramer and coda's absolute constant check. Default false. */
  codaExact?: boolean;
}

export interface HeidelbergerWelchResult {
  /** The stationarity test passed at some candidate start. */
  stationary: boolean;
  /** 0-based index of the first kept sample (coda's start - 1), or null when the test failed. */
  startIndex: number | null;
  /** Samples discarded before startIndex; n when the test failed (no part of the run is kept). */
  discarded: number;
  /** 1 - F(statistic) at the last start tried; null when undefined (S0 = 0). */
  pValue: number | null;
  /** Cramer-von Mises statistic I at the last start tried; null when undefined (S0 = 0). */
  statistic: number | null;
  /** Half-width test result; null when the stationarity test failed (or 0/0). */
  halfwidthPassed: boolean | null;
  /** Mean of the kept part; null when the stationarity test failed. */
  mean: number | null;
  /** 1.96 sqrt(S0ci / m) of the kept part; null when the stationarity test failed. */
  halfwidth: number | null;
  /** S0 of the second half, used for every candidate start. */
  secondHalfSpectrum: number;
  /** Number of candidate starts tested. */
  startsTried: number;
  /** False when the test could not be evaluated (see note). */
  reliable: boolean;
  note?: string;
}

const CODA_EPS_LOG = -Math.log(1e-5);

/** One term of the Anderson-Darling series for the Cramer-von Mises distribution function. */
function cramerTerm(k: number, q: number, uLimit: number): number {
  const u = (4 * k + 1) ** 2 / (16 * q);
  if (u > uLimit) return 0;
  // Gamma(k + 1/2) / Gamma(k + 1) by the recurrence from Gamma(1/2)/Gamma(1) = sqrt(pi).
  let gammaRatio = Math.sqrt(Math.PI);
  for (let j = 0; j < k; j++) gammaRatio *= (j + 0.5) / (j + 1);
  const z = (gammaRatio * Math.sqrt(4 * k + 1)) / (Math.PI ** 1.5 * Math.sqrt(q));
  // exp(-u) K_(1/4)(u) = exp(-2u) * (e^u K_(1/4)(u))
  return z * Math.exp(-2 * u) * besselKScaled(0.25, u);
}

/**
 * Distribution function of the Cramer-von Mises statistic exactly as coda's `pcramer(q)`
 * (eps = 1e-5): the first four terms of the series of T. W. Anderson & D. A. Darling (1952),
 * "Asymptotic theory of certain 'goodness of fit' criteria based on stochastic processes",
 * Ann. Math. Statist. 23(2), 193-212 (from memory):
 * F(q) = sum_(k=0..3) Gamma(k+1/2) sqrt(4k+1) / (Gamma(k+1) pi^(3/2) sqrt(q)) e^(-u) K_(1/4)(u),
 * u = (4k+1)^2 / (16 q), a term being 0 when u > -ln(1e-5). Returns 0 for q <= 0.
 * Not monotone above q ~ 3 (see heidelbergerWelch). Cost: 4 Bessel quadratures.
 */
export function pcramer(q: number): number {
  if (!(q > 0)) return 0;
  let sum = 0;
  for (let k = 0; k <= 3; k++) sum += cramerTerm(k, q, CODA_EPS_LOG);
  return sum;
}

/**
 * The same Anderson-Darling series summed until its terms are negligible (terms with u > 40 are
 * below 1e-35 and dropped, instead of coda's 4 terms and u > 11.51 cut), which converges to the
 * Cramer-von Mises distribution function and is monotone. It equals coda's `pcramer` to 1e-10 for
 * q < 1.57 (where coda's 4 terms are all the terms that its cut keeps). For q >= 10 it returns 1
 * (the upper tail there is of order exp(-pi^2 q / 2) < 1e-21). Cost: up to 20 Bessel quadratures.
 */
export function cramerVonMisesCdf(q: number): number {
  if (!(q > 0)) return 0;
  if (q >= 10) return 1;
  let sum = 0;
  for (let k = 0; ; k++) {
    const term = cramerTerm(k, q, 40);
    if (term === 0) break;
    sum += term;
  }
  return Math.min(1, sum);
}

/** R's seq(from = 1, to = n/2, by = n/10) for the candidate starts (coda's start.vec). */
function candidateStarts(n: number): number[] {
  const from = 1;
  const to = n / 2;
  const by = n / 10;
  const del = to - from;
  if (Math.abs(del) / Math.max(Math.abs(to), Math.abs(from)) < 100 * Number.EPSILON) return [from];
  const count = Math.trunc(del / by + 1e-10);
  const starts: number[] = [];
  for (let k = 0; k <= count; k++) starts.push(Math.min(from + k * by, to));
  return starts;
}

/**
 * First time (1-based) kept by coda's window.mcmc(x, start) on a chain whose times are
 * firstTime..lastTime (thin 1, ts.eps = 1e-5).
 */
function codaWindowStart(start: number, firstTime: number, lastTime: number): number {
  let s = start < firstTime ? firstTime : start;
  const nearest = Math.round(s);
  const hasTime = nearest >= firstTime && nearest <= lastTime && Math.abs(nearest - s) <= Math.abs(s) * 1e-5;
  if (!hasTime) s = Math.floor(s) + 1;
  return firstTime + Math.trunc(s - firstTime + 1.5) - 1;
}

export function heidelbergerWelch(values: ArrayLike<number>, options: HeidelbergerWelchOptions = {}): HeidelbergerWelchResult {
  const n = values.length;
  if (n < 4) throw new RangeError('heidelbergerWelch requires at least 4 samples');
  const eps = options.eps ?? 0.1;
  const pvalue = options.pvalue ?? 0.05;
  if (!(eps > 0)) throw new RangeError('heidelbergerWelch eps must be > 0');
  if (!(pvalue > 0 && pvalue < 1)) throw new RangeError('heidelbergerWelch pvalue must be in (0, 1)');
  const exact = options.codaExact === true;
  const spectrumOptions: Spectrum0ArOptions = exact ? { constantCheck: 'absolute' } : {};
  const cdf = exact ? pcramer : cramerVonMisesCdf;
  const data = values instanceof Float64Array ? values : Float64Array.from(values as ArrayLike<number>);

  const halfStart = codaWindowStart(n / 2, 1, n) - 1;
  const secondHalfSpectrum = spectrum0Ar(data.subarray(halfStart), spectrumOptions).spectrum;
  const starts = candidateStarts(n);

  const failed = (note: string, startsTried: number): HeidelbergerWelchResult => ({
    stationary: false, startIndex: null, discarded: n, pValue: null, statistic: null,
    halfwidthPassed: null, mean: null, halfwidth: null, secondHalfSpectrum, startsTried, reliable: false, note,
  });
  if (!(secondHalfSpectrum > 0) || !Number.isFinite(secondHalfSpectrum)) {
    return failed('second half is constant (spectral density at zero is 0): the Cramer-von Mises statistic is undefined', 0);
  }

  let firstTime = 1;
  let statistic = 0;
  let passed = false;
  let tried = 0;
  for (const start of starts) {
    firstTime = codaWindowStart(start, firstTime, n);
    tried++;
    const from = firstTime - 1;
    const m = n - from;
    const mean = correctedMean(data, from, n);
    let bridge = 0;
    let sumSquares = 0;
    for (let i = from; i < n; i++) {
      bridge += (data[i] as number) - mean;
      sumSquares += bridge * bridge;
    }
    statistic = sumSquares / (m * m * secondHalfSpectrum);
    if (cdf(statistic) < 1 - pvalue) {
      passed = true;
      break;
    }
  }
  const pValue = Math.min(1, Math.max(0, 1 - cdf(statistic)));
  if (!passed) {
    return {
      stationary: false, startIndex: null, discarded: n, pValue, statistic, halfwidthPassed: null,
      mean: null, halfwidth: null, secondHalfSpectrum, startsTried: tried, reliable: true,
    };
  }
  const startIndex = firstTime - 1;
  const kept = data.subarray(startIndex);
  const m = kept.length;
  const mean = correctedMean(kept);
  const halfwidth = 1.96 * Math.sqrt(spectrum0Ar(kept, spectrumOptions).spectrum / m);
  const ratio = Math.abs(halfwidth / mean);
  const halfwidthPassed = Number.isNaN(ratio) ? null : ratio <= eps;
  return {
    stationary: true, startIndex, discarded: startIndex, pValue, statistic, halfwidthPassed, mean, halfwidth,
    secondHalfSpectrum, startsTried: tried, reliable: true,
  };
}
