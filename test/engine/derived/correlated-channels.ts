import type { SeededRandom } from '../../../src/core/random/seeded-random.js';

/**
 * Three channels sampled together: a VAR(1) with a diagonal coefficient matrix and correlated
 * innovations, x_t = Phi x_(t-1) + s L z_t (z standard normal, L L^T = R the innovation
 * correlation), y_t = mu + x_t, so that each channel is an AR(1) in time and the channels are
 * correlated with one another (a flow surge moves both temperatures). Started in equilibrium by a
 * burn-in of 200 steps (Phi^200 < 1e-30 for |phi| <= 0.7). The true means are exactly mu.
 */
export interface CorrelatedChannels {
  phi: [number, number, number];
  /** Innovation correlations r_ab, r_ac, r_bc. */
  correlation: [number, number, number];
  /** Innovation standard deviation, each channel. */
  sigma: number;
  mu: [number, number, number];
}

export const CORRELATED: CorrelatedChannels = {
  phi: [0.6, 0.5, 0.7],
  correlation: [0.8, -0.5, -0.6],
  sigma: 0.1,
  mu: [2, 1, 0.5],
};

/** Lower Cholesky factor of the 3 x 3 correlation matrix (row-major). */
export function choleskyOf([ab, ac, bc]: [number, number, number]): number[] {
  const l00 = 1;
  const l10 = ab;
  const l11 = Math.sqrt(1 - ab * ab);
  const l20 = ac;
  const l21 = (bc - ac * ab) / l11;
  const l22 = Math.sqrt(1 - l20 * l20 - l21 * l21);
  return [l00, 0, 0, l10, l11, 0, l20, l21, l22];
}

/** n rows of (a, b, c), written into three arrays. */
export function correlatedRows(random: SeededRandom, n: number, spec: CorrelatedChannels = CORRELATED): [Float64Array, Float64Array, Float64Array] {
  const l = choleskyOf(spec.correlation);
  const out: [Float64Array, Float64Array, Float64Array] = [new Float64Array(n), new Float64Array(n), new Float64Array(n)];
  let x0 = 0;
  let x1 = 0;
  let x2 = 0;
  for (let t = -200; t < n; t++) {
    const z0 = random.normal();
    const z1 = random.normal();
    const z2 = random.normal();
    x0 = spec.phi[0] * x0 + spec.sigma * (l[0] as number) * z0;
    x1 = spec.phi[1] * x1 + spec.sigma * ((l[3] as number) * z0 + (l[4] as number) * z1);
    x2 = spec.phi[2] * x2 + spec.sigma * ((l[6] as number) * z0 + (l[7] as number) * z1 + (l[8] as number) * z2);
    if (t >= 0) {
      out[0][t] = spec.mu[0] + x0;
      out[1][t] = spec.mu[1] + x1;
      out[2][t] = spec.mu[2] + x2;
    }
  }
  return out;
}
