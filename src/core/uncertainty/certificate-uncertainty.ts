import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';
import { coverageFactor } from './coverage-factor.js';

/**
 * Standard uncertainty from a calibration certificate (JCGM 100:2008, GUM, 4.3.3 and 4.3.4).
 *
 * - Expanded uncertainty U with a stated coverage factor k: u = U / k (4.3.3).
 * - U with a stated coverage probability p and no degrees of freedom: the normal distribution is
 *   assumed and u = U / z_p, z_p the two-sided normal quantile (1.960 for 95 %; 4.3.4).
 * - U with p and the certificate's effective degrees of freedom nu: u = U / t_p(nu), the coverage
 *   factor the certificate's issuer would have used (GUM G.6.4; EA-4/02 M:2013 section 5, wording
 *   from memory).
 * The degrees of freedom of u are the certificate's nu when it states one (GUM H.1.3.1 gives
 * nu = 18 for the end gauge's reference), otherwise infinite or from the judged reliability
 * (reliability-dof.ts), decided by the caller.
 *
 * Cost: O(1) plus at most one quantile.
 * @throws RangeError when U is negative or not finite, when k is not positive, when p is outside
 *   (0, 1), or when neither or both of k and p are given.
 */
export interface CertificateStatement {
  /** Expanded uncertainty U as printed on the certificate, in the quantity's unit. */
  expanded: number;
  /** Coverage factor k the certificate states. */
  coverageFactor?: number;
  /** Coverage probability p the certificate states (0.95 for "about 95 %"). */
  confidence?: number;
  /** Effective degrees of freedom the certificate states for u. */
  dof?: number;
}

export interface CertificateUncertainty {
  standardUncertainty: number;
  /** The divisor used: k, z_p or t_p(nu). */
  divisor: number;
  basis: 'coverage-factor' | 'normal-quantile' | 't-quantile';
}

export function certificateStandardUncertainty(statement: CertificateStatement): CertificateUncertainty {
  const { expanded, coverageFactor: k, confidence, dof } = statement;
  if (!(expanded >= 0) || !Number.isFinite(expanded)) throw new RangeError(`certificate: expanded uncertainty must be finite and non-negative, got ${expanded}`);
  if ((k === undefined) === (confidence === undefined)) throw new RangeError('certificate: give exactly one of coverageFactor and confidence');
  if (k !== undefined) {
    if (!(k > 0) || !Number.isFinite(k)) throw new RangeError(`certificate: coverage factor must be positive, got ${k}`);
    return { standardUncertainty: expanded / k, divisor: k, basis: 'coverage-factor' };
  }
  const p = confidence as number;
  if (!(p > 0 && p < 1)) throw new RangeError(`certificate: confidence must lie in (0, 1), got ${p}`);
  if (dof !== undefined && dof !== Number.POSITIVE_INFINITY) {
    const t = coverageFactor(p, dof);
    if (t === null) throw new RangeError(`certificate: degrees of freedom must be positive, got ${dof}`);
    return { standardUncertainty: expanded / t, divisor: t, basis: 't-quantile' };
  }
  const z = normalQuantile((1 + p) / 2, 0, 1);
  return { standardUncertainty: expanded / z, divisor: z, basis: 'normal-quantile' };
}
