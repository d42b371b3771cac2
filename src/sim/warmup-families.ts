import { SeededRandom } from '../core/random/seeded-random.js';
import { ar1, exponentialWarmup } from './signal-families.js';

/**
 * Exponential warm-up families for the verdict's studies (test/engine/verdict-warmup.test.ts and
 * bench/verdict.js): a record of N samples, AR(1) noise (phi, unit innovations), heating or cooling
 * towards 10 with time constant T = N / tf. The amplitude is set by when the rig settles: the
 * transient falls to a quarter of the final standard uncertainty of the mean (sigma_inf /
 * sqrt((1 - s) N)) at the fraction s of the record, so A = u / 4 * exp(s N / T). Short time
 * constants then start far from the set point (tens of noise standard deviations), long ones close
 * to it (below the noise): what a rig shows when it is held long enough to settle by s N.
 */
export interface WarmupFamily {
  name: string;
  N: number;
  /** Time constant, samples. */
  T: number;
  phi: number;
  /** Signed amplitude: positive cools towards the level, negative heats. */
  A: number;
  /** Long-run standard deviation of the noise, sigma / (1 - phi). */
  sigmaLr: number;
  level: number;
}

export const WARMUP_LEVEL = 10;

export function warmupFamilies(options: { N?: number; tfs?: number[]; phis?: number[]; settles?: number[] } = {}): WarmupFamily[] {
  const { N = 20_000, tfs = [5, 10, 20], phis = [0, 0.5, 0.9], settles = [0.3, 0.45] } = options;
  const out: WarmupFamily[] = [];
  for (const tf of tfs) {
    for (const phi of phis) {
      for (const s of settles) {
        for (const sign of [1, -1]) {
          const T = N / tf;
          const sigmaLr = 1 / (1 - phi);
          const u = sigmaLr / Math.sqrt((1 - s) * N);
          const A = sign * (u / 4) * Math.exp((s * N) / T);
          const sdx = 1 / Math.sqrt(1 - phi * phi);
          out.push({ name: `T=N/${tf} phi ${phi} ${sign > 0 ? 'cooling' : 'heating'} settled at ${Math.round(100 * s)}% (A = ${(Math.abs(A) / sdx).toPrecision(2)} sd)`, N, T, phi, A, sigmaLr, level: WARMUP_LEVEL });
        }
      }
    }
  }
  return out;
}

export function warmupSeries(family: WarmupFamily, seed: number): Float64Array {
  return exponentialWarmup(ar1(new SeededRandom(seed), family.phi, family.N), family.level, family.A, family.T);
}

/** Mean over samples [c, n) of A exp(-t / T): the bias a kept window starting at c carries. */
export function transientMean(A: number, T: number, c: number, n: number): number {
  let s = 0;
  for (let t = c; t < n; t++) s += A * Math.exp(-t / T);
  return s / (n - c);
}
