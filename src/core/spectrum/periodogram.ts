import FFT from 'fft.js';

/**
 * Periodogram of the most recent 2^k samples of a window (k = floor(log2 n), so at least half of
 * it, and at most MAX_SEGMENT samples), at the Fourier frequencies lambda_j = 2 pi j / N, j = 1 .. N/2 - 1 (zero and Nyquist are
 * left out: the mean is removed, and the Nyquist ordinate has a different distribution).
 *
 * Normalisation: I_j = |sum_t (x_t - xbar) e^(-i lambda_j t)|^2 / N, so that E[I_j] ~ S(lambda_j)
 * with S(0) the long-run variance (Var(mean of N) ~ S(0) / N), the convention of the tau_int
 * estimators. For a stationary short-memory series the ordinates are asymptotically independent
 * with I_j / S(lambda_j) ~ Exp(1) (M. B. Priestley (1981), "Spectral Analysis and Time Series",
 * Academic Press, section 6.1; from memory).
 * Why the most recent power of two: an exact radix-2/4 transform at Fourier frequencies of the
 * segment (zero padding would correlate the ordinates the tests below assume independent).
 * Cost: O(N log N) time, 3N doubles of workspace per size, kept for the last four sizes used.
 */
export interface Periodogram {
  /** Segment length N (a power of two). */
  length: number;
  /** I_1 .. I_(N/2 - 1); ordinate j sits at index j - 1. */
  ordinates: Float64Array;
}

/**
 * Largest segment: 65,536 samples resolve lines and long memory with room to spare (a Whittle
 * bandwidth of 256 frequencies, standard error 0.03), and keep a refresh to a few milliseconds.
 */
export const MAX_SEGMENT = 65_536;

interface Tables {
  transform: FFT;
  input: Float64Array;
  output: Float64Array;
}

/** Transform tables kept for this many sizes (channels of different window lengths share a workspace). */
const KEPT_SIZES = 4;

export class PeriodogramWorkspace {
  private readonly tables = new Map<number, Tables>();

  /** Periodogram of the last 2^floor(log2 n) values; null below 16 values. */
  compute(values: ArrayLike<number>): Periodogram | null {
    const n = values.length;
    if (n < 16) return null;
    let size = 1;
    while (size * 2 <= n && size < MAX_SEGMENT) size *= 2;
    const tables = this.prepare(size);
    const from = n - size;
    let mean = 0;
    for (let i = from; i < n; i++) mean += values[i] as number;
    mean /= size;
    let correction = 0;
    for (let i = from; i < n; i++) correction += (values[i] as number) - mean;
    mean += correction / size;
    const { input, output, transform } = tables;
    for (let i = 0; i < size; i++) input[i] = (values[from + i] as number) - mean;
    transform.realTransform(output as unknown as number[], input as unknown as number[]);
    const count = size / 2 - 1;
    const ordinates = new Float64Array(count);
    for (let j = 1; j <= count; j++) {
      const re = output[2 * j] as number;
      const im = output[2 * j + 1] as number;
      ordinates[j - 1] = (re * re + im * im) / size;
    }
    return { length: size, ordinates };
  }

  private prepare(size: number): Tables {
    let tables = this.tables.get(size);
    if (tables) {
      // Most recently used last.
      this.tables.delete(size);
      this.tables.set(size, tables);
      return tables;
    }
    tables = { transform: new FFT(size), input: new Float64Array(size), output: new Float64Array(2 * size) };
    this.tables.set(size, tables);
    if (this.tables.size > KEPT_SIZES) this.tables.delete(this.tables.keys().next().value as number);
    return tables;
  }
}

/** Fourier frequency of ordinate index i (ordinate j = i + 1) of a periodogram of length N. */
export function ordinateFrequency(index: number, length: number): number {
  return (2 * Math.PI * (index + 1)) / length;
}
