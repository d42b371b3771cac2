import { coverageFactor } from './coverage-factor.js';
import type { TauEstimate } from '../tau/tau-estimate.js';

/**
 * Standard, effective degrees of freedom and expanded uncertainty of a windowed mean.
 *
 * GUM Type A evaluation (JCGM 100:2008, 4.2) made autocorrelation-aware: u(mean) is the square
 * root of the estimated variance of the mean from a tau_int estimator, nu its degrees of freedom,
 * k = t_p(nu) and U = k * u (JCGM 100:2008, 6.2 and G.6). For correlated samples the GUM itself
 * (4.2.7) says s/sqrt(n) may be inappropriate; the convention used here follows N. F. Zhang (2006),
 * "Calculation of the uncertainty of the mean of autocorrelated measurements", Metrologia 43, S276.
 * Cost: O(1) plus one t quantile.
 */
export interface MeanUncertainty {
  standardUncertainty: number;
  dof: number;
  coverageFactor: number | null;
  expandedUncertainty: number | null;
  confidence: number;
}

export function meanUncertainty(estimate: TauEstimate, confidence: number): MeanUncertainty {
  const u = Math.sqrt(Math.max(0, estimate.varianceOfMean));
  const k = coverageFactor(confidence, estimate.dof);
  return {
    standardUncertainty: u,
    dof: estimate.dof,
    coverageFactor: k,
    expandedUncertainty: k === null ? null : k * u,
    confidence,
  };
}
