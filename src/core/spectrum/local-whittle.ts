import type { Periodogram } from './periodogram.js';
import { goldenSection } from '../numeric/golden-section.js';

/**
 * Long memory: the memory parameter d (Hurst exponent H = d + 1/2) by the local Whittle estimator.
 *
 * Method: P. M. Robinson (1995), "Gaussian semiparametric estimation of long range dependence",
 * Annals of Statistics 23(5), 1630-1661 (from memory): with the periodogram I_j at the m lowest
 * Fourier frequencies lambda_j, d minimises
 *   R(d) = ln( (1/m) sum_j lambda_j^(2d) I_j ) - (2d / m) sum_j ln lambda_j,
 * and sqrt(m) (d_hat - d) -> N(0, 1/4), so its standard error is 1 / (2 sqrt(m)).
 * Choices:
 * - Short memory with a strong low-frequency rise (AR(1) at phi = 0.99) looks like long memory to
 *   the raw estimator. The ordinates are therefore divided first by the spectral shape of the
 *   channel's fitted short-memory model (`shape`, e.g. 1 / |1 - sum phi_k e^(-i k lambda)|^2 from
 *   the AR fit), so d measures the memory the short-memory model does not explain (the
 *   "prewhitened" local Whittle; our choice, after the AR-prewhitening of semiparametric
 *   estimators discussed in the long-memory literature).
 * - m = floor(N^0.65) (a common bandwidth choice; Robinson's theory needs m -> inf, m / N -> 0).
 * - d is searched on [-0.49, 0.99] by golden section (core/numeric/golden-section.ts; R(d) is
 *   smooth and unimodal in practice).
 * Cost: O(m) per evaluation of R (one exp per frequency), about 40 evaluations (golden section to 1e-8 in d); plus the caller's shape.
 */
export interface LongMemoryEstimate {
  /** Memory parameter d = H - 1/2 (0 for short memory). */
  d: number;
  hurst: number;
  standardError: number;
  /** Frequencies used. */
  m: number;
}

export function localWhittle(periodogram: Periodogram, shape?: (lambda: number) => number, bandwidthExponent = 0.65): LongMemoryEstimate | null {
  const { ordinates, length } = periodogram;
  const m = Math.min(ordinates.length, Math.floor(length ** bandwidthExponent));
  if (m < 8) return null;
  const logs = new Float64Array(m);
  const y = new Float64Array(m);
  let meanLog = 0;
  for (let j = 0; j < m; j++) {
    const lambda = (2 * Math.PI * (j + 1)) / length;
    logs[j] = Math.log(lambda);
    y[j] = (ordinates[j] as number) / (shape ? Math.max(shape(lambda), Number.MIN_VALUE) : 1);
    meanLog += logs[j] as number;
  }
  meanLog /= m;
  // ln lambda_j - mean, once: each evaluation of R then costs one exp per frequency.
  for (let j = 0; j < m; j++) logs[j] = (logs[j] as number) - meanLog;
  const objective = (d: number): number => {
    let s = 0;
    for (let j = 0; j < m; j++) s += Math.exp(2 * d * (logs[j] as number)) * (y[j] as number);
    return Math.log(s / m);
  };
  const d = goldenSection(objective, -0.49, 0.99, 40, 'min');
  return { d, hurst: d + 0.5, standardError: 1 / (2 * Math.sqrt(m)), m };
}
