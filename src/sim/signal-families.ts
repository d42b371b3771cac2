import FFT from 'fft.js';
import { SeededRandom } from '../core/random/seeded-random.js';

/**
 * Seeded generators of the signal shapes real rigs produce, for the coverage, false-alarm and
 * warm-up studies (tests and benchmarks) and the demo. Every series is stationary unless its name
 * says otherwise, has mean 0 unless given, and is started in equilibrium where the process has
 * one. Deterministic given the generator's state.
 *
 * The long-run (spectral density at zero) variance of each is given where it has a closed form,
 * so that studies can state the true standard deviation of a mean: sigma_inf^2 = sum over all lags
 * of the autocovariance, Var(mean of n) ~ sigma_inf^2 / n (standard results for ARMA processes,
 * e.g. P. J. Brockwell & R. A. Davis (1991), "Time Series: Theory and Methods", 2nd ed., Springer,
 * section 3.3 and 7.1; from memory).
 */

/** Innovations: standard normal, or Student t with 3 degrees of freedom scaled to unit variance (heavy tails). */
export type Innovations = 'normal' | 't3';

function innovation(random: SeededRandom, kind: Innovations): number {
  if (kind === 'normal') return random.normal();
  // t(3) = Z / sqrt(chi2(3) / 3); its variance is 3, so divide by sqrt(3).
  const z = random.normal();
  const a = random.normal();
  const b = random.normal();
  const c = random.normal();
  return z / Math.sqrt((a * a + b * b + c * c) / 3) / Math.sqrt(3);
}

/** x_t = phi x_(t-1) + e_t. Long-run variance sigma^2 / (1 - phi)^2. */
export function ar1(random: SeededRandom, phi: number, n: number, options: { sigma?: number; innovations?: Innovations } = {}): Float64Array {
  const sigma = options.sigma ?? 1;
  const kind = options.innovations ?? 'normal';
  const out = new Float64Array(n);
  let x = (random.normal() * sigma) / Math.sqrt(1 - phi * phi);
  for (let i = 0; i < n; i++) {
    out[i] = x;
    x = phi * x + sigma * innovation(random, kind);
  }
  return out;
}

/** x_t = phi x_(t-1) + e_t + theta e_(t-1). Long-run variance sigma^2 (1 + theta)^2 / (1 - phi)^2. */
export function arma11(random: SeededRandom, phi: number, theta: number, n: number, sigma = 1): Float64Array {
  const out = new Float64Array(n);
  // Started after a burn-in of 20 / (1 - |phi|) steps (equilibrium to well below 1e-8).
  const burn = Math.ceil(20 / (1 - Math.abs(phi)));
  let x = 0;
  let previous = 0;
  for (let i = -burn; i < n; i++) {
    const e = sigma * random.normal();
    x = phi * x + e + theta * previous;
    previous = e;
    if (i >= 0) out[i] = x;
  }
  return out;
}

/**
 * AR(2) with complex roots of modulus r at angle omega (a damped oscillation, as from a ringing
 * controller): x_t = 2 r cos(omega) x_(t-1) - r^2 x_(t-2) + e_t. Long-run variance
 * sigma^2 / (1 - phi1 - phi2)^2.
 */
export function ar2Complex(random: SeededRandom, r: number, omega: number, n: number, sigma = 1): Float64Array {
  const phi1 = 2 * r * Math.cos(omega);
  const phi2 = -r * r;
  const out = new Float64Array(n);
  const burn = Math.ceil(40 / (1 - r));
  let x1 = 0;
  let x2 = 0;
  for (let i = -burn; i < n; i++) {
    const x = phi1 * x1 + phi2 * x2 + sigma * random.normal();
    x2 = x1;
    x1 = x;
    if (i >= 0) out[i] = x;
  }
  return out;
}

/** AR(2) coefficients of ar2Complex(r, omega). */
export function ar2Coefficients(r: number, omega: number): [number, number] {
  return [2 * r * Math.cos(omega), -r * r];
}

/**
 * A limit cycle: amplitude * sin(2 pi t / period + phase) plus AR(1) noise (phi, sigma), the phase
 * uniform on [0, 2 pi) (drawn from the generator). The sinusoid's contribution to the variance of
 * a mean of n samples is O(1 / n^2), so the long-run variance is the noise's alone.
 */
