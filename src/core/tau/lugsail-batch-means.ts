import { type TauEstimate, tauFloor } from './tau-estimate.js';
import type { PyramidLevelStats } from '../window/block-pyramid.js';

/**
 * Variance of a windowed mean by lugsail batch means: batch means at two batch sizes combined so
 * that the leading 1/b bias of batch means cancels.
 *
 * Batch means underestimate the long-run variance by about (sum_k 2 k gamma_k) / b at batch size b
 * (so they undercover when b is only a few tau_int). The lugsail estimator (D. Vats & J. M. Flegal
 * (2022), "Lugsail lag windows for estimating time-average covariance matrices", Biometrika
 * 109(3), 735-750; from memory) takes sigma2_L = sigma2_b / (1 - c) - c sigma2_(b/r) / (1 - c); with
 * c = 1/2 the 1/b terms of the two cancel when r... (r = 2 here):
 *   sigma2_L = 2 sigma2_BM(b) - sigma2_BM(b/2),
 * which is Richardson extrapolation of the batch-means bias in 1/b. Vats and Flegal recommend
 * r = 3; the block pyramid holds powers of two, so r = 2 (our choice).
 * b: the pyramid level nearest sqrt(n) on a log scale (as batchMeans), at least 2.
 * Degrees of freedom: those of the batch means at b, batches - 1 (the combination has a little more
 * variance; not corrected).
 * Cost: O(1) from the pyramid's level statistics. The estimate is floored at the batch means at b/2
 *   and at tauFloor, so a noisy negative combination cannot make the uncertainty vanish.
 */
export function lugsailBatchMeans(input: { n: number; sampleVariance: number; levels: PyramidLevelStats[] }): TauEstimate {
  const { n, sampleVariance, levels } = input;
  if (!(sampleVariance > 0) || n < 8) {
    return { method: 'lugsail', tauInt: 1, varianceOfMean: n > 0 ? sampleVariance / n : 0, dof: Math.max(0, n - 1), window: 1, reliable: false, note: !(sampleVariance > 0) ? 'constant window: no variation to estimate' : 'fewer than eight samples' };
  }
  let j = Math.max(1, Math.round(Math.log2(Math.sqrt(n))));
  while (j > 1 && !((levels[j]?.count ?? 0) >= 2)) j--;
  const coarse = levels[j];
  const fine = levels[j - 1];
  if (!coarse || !fine || coarse.count < 2 || fine.count < 2) {
    return { method: 'lugsail', tauInt: 1, varianceOfMean: sampleVariance / n, dof: n - 1, window: 1, reliable: false, note: 'too few batches' };
  }
  const sigma = (level: PyramidLevelStats) => (level.blockSize * level.biasedVariance * level.count) / (level.count - 1);
  const combined = Math.max(2 * sigma(coarse) - sigma(fine), sigma(fine));
  const tauInt = Math.max(combined / sampleVariance, tauFloor(n));
  const reliable = coarse.count >= 8;
  return {
    method: 'lugsail',
    tauInt,
    varianceOfMean: (sampleVariance * tauInt) / n,
    dof: Math.max(1, coarse.count - 1),
    window: coarse.blockSize,
    reliable,
    ...(reliable ? {} : { note: 'fewer than eight batches' }),
  };
}
