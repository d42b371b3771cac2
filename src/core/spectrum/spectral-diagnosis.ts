import { type Periodogram } from './periodogram.js';
import { findSpectralLine, type SpectralLine } from './spectral-line.js';
import { localWhittle, type LongMemoryEstimate } from './local-whittle.js';
import { fitAutoregression } from '../tau/autoregressive-spectrum.js';
import { laggedProductSums } from '../acf/direct-autocovariance.js';
import { goldenSection } from '../numeric/golden-section.js';

/**
 * What the periodogram says about a window that the autocovariance at short lags cannot: spectral
 * lines (a limit cycle: periodic, so it averages out at a rate a short-memory estimator misreads)
 * and long memory (a spectrum that rises without bound towards zero frequency, so the mean
 * converges more slowly than 1 / sqrt(n) and no short-memory estimator is calibrated).
 *
 * Lines: Fisher's g test (spectral-line.ts) at alpha = 1e-6 (the diagnosis runs many times over a
 * channel's life), up to MAX_LINES lines (harmonics of one cycle), each line's ordinates replaced by
 * the background before the next search; a line must carry at least MIN_LINE_SHARE of the window's
 * variance to matter for the mean's uncertainty (smaller ones are reported, not removed).
 * Long memory: the local Whittle estimate of d (local-whittle.ts) on the line-free periodogram
 * divided by the spectral shape of a short-memory autoregression fitted with the BIC penalty
 * (G. Schwarz (1978), "Estimating the dimension of a model", Ann. Statist. 6(2), 461-464; a
 * stricter penalty than AIC, so that the autoregression does not absorb the long memory), bandwidth
 * m = N^0.5. Long memory is declared when d - 3.5 se > 0 (one-sided, about 2e-4). The Hurst exponent
 * reported is the raw (not prewhitened) local Whittle estimate with bandwidth N^0.65, which is what
 * the variance of the mean follows at long range. Measured (bench/study/spectral.js, and
 * test/core/coverage.test.ts): declared on fractional Gaussian noise with H = 0.8 in 996 of 1000
 * windows of 16,384 samples; never on AR(1) up to phi = 0.999, ARMA(1,1) or AR(2).
 * Lines found are refined on the whole window (refineLine: frequency and amplitude by least squares
 * at the peak), when the caller passes the window's values.
 * Long memory is looked for only in segments of at least LONG_MEMORY_SEGMENT samples (a Whittle
 * bandwidth of 45 frequencies): on shorter ones the estimate is too loose to be worth a verdict.
 * Cost: O(m) for the line background, O(n) per refinement step, O(N^0.65) per Whittle evaluation,
 *   O(p^2) for the BIC fit from the caller's autocovariance; the periodogram itself is the
 *   caller's (O(N log N)).
 */
export interface SpectralDiagnosis {
  /** Samples in the periodogram segment. */
  segment: number;
  /** Lines that matter (removed from the autocovariance before the autoregression). */
  lines: SpectralLine[];
  /**
   * With lines: the noise under them, S(0) and its log variance (for nu) from an autoregression of
   * the most recent segment with the fitted sinusoids subtracted from the samples (removing them
   * from the autocovariance instead leaves the noise-by-line cross terms, which bias S(0) up).
   */
  lineFreeNoise: { spectrumAtZero: number; logSpectrumVariance: number; order: number } | null;
  longMemory: (LongMemoryEstimate & { detected: boolean }) | null;
}

export const LINE_ALPHA = 1e-6;
export const MAX_LINES = 3;
/** A line's power A^2 / 2 against the window's variance below which it is left in. */
export const MIN_LINE_SHARE = 0.02;
const LONG_MEMORY_SE = 3.5;
/** Smallest periodogram segment long memory is judged on. */
export const LONG_MEMORY_SEGMENT = 2048;

