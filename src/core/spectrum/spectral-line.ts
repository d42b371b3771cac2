import type { Periodogram } from './periodogram.js';

/**
 * A spectral line (a persistent periodic component: a controller's limit cycle, a pump's stroke, a
 * mains pickup) found by Fisher's g test on the periodogram, with its frequency and amplitude.
 *
 * Fisher's test (R. A. Fisher (1929), "Tests of significance in harmonic analysis", Proc. R. Soc.
 * Lond. A 125, 54-59; the statistic and its exact null distribution as given by M. B. Priestley
 * (1981), "Spectral Analysis and Time Series", section 6.1.4; from memory): with m ordinates
 * Y_1..Y_m that are independent Exp(1) under the null, g = max Y_j / sum Y_j and
 *   P(g > x) = sum_(k = 1 .. floor(1/x)) (-1)^(k-1) C(m, k) (1 - k x)^(m-1).
 * Fisher's null is white noise. A rig's noise is coloured (its spectrum falls away from zero
 * frequency), so the ordinates are first divided by a smooth background that one line moves little:
 * the geometric mean of the ordinates within +/- K_j of ordinate j (leaving out the two on each side
 * of it), times exp(Euler's gamma) (the mean of ln Exp(1) is -gamma), with K_j = j / 2 clamped to
 * [4, 32] so the window stays centred
 * and narrow where a red spectrum is steep (our choice, in the spirit of the prewhitening used in
 * practice). Ordinates below FIRST_CANDIDATE (fewer than 8 cycles in the segment) are not
 * candidates: a cycle that long is not averaged out in the window, it is a slow wander, which the
 * stationarity monitor and the Allan deviation judge.
 *
 * Amplitude: a sinusoid of amplitude A puts about N A^2 / 4 into the ordinates around its frequency
 * (split between neighbours when it falls between two), so the amplitude comes from the peak and its
 * two neighbours (sum of their excesses over the background, times 4 / N); the frequency by a
 * parabolic fit of the log ordinates around the peak (common practice).
 * Cost: O(m) (prefix sums of the log ordinates).
 */
export interface SpectralLine {
  /** Angular frequency, radians per sample. */
  frequency: number;
  /** Period in samples. */
  period: number;
  /** Amplitude of the sinusoid (data units). */
  amplitude: number;
  /** Fisher's g of the normalised ordinates. */
  g: number;
  /** P(g >= observed) under the null of no line. */
  pValue: number;
  /** After refinement on a window: x_t ~ mean + cosine cos(w t) + sine sin(w t), t the window index. */
  cosine?: number;
  sine?: number;
}

/** Largest half-width of the background window. */
export const BACKGROUND_HALF_WIDTH = 32;
/** First ordinate (cycles per segment) that may hold a line. */
export const FIRST_CANDIDATE = 8;
const EULER_GAMMA = 0.5772156649015329;

export function fisherGPValue(g: number, m: number): number {
  if (!(g > 0) || m < 2) return 1;
  if (g >= 1) return 0;
  let p = 0;
  let binomial = 1;
  const top = Math.floor(1 / g);
  for (let k = 1; k <= Math.min(top, m); k++) {
    binomial = (binomial * (m - k + 1)) / k;
    const term = binomial * (1 - k * g) ** (m - 1);
    p += k % 2 === 1 ? term : -term;
    if (term < 1e-300 && k > 2) break;
  }
  return Math.min(1, Math.max(0, p));
}

/** The most significant line, when its p-value is below `alpha`; null otherwise. */
export function findSpectralLine(periodogram: Periodogram, alpha = 1e-4): SpectralLine | null {
  const { ordinates, length } = periodogram;
  const m = ordinates.length;
  const first = FIRST_CANDIDATE - 1;
  if (m < first + 4 * BACKGROUND_HALF_WIDTH) return null;
  const background = smoothBackground(ordinates);
  let sum = 0;
  let peak = -1;
  let peakValue = -1;
  for (let i = first; i < m; i++) {
    const y = (ordinates[i] as number) / Math.max(background[i] as number, Number.MIN_VALUE);
    sum += y;
    if (y > peakValue) {
      peakValue = y;
      peak = i;
    }
  }
  const g = peakValue / sum;
  const pValue = fisherGPValue(g, m - first);
  if (!(pValue < alpha) || peak < 0) return null;
  let excess = 0;
  for (let i = Math.max(0, peak - 1); i <= Math.min(m - 1, peak + 1); i++) excess += Math.max(0, (ordinates[i] as number) - (background[i] as number));
  const amplitude = Math.sqrt((4 * excess) / length);
  let offset = 0;
  if (peak > 0 && peak < m - 1) {
    const a = Math.log(Math.max(ordinates[peak - 1] as number, Number.MIN_VALUE));
    const b = Math.log(Math.max(ordinates[peak] as number, Number.MIN_VALUE));
    const c = Math.log(Math.max(ordinates[peak + 1] as number, Number.MIN_VALUE));
    const curvature = a - 2 * b + c;
    if (curvature < 0) offset = Math.max(-0.5, Math.min(0.5, (0.5 * (a - c)) / curvature));
  }
  const frequency = (2 * Math.PI * (peak + 1 + offset)) / length;
  return { frequency, period: (2 * Math.PI) / frequency, amplitude, g, pValue };
}

/**
 * The local background of every ordinate: exp(gamma) times the geometric mean of the ordinates
 * within +/- K_j of it, leaving out the GAP ordinates on each side of it (a line between two Fourier
 * frequencies spreads over its neighbours, which must not raise its own background). O(m).
 */
export function smoothBackground(ordinates: Float64Array): Float64Array {
  const m = ordinates.length;
  const prefix = new Float64Array(m + 1);
  for (let i = 0; i < m; i++) prefix[i + 1] = (prefix[i] as number) + Math.log(Math.max(ordinates[i] as number, Number.MIN_VALUE));
  const sum = (from: number, to: number) => (to < from ? 0 : (prefix[to + 1] as number) - (prefix[from] as number));
  const out = new Float64Array(m);
  for (let i = 0; i < m; i++) {
    const j = i + 1;
    const half = Math.max(4, Math.min(BACKGROUND_HALF_WIDTH, Math.floor(j / 2))) + GAP;
    const from = Math.max(0, i - half);
    const to = Math.min(m - 1, i + half);
    const innerFrom = Math.max(from, i - GAP);
    const innerTo = Math.min(to, i + GAP);
    const count = to - from + 1 - (innerTo - innerFrom + 1);
    out[i] = Math.exp((sum(from, to) - sum(innerFrom, innerTo)) / Math.max(1, count) + EULER_GAMMA);
  }
  return out;
}

/** Ordinates on each side of a candidate left out of its background. */
const GAP = 2;
