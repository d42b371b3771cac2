/**
 * Effective degrees of freedom of a combined standard uncertainty by the Welch-Satterthwaite formula
 * (JCGM 100:2008, GUM, G.4.1, eq. (G.2b)):
 *   nu_eff = u_c^4(y) / sum_i u_i^4(y) / nu_i,   u_i(y) = c_i u(x_i),
 * for independent contributions; terms with nu_i = infinity add nothing to the denominator, and a
 * combination of such terms only has nu_eff = infinity.
 *
 * Truncation convention: G.4.1 (wording from memory) lets t_p(nu_eff) be read from Table G.2 "by
 * interpolation or by truncating nu_eff to the next lower integer"; the worked example of H.1.6
 * truncates (16.7 -> 16). `truncateDegreesOfFreedom` does that, never going below 1 (where t_p still
 * exists); the budgets of combined-uncertainty.ts truncate by default, as a lab's signed budget
 * does, and can interpolate instead (the real-valued t quantile).
 *
 * Cost: O(p) for p terms.
 * @returns Infinity when no term with finite nu contributes; null when u_c = 0 and some finite-nu
 *   term is present (0 / 0: undefined).
 * @throws RangeError when a nu_i is not positive or a contribution is not finite.
 */
export interface DegreesOfFreedomTerm {
  /** u_i(y) = c_i u(x_i) (its sign does not matter). */
  contribution: number;
  /** nu_i; null or Infinity for a standard uncertainty taken as known. */
  dof: number | null;
}

export function effectiveDegreesOfFreedom(terms: readonly DegreesOfFreedomTerm[], combinedVariance?: number): number | null {
  let variance = 0;
  let denominator = 0;
  let finitePresent = false;
  for (const term of terms) {
    if (!Number.isFinite(term.contribution)) throw new RangeError('effectiveDegreesOfFreedom: a contribution is not finite');
    const nu = term.dof;
    if (nu !== null && !(nu > 0)) throw new RangeError(`effectiveDegreesOfFreedom: degrees of freedom must be positive, got ${nu}`);
    const squared = term.contribution * term.contribution;
    variance += squared;
    if (nu !== null && nu !== Number.POSITIVE_INFINITY) {
      finitePresent = true;
      denominator += (squared * squared) / nu;
    }
  }
  const total = combinedVariance ?? variance;
  if (denominator === 0) {
    if (total > 0 || !finitePresent) return Number.POSITIVE_INFINITY;
    return null;
  }
  return (total * total) / denominator;
}

/** nu_eff truncated to the next lower integer (GUM G.4.1, H.1.6), at least 1; infinity stays. */
export function truncateDegreesOfFreedom(nu: number): number {
  if (nu === Number.POSITIVE_INFINITY) return nu;
  return Math.max(1, Math.floor(nu));
}
