import tQuantile from '@stdlib/stats-base-dists-t-quantile';

/**
 * Coverage factor k_p = t_p(nu): the two-sided quantile of Student's t with nu degrees of freedom
 * at coverage probability p (JCGM 100:2008, G.3.4 and Table G.2). nu may be fractional: the
 * quantile of the t distribution with real nu is used directly instead of truncating nu to an
 * integer (G.6.4 allows interpolation), and nu = Infinity gives the normal quantile.
 * Computed by @stdlib/stats-base-dists-t-quantile, not from a typed table.
 *
 * Cost: one incomplete-beta inversion, a few microseconds.
 * Returns null when nu is not positive or p is outside (0, 1).
 */
const NORMAL_DOF = 1e15; // beyond this the t quantile equals the normal one to 1e-12

export function coverageFactor(confidence: number, dof: number): number | null {
  if (!(confidence > 0 && confidence < 1) || !(dof > 0)) return null;
  const k = tQuantile((1 + confidence) / 2, Math.min(dof, NORMAL_DOF));
  return Number.isFinite(k) && k > 0 ? k : null;
}
