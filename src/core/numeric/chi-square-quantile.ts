import chisquareQuantileExact from '@stdlib/stats-base-dists-chisquare-quantile';
import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';

/** Degrees of freedom from which the Wilson-Hilferty approximation is used. */
export const WILSON_HILFERTY_FROM = 1000;

/**
 * The p-quantile of the chi-square distribution with k degrees of freedom. Below
 * WILSON_HILFERTY_FROM degrees of freedom, stdlib's inversion of the incomplete gamma function;
 * from there on the Wilson-Hilferty cube-root normal approximation (E. B. Wilson and
 * M. M. Hilferty (1931), "The distribution of chi-square", Proc. Natl. Acad. Sci. 17(12), 684-688),
 * k (1 - 2/(9k) + z_p sqrt(2/(9k)))^3, whose relative error there is below 2e-5 for
 * 0.001 <= p <= 0.999 (test/core/numeric/chi-square-quantile.test.ts). The inversion costs tens to
 * hundreds of microseconds at large k, and the Allan deviation asks for two quantiles per point on
 * every check of a long record.
 * Cost: O(1); one normal quantile from WILSON_HILFERTY_FROM degrees of freedom on.
 */
export function chiSquareQuantile(p: number, k: number): number {
  if (!(k >= WILSON_HILFERTY_FROM) || !(p > 0 && p < 1)) return chisquareQuantileExact(p, k);
  const a = 2 / (9 * k);
  const z = normalQuantile(p, 0, 1);
  return k * (1 - a + z * Math.sqrt(a)) ** 3;
}
