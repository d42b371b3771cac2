import { type TauEstimate, tauFloor, lagWindowEstimate } from './tau-estimate.js';

/**
 * Integrated autocorrelation time by Geyer's initial monotone sequence estimator.
 *
 * With Gamma_m = gamma_(2m) + gamma_(2m+1) (sums of adjacent pairs of the biased autocovariance),
 * the initial positive sequence keeps Gamma_0 .. Gamma_m* while they are positive; the initial
 * monotone sequence then replaces each Gamma_m by min(Gamma_m, Gamma_(m-1)). The long-run
 * variance is sigma^2 = -gamma_0 + 2 * sum Gamma_m and tau_int = sigma^2 / gamma_0.
 * Method: C. J. Geyer (1992), "Practical Markov chain Monte Carlo", Statistical Science 7(4),
 * 473-483, section 3.3.
 * Degrees of freedom: treated as a truncated window of M = 2m* + 1 lags, nu = n / (2M + 1), as for
 *   Sokal's window (an approximation; the sequence's own truncation is data-driven).
 *
 * Cost: O(M) given the autocovariance; returns `needsLags` when the sequence is still positive at
 *   the last available lag and more lags exist.
 */
export function geyerMonotone(
  gamma: ArrayLike<number>,
  n: number,
  sampleVariance: number,
  complete: boolean,
): TauEstimate | { needsLags: true } {
  const gamma0 = gamma[0] as number;
  if (!(gamma0 > 0) || n < 4) {
    return { method: 'geyer', tauInt: 1, varianceOfMean: n > 0 ? sampleVariance / n : 0, dof: Math.max(0, n - 1), window: 0, reliable: false, note: n < 4 ? 'fewer than four samples' : 'constant window: no variation to estimate' };
  }
  const available = gamma.length - 1;
  let sum = 0;
  let previous = Number.POSITIVE_INFINITY;
  let lastPair = -1;
  let ended = false;
  for (let m = 0; 2 * m + 1 <= available; m++) {
    let pair = (gamma[2 * m] as number) + (gamma[2 * m + 1] as number);
    if (!(pair > 0)) {
      ended = true;
      break;
    }
    if (pair > previous) pair = previous;
    previous = pair;
    sum += pair;
    lastPair = m;
  }
  if (!ended && !complete && available < n - 1) return { needsLags: true };
  if (lastPair < 0) {
    // gamma_0 + gamma_1 <= 0: as anticorrelated as a series can be; use the floor.
    const tauInt = tauFloor(n);
    return { method: 'geyer', tauInt, varianceOfMean: (sampleVariance * tauInt) / n, dof: n / 3, window: 1, reliable: false, note: 'lag-one autocorrelation near -1' };
  }
  const tau = (-gamma0 + 2 * sum) / gamma0;
  const tauInt = Math.max(tau, tauFloor(n));
  const window = 2 * lastPair + 1;
  const reliable = n >= 50 * Math.max(tauInt, 1);
  return lagWindowEstimate('geyer', tauInt, sampleVariance, n, window, reliable);
}
