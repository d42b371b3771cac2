import { correctedMean } from './linear-residuals.js';
import { type Spectrum0ArOptions, spectrum0Ar } from './spectrum0-ar.js';

/**
 * Geweke's convergence diagnostic: a z-score comparing the mean of an early window with the mean of
 * a late window, each with its own autocorrelation-aware variance, as R coda's `geweke.diag`.
 *
 * Method: J. Geweke (1992), "Evaluating the accuracy of sampling-based approaches to the
 * calculation of posterior moments", in Bayesian Statistics 4 (J. M. Bernardo et al., eds.),
 * Oxford University Press, 169-193 (from memory). Implemented as coda 0.19-4 `geweke.diag` (code
 * read from the installed package), with times 1..n:
 * - window A = times 1 .. ceiling(1 + first (n - 1)); window B = times floor(n - last (n - 1)) .. n
 *   (for n = 10000 and the defaults 0.1 / 0.5: 1..1001 and 5000..10000);
 * - z = (mean_A - mean_B) / sqrt(S_A(0) / n_A + S_B(0) / n_B), each S(0) from spectrum0Ar on that
 *   window alone (its AR order chosen separately by AIC).
 * z is to be compared with the standard normal (e.g. |z| > 1.96 at 5 %); coda returns z only.
 * Choices: the constant check of spectrum0Ar is relative unless `codaExact: true` (see
 * spectrum0-ar.ts). When both windows have S(0) = 0 the z-score is undefined (coda gives NaN or
 * +-Inf): z is null and `reliable` false.
 * Cost: O(n * 10 log10 n) for the two AR fits; O(n) memory.
 * @throws RangeError when first/last are outside [0, 1], first + last > 1 (coda: "start and end
 *   sequences are overlapping"), or a window would hold fewer than 3 samples.
 */
export interface GewekeOptions {
  /** Fraction of the run in the early window (coda frac1, default 0.1). */
  first?: number;
  /** Fraction of the run in the late window (coda frac2, default 0.5). */
  last?: number;
  /** Use coda's absolute constant check in spectrum0Ar. Default false. */
  codaExact?: boolean;
}

export interface GewekeResult {
  /** (firstMean - lastMean) / sqrt(firstSpectrum / firstCount + lastSpectrum / lastCount); null when undefined. */
  z: number | null;
  firstMean: number;
  lastMean: number;
  firstCount: number;
  lastCount: number;
  /** S(0) of the early window. */
  firstSpectrum: number;
  /** S(0) of the late window. */
  lastSpectrum: number;
  /** AR orders chosen for the two windows. */
  firstOrder: number;
  lastOrder: number;
  /** 0-based index of the first sample of the late window (the early window starts at 0). */
  lastStartIndex: number;
  reliable: boolean;
  note?: string;
}

export function geweke(values: ArrayLike<number>, options: GewekeOptions = {}): GewekeResult {
  const first = options.first ?? 0.1;
  const last = options.last ?? 0.5;
  if (!(first >= 0 && first <= 1)) throw new RangeError('geweke first must be in [0, 1]');
  if (!(last >= 0 && last <= 1)) throw new RangeError('geweke last must be in [0, 1]');
  if (first + last > 1) throw new RangeError('geweke windows overlap: first + last must be <= 1');
  const n = values.length;
  // coda: xend[1] = ceiling(start + frac1 (end - start)), xstart[2] = floor(end - frac2 (end - start)).
  const firstEndTime = Math.ceil(1 + first * (n - 1));
  const lastStartTime = Math.floor(n - last * (n - 1));
  const firstCount = firstEndTime;
  const lastCount = n - lastStartTime + 1;
  if (firstCount < 3 || lastCount < 3) {
    throw new RangeError(`geweke requires windows of at least 3 samples (n = ${n} gives ${firstCount} and ${lastCount})`);
  }
  const data = values instanceof Float64Array ? values : Float64Array.from(values as ArrayLike<number>);
  const spectrumOptions: Spectrum0ArOptions = options.codaExact === true ? { constantCheck: 'absolute' } : {};
  const early = data.subarray(0, firstEndTime);
  const late = data.subarray(lastStartTime - 1);
  const firstFit = spectrum0Ar(early, spectrumOptions);
  const lastFit = spectrum0Ar(late, spectrumOptions);
  const firstMean = correctedMean(early);
  const lastMean = correctedMean(late);
  const variance = firstFit.spectrum / firstCount + lastFit.spectrum / lastCount;
  const base = {
    firstMean, lastMean, firstCount, lastCount, firstSpectrum: firstFit.spectrum, lastSpectrum: lastFit.spectrum,
    firstOrder: firstFit.order, lastOrder: lastFit.order, lastStartIndex: lastStartTime - 1,
  };
  if (!(variance > 0) || !Number.isFinite(variance)) {
    return { z: null, ...base, reliable: false, note: 'both windows are constant (S(0) = 0): the z-score is undefined' };
  }
  return { z: (firstMean - lastMean) / Math.sqrt(variance), ...base, reliable: true };
}
