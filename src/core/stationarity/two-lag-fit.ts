import { blockDecays, DECAYED_SPANS, DEFAULT_THRESHOLD, differenceVariance, fitBlocks, type TransientFit, type TransientFitInput } from './transient-fit.js';

/**
 * Warm-up transient of two lags: the record since the window began, as block means, fitted by a
 * level plus two decaying exponentials, mu + A exp(-t / T) + A2 exp(-t / T2), T2 <= T / 1.5. A
 * stage that follows a first-order source through a first-order lag of its own (the outlet of a
 * heat exchanger whose inlet warms up; a sensor in a well) answers with exactly this sum, the
 * amplitudes of opposite signs; one exponential leaves residuals far above the noise there
 * (transient-fit.ts lackOfFit), and its tail, extrapolated, misplaces the end of the warm-up.
 *
 * Method: separable least squares (the linear parameters mu, A, A2 solved exactly for each pair of
 * time constants; G. H. Golub & V. Pereyra (1973), SIAM J. Numer. Anal. 10(2), 413-432, from
 * memory): a coarse grid over the pairs (ratio 1.25, both decaying within the record: T <= span / 3,
 * a level still moving being a drift), then the Nelder-Mead simplex on (log T, log T2) from the
 * grid's best pair, at most MAX_STEPS steps. The fit is returned
 * in the form of transient-fit.ts: the slower lag as the main one (its bias lasts longest), the
 * faster as `second`; the bounds `slowest` and `fastest` are the point estimate (the profile
 * interval of one lag does not carry over). Significance, block variance and lack of fit as there,
 * with five parameters.
 * Cost: O(K * G^2 / 2) for the grid (G <= 30 time constants), O(K) per simplex step; run only
 * where one exponential does not describe the record.
 */
