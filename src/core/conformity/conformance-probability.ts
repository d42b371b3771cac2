import normalCdf from '@stdlib/stats-base-dists-normal-cdf';
import tCdf from '@stdlib/stats-base-dists-t-cdf';

/**
 * Conformance probability: the probability, given the measurement, that the measurand lies within
 * its specification (tolerance) limits (JCGM 106:2012, "Evaluation of measurement data - The role
 * of measurement uncertainty in conformity assessment", clause 7; formulas from memory, the text was
 * not read here).
 *
 * The state of knowledge of the measurand after the measurement is taken as
 * - normal with expectation y (the result) and standard deviation u_c (JCGM 106 7.3; used when nu
 *   is infinite): p_c = Phi((T_U - y) / u_c) - Phi((T_L - y) / u_c);
 * - a scaled and shifted t distribution with nu_eff degrees of freedom, location y and scale u_c
 *   (JCGM 106 7.5, and JCGM 101:2008 6.4.9 for the scaled and shifted t; from memory), when nu_eff is
 *   finite: p_c = F_nu((T_U - y) / u_c) - F_nu((T_L - y) / u_c).
 * A one-sided specification leaves the missing limit at -/+ infinity. p_c is the probability of the
 * closed interval [T_L, T_U]; its complement is the non-conformance probability.
 * Note (choice): the t distribution uses u_c as its scale, as JCGM 106 does for a mean of n readings
 * (scale s / sqrt(n), nu = n - 1). Its variance is then u_c^2 nu / (nu - 2), wider than u_c^2; this
 * is the convention, not an error.
 * Distributions by @stdlib/stats-base-dists-normal-cdf and -t-cdf.
 *
 * Cost: two CDF evaluations.
 * @returns probability null, with a note, when u_c is negative or not finite, or the limits cross.
 */
export interface ConformanceInput {
  /** The measured value y (mean of the result). */
  value: number;
  standardUncertainty: number;
  /** nu_eff; null or Infinity for the normal distribution. */
  dof: number | null;
  lower: number | null;
  upper: number | null;
}

export interface ConformanceProbability {
  probability: number | null;
  nonConformance: number | null;
  distribution: 'normal' | 't';
  dof: number | null;
  note?: string;
}

export function conformanceProbability(input: ConformanceInput): ConformanceProbability {
  const { value: y, standardUncertainty: u, lower, upper } = input;
  const finiteDof = input.dof !== null && input.dof !== Number.POSITIVE_INFINITY && input.dof > 0 ? input.dof : null;
  const distribution = finiteDof === null ? 'normal' : 't';
  const base = { distribution, dof: finiteDof } as const;
  if (!Number.isFinite(y) || !(u >= 0) || !Number.isFinite(u)) return { ...base, probability: null, nonConformance: null, note: 'no conformance probability without a finite value and standard uncertainty' };
  if (lower !== null && upper !== null && lower > upper) return { ...base, probability: null, nonConformance: null, note: 'the lower limit lies above the upper limit' };
  if (lower === null && upper === null) return { ...base, probability: 1, nonConformance: 0, note: 'no specification limit: everything conforms' };
  if (u === 0) {
    const inside = (lower === null || y >= lower) && (upper === null || y <= upper);
    return { ...base, probability: inside ? 1 : 0, nonConformance: inside ? 0 : 1, note: 'zero uncertainty: the value itself decides' };
  }
  const cdf = (z: number) => (finiteDof === null ? normalCdf(z, 0, 1) : tCdf(z, finiteDof));
  // upper tail computed as F(-z) so that probabilities near 1 keep their digits
  const belowLower = lower === null ? 0 : cdf((lower - y) / u);
  const aboveUpper = upper === null ? 0 : cdf((y - upper) / u);
  const nonConformance = Math.min(1, belowLower + aboveUpper);
  return { ...base, probability: 1 - nonConformance, nonConformance };
}
