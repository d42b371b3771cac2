import { type TauEstimate, tauFloor, lagWindowEstimate } from './tau-estimate.js';

/**
 * Integrated autocorrelation time by Sokal's automatic window.
 *
 * tau(M) = 1 + 2 * sum_{k=1}^{M} rho_k, with rho_k the biased sample autocorrelation, and the
 * window M is the smallest M with M >= c * tau(M) (c = 5 by default).
 * Method: A. D. Sokal (1997), "Monte Carlo methods in statistical mechanics: foundations and new
 * algorithms", in Functional Integration (Cargese 1996), NATO ASI Series B 361, 131-192, section 3
 * (after N. Madras & A. D. Sokal (1988), J. Stat. Phys. 50, 109-186). The same rule as emcee's
 * `autocorr.integrated_time` (D. Foreman-Mackey et al. (2013), PASP 125, 306).
 * Degrees of freedom: the window estimate of the spectrum at zero has relative variance
 * 2 * (2M + 1) / n (Madras & Sokal 1988, eq. 2.20 there), hence nu = n / (2M + 1).
 *
 * Cost: O(M) given the autocovariance; needs the autocovariance up to lag M, which may exceed the
 *   maintained lags: then it returns `needsLags` and the caller supplies an FFT autocovariance.
 */
export interface SokalOptions {
  /** Window constant c. */
  c?: number;
}

export function sokalWindow(
  gamma: ArrayLike<number>,
  n: number,
  sampleVariance: number,
  complete: boolean,
  options: SokalOptions = {},
): TauEstimate | { needsLags: true } {
  const c = options.c ?? 5;
  const gamma0 = gamma[0] as number;
  if (!(gamma0 > 0) || n < 2) {
    return { method: 'sokal', tauInt: 1, varianceOfMean: 0, dof: Math.max(0, n - 1), window: 0, reliable: false, note: 'constant window: no variation to estimate' };
  }
  const available = gamma.length - 1;
  let tau = 1;
  let window = -1;
  if (0 >= c * tau) window = 0;
  for (let m = 1; m <= available && window < 0; m++) {
    tau += (2 * (gamma[m] as number)) / gamma0;
    if (m >= c * tau) window = m;
  }
  if (window < 0) {
    if (!complete && available < n - 1) return { needsLags: true };
    window = available; // emcee returns the last lag when no window qualifies
  }
  const floor = tauFloor(n);
  const reliable = window < available || complete ? n >= 50 * Math.max(tau, 1) : false;
  const tauInt = Math.max(tau, floor);
  return lagWindowEstimate('sokal', tauInt, sampleVariance, n, window, reliable);
}