export function fitTwoLags(input: TransientFitInput): TransientFit | null {
  const { longRunVariance, origin } = input;
  if (!(longRunVariance > 0)) return null;
  const blocks = fitBlocks(input);
  if (!blocks) return null;
  const { y, b } = blocks;
  const K = y.length;
  if (K < 8) return null;
  const shift = y[K - 1] as number;
  let mean = 0;
  for (let k = 0; k < K; k++) mean += (y[k] as number) - shift;
  mean /= K;
  const d = new Float64Array(K);
  let rss0 = 0;
  for (let k = 0; k < K; k++) {
    d[k] = (y[k] as number) - shift - mean;
    rss0 += (d[k] as number) ** 2;
  }
  const span = K * b;
  const longest = span / DECAYED_SPANS;
  const shortest = b / 2;
  if (longest < 1.5 * shortest) return null;

  // Least squares of d on the centred g1 and g2; the residual summed directly (a transient far
  // above the noise leaves rss a millionth of rss0).
  const solve = (g1: Float64Array, g2: Float64Array): { A: number; B: number; mu: number; rss: number } | null => {
    let s1 = 0, s2 = 0, s11 = 0, s22 = 0, s12 = 0, s1y = 0, s2y = 0;
    for (let k = 0; k < K; k++) {
      const a = g1[k] as number;
      const c = g2[k] as number;
      const v = d[k] as number;
      s1 += a; s2 += c; s11 += a * a; s22 += c * c; s12 += a * c; s1y += a * v; s2y += c * v;
    }
    const S11 = s11 - (s1 * s1) / K;
    const S22 = s22 - (s2 * s2) / K;
    const S12 = s12 - (s1 * s2) / K;
    const det = S11 * S22 - S12 * S12;
    if (!(det > 1e-12 * S11 * S22) || !(det > 0)) return null;
    const A = (S22 * s1y - S12 * s2y) / det;
    const B = (S11 * s2y - S12 * s1y) / det;
    const m1 = s1 / K;
    const m2 = s2 / K;
    let rss = 0;
    for (let k = 0; k < K; k++) rss += ((d[k] as number) - A * ((g1[k] as number) - m1) - B * ((g2[k] as number) - m2)) ** 2;
    return { A, B, mu: shift + mean - A * m1 - B * m2, rss };
  };

  const GRID = 1.25;
  const MAX_STEPS = 400;
  const grid: number[] = [];
  for (let T = shortest; T <= longest; T *= GRID) grid.push(T);
  const curves = grid.map((T) => blockDecays(T, b, new Float64Array(K)));
  let best: { T: number; T2: number; A: number; B: number; mu: number; rss: number } | null = null;
  for (let i = 0; i < grid.length; i++) {
    for (let j = 0; j < i; j++) {
      if ((grid[i] as number) < 1.5 * (grid[j] as number)) continue;
      const fit = solve(curves[i] as Float64Array, curves[j] as Float64Array);
      if (fit && (!best || fit.rss < best.rss)) best = { T: grid[i] as number, T2: grid[j] as number, ...fit };
    }
  }
  if (!best) return null;

  // Nelder-Mead on (log T, log T2) from the grid's best pair (J. A. Nelder & R. Mead (1965), The
  // Computer Journal 7(4), 308-313; the standard coefficients 1, 2, 1/2, 1/2): the profile's valley
  // runs along the diagonal, where a search one coordinate at a time crawls.
  const g1 = new Float64Array(K);
  const g2 = new Float64Array(K);
  const evaluate = (p: [number, number]) => {
    const T = Math.exp(p[0]);
    const T2 = Math.exp(p[1]);
    if (T < 1.5 * T2 || T > longest || T2 < shortest / 2) return null;
    return solve(blockDecays(T, b, g1), blockDecays(T2, b, g2));
  };
  const start = best as NonNullable<typeof best>;
  const simplex: { p: [number, number]; f: number }[] = [
    [Math.log(start.T), Math.log(start.T2)],
    [Math.log(start.T * GRID), Math.log(start.T2)],
    [Math.log(start.T), Math.log(start.T2 / GRID)],
  ].map((p) => ({ p: p as [number, number], f: evaluate(p as [number, number])?.rss ?? Number.POSITIVE_INFINITY }));
  for (let i = 0; i < MAX_STEPS; i++) {
    simplex.sort((u, v) => u.f - v.f);
    const [lo, mid, hi] = simplex as [{ p: [number, number]; f: number }, { p: [number, number]; f: number }, { p: [number, number]; f: number }];
    if (Math.abs(hi.p[0] - lo.p[0]) + Math.abs(hi.p[1] - lo.p[1]) < 1e-9) break;
    const c: [number, number] = [(lo.p[0] + mid.p[0]) / 2, (lo.p[1] + mid.p[1]) / 2];
    const along = (t: number): { p: [number, number]; f: number } => {
      const p: [number, number] = [c[0] + t * (hi.p[0] - c[0]), c[1] + t * (hi.p[1] - c[1])];
      return { p, f: evaluate(p)?.rss ?? Number.POSITIVE_INFINITY };
    };
    const reflected = along(-1);
    if (reflected.f < lo.f) {
      const expanded = along(-2);
      simplex[2] = expanded.f < reflected.f ? expanded : reflected;
    } else if (reflected.f < mid.f) {
      simplex[2] = reflected;
    } else {
      const contracted = reflected.f < hi.f ? along(-0.5) : along(0.5);
      if (contracted.f < Math.min(hi.f, reflected.f)) simplex[2] = contracted;
      else {
        for (const vertex of [mid, hi]) {
          vertex.p = [(lo.p[0] + vertex.p[0]) / 2, (lo.p[1] + vertex.p[1]) / 2];
          vertex.f = evaluate(vertex.p)?.rss ?? Number.POSITIVE_INFINITY;
        }
      }
    }
  }
  simplex.sort((u, v) => u.f - v.f);
  const point = (simplex[0] as { p: [number, number]; f: number }).p;
  const refined = evaluate(point);
  if (refined && refined.rss < start.rss) best = { T: Math.exp(point[0]), T2: Math.exp(point[1]), ...refined };
  const fit = best as NonNullable<typeof best>;
  const sigma2 = longRunVariance / b;
  const residualVariance = fit.rss / (K - 5);
  const blockVariance = Math.min(sigma2, Math.max(residualVariance, Number.MIN_VALUE));
  const improvement = (rss0 - fit.rss) / blockVariance;
  const noiseVariance = differenceVariance(y);
  const main = { timeConstant: fit.T, amplitude: fit.A };
  return {
    significant: improvement > (input.threshold ?? DEFAULT_THRESHOLD),
    improvement,
    level: fit.mu,
    amplitude: fit.A,
    timeConstant: fit.T,
    origin,
    decays: true,
    blockSize: b,
    blocks: K,
    rss: fit.rss,
    blockVariance,
    longRunVariance: blockVariance * b,
    means: y,
    lackOfFit: residualVariance / noiseVariance,
    noiseVariance,
    second: { timeConstant: fit.T2, amplitude: fit.B },
    slowest: main,
    fastest: main,
  };
}
