// The verdict on the signal families real rigs produce: warm-ups inside a growing window. Shared by
// bench/verdict.js (figures) and the must-show test (test/engine/verdict-families.test.ts).
import { SeededRandom } from '../dist/core/random/seeded-random.js';
import * as F from '../dist/sim/signal-families.js';

/**
 * Exponential warm-up families: a record of N samples, AR(1) noise (phi, unit innovations), heating
 * or cooling with time constant T = N / tf. The amplitude is set by when the rig settles: the
 * transient falls to a quarter of the final standard uncertainty of the mean (sigma_inf /
 * sqrt((1 - s) N)) at the fraction s of the record, so A = u / 4 * exp(s N / T). Short time
 * constants then start far from the set point (tens of noise standard deviations), long ones close
 * to it (below the noise): what a rig shows when it is held long enough to settle by s N.
 */
export function warmupFamilies({ N = 20_000, tfs = [5, 10, 20], phis = [0, 0.5, 0.9], settles = [0.3, 0.45] } = {}) {
  const out = [];
  for (const tf of tfs) for (const phi of phis) for (const s of settles) for (const sign of [1, -1]) {
    const T = N / tf;
    const sigmaLr = 1 / (1 - phi);
    const u = sigmaLr / Math.sqrt((1 - s) * N);
    const A = sign * (u / 4) * Math.exp((s * N) / T);
    const sdx = 1 / Math.sqrt(1 - phi * phi);
    out.push({ name: `T=N/${tf} phi ${phi} ${sign > 0 ? 'cooling' : 'heating'} settled at ${Math.round(100 * s)}% (A = ${(Math.abs(A) / sdx).toPrecision(2)} sd)`, N, T, phi, A, sigmaLr, tau: (1 + phi) / (1 - phi) });
  }
  return out;
}

export function warmupSeries(family, seed) {
  return F.exponentialWarmup(F.ar1(new SeededRandom(seed), family.phi, family.N), 10, family.A, family.T);
}

/** Mean over samples [c, n) of A exp(-t / T). */
export function transientMean(A, T, c, n) {
  let s = 0;
  for (let t = c; t < n; t++) s += A * Math.exp(-t / T);
  return s / (n - c);
}
