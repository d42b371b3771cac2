import FFT from 'fft.js';

/**
 * Autocovariance of a whole window by the fast Fourier transform, for lags beyond the maintained
 * lagged products.
 *
 * The Wiener-Khinchin route: subtract the mean, zero-pad to a power of two of at least 2n (so the
 * circular correlation equals the linear one), transform, take |F|^2, transform back, divide by n.
 * The result is the biased autocovariance (divisor n), identical to R `acf` and statsmodels
 * `acf(adjusted=False, fft=True)` and to the one emcee's `autocorr.function_1d` normalises.
 * J. W. Cooley & J. W. Tukey (1965), Math. Comp. 19, 297-301; the transform is fft.js (radix 4).
 *
 * Cost: O(n log n) time, 5 * 2^ceil(log2(2n)) doubles of workspace. One instance can serve every
 * channel of a process (it keeps only the transform tables and scratch space of the last size).
 */
export class AutocovarianceFft {
  private size = 0;
  private transform: FFT | null = null;
  private input: Float64Array = new Float64Array(0);
  private spectrum: Float64Array = new Float64Array(0);
  private back: Float64Array = new Float64Array(0);

  /**
   * Biased autocovariance of `values` at lags 0..maxLag (capped at n - 1).
   * `values` is not modified.
   */
  compute(values: ArrayLike<number>, maxLag: number): Float64Array {
    const n = values.length;
    if (n === 0) return new Float64Array(0);
    const lags = Math.min(maxLag, n - 1);
    this.prepare(n);
    const transform = this.transform as FFT;
    let mean = 0;
    for (let i = 0; i < n; i++) mean += values[i] as number;
    mean /= n;
    // Second pass corrects the mean for round-off (two-pass mean).
    let correction = 0;
    for (let i = 0; i < n; i++) correction += (values[i] as number) - mean;
    mean += correction / n;
    const input = this.input;
    for (let i = 0; i < n; i++) input[i] = (values[i] as number) - mean;
    input.fill(0, n);
    const spectrum = this.spectrum;
    transform.realTransform(spectrum as unknown as number[], input as unknown as number[]);
    transform.completeSpectrum(spectrum as unknown as number[]);

    // The power spectrum is real and even, so its inverse transform equals its forward real
    // transform divided by the size: one more real transform instead of a complex one.
    const power = this.input;
    const size = this.size;
    for (let j = 0; j < size; j++) {
      const re = spectrum[2 * j] as number;
      const im = spectrum[2 * j + 1] as number;
      power[j] = re * re + im * im;
    }
    const back = this.back;
    transform.realTransform(back as unknown as number[], power as unknown as number[]);
    const gamma = new Float64Array(lags + 1);
    for (let k = 0; k <= lags; k++) gamma[k] = (back[2 * k] as number) / (size * n);
    return gamma;
  }

  private prepare(n: number): void {
    let size = 4;
    while (size < 2 * n) size *= 2;
    if (size === this.size) return;
    this.size = size;
    this.transform = new FFT(size);
    this.input = new Float64Array(size);
    this.spectrum = new Float64Array(2 * size);
    this.back = new Float64Array(2 * size);
  }
}