export function limitCycle(random: SeededRandom, n: number, options: { amplitude: number; period: number; phi?: number; sigma?: number }): Float64Array {
  const phase = 2 * Math.PI * random.uniform();
  const out = ar1(random, options.phi ?? 0, n, { sigma: options.sigma ?? 1 });
  const w = (2 * Math.PI) / options.period;
  for (let i = 0; i < n; i++) out[i] = (out[i] as number) + options.amplitude * Math.sin(w * i + phase);
  return out;
}

/** Autocovariance of unit-variance fractional Gaussian noise at lag k: (|k+1|^2H - 2|k|^2H + |k-1|^2H) / 2. */
export function fgnAutocovariance(hurst: number, k: number): number {
  const h2 = 2 * hurst;
  const a = Math.abs(k);
  return 0.5 * (Math.abs(a + 1) ** h2 - 2 * a ** h2 + Math.abs(a - 1) ** h2);
}

/**
 * Fractional Gaussian noise with Hurst exponent H (unit variance), exact by circulant embedding
 * (R. B. Davies & D. S. Harte (1987), "Tests for Hurst effect", Biometrika 74(1), 95-101; the
 * complex-normal form of C. R. Dietrich & G. N. Newsam (1997), SIAM J. Sci. Comput. 18(4),
 * 1088-1107; both from memory). Long memory for H > 1/2: Var(mean of n) = n^(2H - 2) exactly.
 * Cost: two FFTs of size 2^ceil(log2 n) * 2.
 */
export function fractionalGaussianNoise(random: SeededRandom, hurst: number, n: number): Float64Array {
  let half = 1;
  while (half < n) half *= 2;
  const size = 2 * half;
  const { fft, eigen } = circulantEigenvalues(hurst, size);
  const input = fft.createComplexArray() as number[];
  for (let k = 0; k < size; k++) {
    const lambda = Math.max(0, eigen[2 * k] as number);
    const scale = Math.sqrt(lambda / size);
    input[2 * k] = scale * random.normal();
    input[2 * k + 1] = scale * random.normal();
  }
  const output = fft.createComplexArray() as number[];
  fft.transform(output, input);
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) out[i] = output[2 * i] as number;
  return out;
}

/** The embedding's transform and eigenvalues depend only on H and the size: kept for the last few. */
const EIGEN_CACHE = new Map<string, { fft: FFT; eigen: number[] }>();

function circulantEigenvalues(hurst: number, size: number): { fft: FFT; eigen: number[] } {
  const key = `${hurst}:${size}`;
  let entry = EIGEN_CACHE.get(key);
  if (entry) return entry;
  const half = size / 2;
  const fft = new FFT(size);
  const row = fft.createComplexArray() as number[];
  for (let k = 0; k <= half; k++) row[2 * k] = fgnAutocovariance(hurst, k);
  for (let k = half + 1; k < size; k++) row[2 * k] = fgnAutocovariance(hurst, size - k);
  const eigen = fft.createComplexArray() as number[];
  fft.transform(eigen, row);
  entry = { fft, eigen };
  if (EIGEN_CACHE.size >= 4) EIGEN_CACHE.delete(EIGEN_CACHE.keys().next().value as string);
  EIGEN_CACHE.set(key, entry);
  return entry;
}

/** Readings rounded to a lattice of `step` (an indication's resolution), in place. */
export function quantise(values: Float64Array, step: number, offset = 0): Float64Array {
  for (let i = 0; i < values.length; i++) values[i] = offset + step * Math.round(((values[i] as number) - offset) / step);
  return values;
}

/**
 * An exponential approach to `level` from `level + amplitude` (heating when amplitude < 0, cooling
 * when > 0) with time constant `timeConstant` samples, added to `noise` (in place).
 */
export function exponentialWarmup(noise: Float64Array, level: number, amplitude: number, timeConstant: number): Float64Array {
  for (let i = 0; i < noise.length; i++) noise[i] = level + amplitude * Math.exp(-i / timeConstant) + (noise[i] as number);
  return noise;
}