export function diagnoseSpectrum(periodogram: Periodogram, gamma: ArrayLike<number>, n: number, variance: number, windowValues?: Float64Array): SpectralDiagnosis {
  // Lines are refined, and the noise under them fitted, on the periodogram's own segment (the most
  // recent samples, at most 65,536): O(segment) per step whatever the window's length.
  const values = windowValues?.subarray(windowValues.length - periodogram.length);
  const ordinates = periodogram.ordinates.slice();
  const working: Periodogram = { length: periodogram.length, ordinates };
  const lines: SpectralLine[] = [];
  for (let i = 0; i < MAX_LINES; i++) {
    const found = findSpectralLine(working, LINE_ALPHA);
    if (!found) break;
    flattenLine(ordinates, found, working.length);
    const line = values ? refineLine(values, found, working.length) : found;
    if ((line.amplitude * line.amplitude) / 2 < MIN_LINE_SHARE * variance) break;
    lines.push(line);
  }
  let lineFreeNoise: SpectralDiagnosis['lineFreeNoise'] = null;
  if (lines.length > 0 && values && lines.every((l) => l.cosine !== undefined)) lineFreeNoise = residualNoise(values, lines);
  const fit = fitAutoregression(lines.length > 0 ? removeLines(gamma, n, lines) : gamma, n, Number.POSITIVE_INFINITY, Math.log(n));
  const coefficients = fit?.coefficients ?? new Float64Array(0);
  const shape = (lambda: number): number => {
    let re = 1;
    let im = 0;
    for (let k = 0; k < coefficients.length; k++) {
      re -= (coefficients[k] as number) * Math.cos((k + 1) * lambda);
      im += (coefficients[k] as number) * Math.sin((k + 1) * lambda);
    }
    return 1 / (re * re + im * im);
  };
  const prewhitened = localWhittle(working, shape, 0.5);
  const raw = localWhittle(working, undefined, 0.65);
  // Stationary long memory has 0 < d < 1/2; an estimate at or beyond 1/2 is a level that wanders
  // without bound (a trend or a random walk, which the stationarity tests judge), and a degenerate
  // low-frequency periodogram (an alternating series has almost no power there) can push the
  // estimate to the edge of its search: neither is called long memory.
  const stationaryRange = raw !== null && raw.d > 0 && raw.d < 0.49 && prewhitened !== null && prewhitened.d < 0.49;
  const longMemory = prewhitened && raw ? { ...raw, detected: periodogram.length >= LONG_MEMORY_SEGMENT && stationaryRange && prewhitened.d - LONG_MEMORY_SE * prewhitened.standardError > 0 } : null;
  return { segment: periodogram.length, lines, lineFreeNoise, longMemory };
}

/** The autoregressive S(0) of the values with the lines' sinusoids subtracted. O(values order). */
function residualNoise(values: ArrayLike<number>, lines: readonly SpectralLine[]): SpectralDiagnosis['lineFreeNoise'] {
  const n = values.length;
  const m = n;
  const from = 0;
  let mean = 0;
  for (let t = 0; t < n; t++) mean += values[t] as number;
  mean /= n;
  const residual = new Float64Array(m);
  for (let i = 0; i < m; i++) {
    const t = from + i;
    let r = (values[t] as number) - mean;
    for (const line of lines) r -= (line.cosine as number) * Math.cos(line.frequency * t) + (line.sine as number) * Math.sin(line.frequency * t);
    residual[i] = r;
  }
  let rm = 0;
  for (const v of residual) rm += v;
  rm /= m;
  for (let i = 0; i < m; i++) residual[i] = (residual[i] as number) - rm;
  const maxLag = Math.min(64, m - 2, Math.floor(10 * Math.log10(m)));
  const gamma = laggedProductSums(residual, maxLag);
  for (let k = 0; k <= maxLag; k++) gamma[k] = (gamma[k] as number) / m;
  const fit = fitAutoregression(gamma, m);
  return fit ? { spectrumAtZero: fit.spectrumAtZero, logSpectrumVariance: fit.logSpectrumVariance, order: fit.order } : null;
}

/**
 * The line's frequency and amplitude from the segment's samples by least squares rather than from
 * the periodogram's ordinates: the frequency maximising |sum (x_t - xbar) e^(-i w t)| within one segment bin of the periodogram's
 * estimate (golden section, 24 steps), the amplitude 2 |sum| / n there (least squares for a
 * sinusoid at a known frequency, n much longer than the period). A frequency between two Fourier
 * frequencies leaks into many ordinates, so the periodogram's amplitude falls short by up to a
 * sixth; this does not. Cost: O(n) per step.
 */
function refineLine(values: ArrayLike<number>, line: SpectralLine, segment: number): SpectralLine {
  const n = values.length;
  let mean = 0;
  for (let t = 0; t < n; t++) mean += values[t] as number;
  mean /= n;
  const power = (w: number): number => {
    let re = 0;
    let im = 0;
    // cos and sin of w t by rotation (no trigonometry per sample), re-seeded every 1024 samples.
    let c = 1;
    let s = 0;
    const cw = Math.cos(w);
    const sw = Math.sin(w);
    for (let t = 0; t < n; t++) {
      if ((t & 1023) === 0) {
        c = Math.cos(w * t);
        s = Math.sin(w * t);
      }
      const d = (values[t] as number) - mean;
      re += d * c;
      im -= d * s;
      const next = c * cw - s * sw;
      s = s * cw + c * sw;
      c = next;
    }
    return re * re + im * im;
  };
  const bin = (2 * Math.PI) / segment;
  const frequency = goldenSection(power, line.frequency - bin, line.frequency + bin, 24, 'max');
  let cosine = 0;
  let sine = 0;
  for (let t = 0; t < n; t++) {
    const d = (values[t] as number) - mean;
    cosine += d * Math.cos(frequency * t);
    sine += d * Math.sin(frequency * t);
  }
  cosine *= 2 / n;
  sine *= 2 / n;
  return { ...line, frequency, period: (2 * Math.PI) / frequency, amplitude: Math.hypot(cosine, sine), cosine, sine };
}

/** Replaces the ordinates of a found line (the peak and two neighbours each side) by the median of those around them. */
function flattenLine(ordinates: Float64Array, line: SpectralLine, length: number): void {
  const centre = Math.round((line.frequency * length) / (2 * Math.PI)) - 1;
  const around: number[] = [];
  for (let i = centre - 10; i <= centre + 10; i++) if ((i < centre - 2 || i > centre + 2) && i >= 0 && i < ordinates.length) around.push(ordinates[i] as number);
  around.sort((a, b) => a - b);
  const median = around.length > 0 ? (around[Math.floor(around.length / 2)] as number) / Math.LN2 : 0;
  for (let i = centre - 2; i <= centre + 2; i++) if (i >= 0 && i < ordinates.length) ordinates[i] = median;
}

/**
 * The autocovariance with the lines' contribution removed: a sinusoid of amplitude A at angular
 * frequency w adds (A^2 / 2) cos(w k) (n - k) / n to the biased autocovariance at lag k.
 */
export function removeLines(gamma: ArrayLike<number>, n: number, lines: readonly SpectralLine[]): Float64Array {
  const out = Float64Array.from(gamma as ArrayLike<number>);
  for (const line of lines) {
    const power = (line.amplitude * line.amplitude) / 2;
    for (let k = 0; k < out.length; k++) out[k] = (out[k] as number) - (power * Math.cos(line.frequency * k) * (n - k)) / n;
  }
  return out;
}

/**
 * Variance a spectral line adds to the mean of `blockSize` consecutive samples, for a random phase:
 * (A^2 / 2) (sin(w b / 2) / (b sin(w / 2)))^2 (the Fejer kernel at the line's frequency). O(lines).
 */
export function linesBlockVariance(lines: readonly SpectralLine[], blockSize: number): number {
  let total = 0;
  for (const line of lines) {
    const w = line.frequency;
    const ratio = Math.sin((w * blockSize) / 2) / (blockSize * Math.sin(w / 2));
    total += ((line.amplitude * line.amplitude) / 2) * ratio * ratio;
  }
  return total;
}
