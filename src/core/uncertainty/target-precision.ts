import { coverageFactor } from './coverage-factor.js';

/**
 * Target precision of a windowed mean: is it reached, and how many more samples (and seconds) it
 * needs.
 *
 * A target bounds either the standard uncertainty u or the expanded uncertainty U = k * u, in data
 * units or relative to |mean|. For a stationary series u scales as 1/sqrt(n) at fixed tau_int and
 * the degrees of freedom grow in proportion to n, so the samples needed are the smallest n' with
 * k(nu * n'/n) * u * sqrt(n/n') <= target (found by bisection; for a target on u it is closed-form,
 * n' = n * (u / target)^2). This is the fixed-width stopping rule of Y. S. Chow & H. Robbins
 * (1965), Ann. Math. Statist. 36, 457-462, with the variance replaced by the autocorrelation-aware
 * one (the sequential procedure in A. M. Law & W. D. Kelton, "Simulation Modeling and Analysis",
 * for relative precision; from memory).
 * A sliding window holds at most `capacity` samples: when n' exceeds it the target is unreachable
 * at this window length, and the result says so instead of promising a time.
 * Cost: O(1) for u targets, O(log) t quantiles for U targets.
 */
export interface TargetSpec {
  /** Bound on the uncertainty, in data units, or as a fraction of |mean| when `relative`. */
  value: number;
  relative: boolean;
  /** Whether the bound applies to u (standard) or U (expanded). */
  on: 'u' | 'U';
}

export interface TargetStatus {
  /** The bound in data units (null when relative to a zero mean). */
  bound: number | null;
  value: number;
  relative: boolean;
  on: 'u' | 'U';
  reached: boolean;
  /** More samples needed (0 when reached; null when it cannot be known or reached). */
  samplesToTarget: number | null;
  /** samplesToTarget divided by the sample rate (null without a rate). */
  secondsToTarget: number | null;
  /**
   * Samples taken over samples needed in the window, n / (n + samplesToTarget): a plain fraction
   * of the samples (and, at a steady rate, of the time), 1 when reached; 0 when unknown.
   */
  progress: number;
  /** Samples the window needs in all to meet the target (n when reached; null when unknown). */
  samplesNeeded?: number | null;
  note?: string;
}

export interface TargetInput {
  mean: number;
  n: number;
  standardUncertainty: number;
  dof: number;
  confidence: number;
  /** Samples per second, if known. */
  rate: number | null;
  /** Largest window the samples can fill (Infinity for an unbounded growing window). */
  capacity: number;
}

export function targetStatus(spec: TargetSpec, input: TargetInput): TargetStatus {
  const base = { value: spec.value, relative: spec.relative, on: spec.on };
  const bound = spec.relative ? spec.value * Math.abs(input.mean) : spec.value;
  const { n, standardUncertainty: u, dof, confidence } = input;
  if (!(bound > 0)) {
    return { ...base, bound: spec.relative && input.mean === 0 ? null : bound, reached: false, samplesToTarget: null, secondsToTarget: null, progress: 0, samplesNeeded: null, note: spec.relative ? 'relative target with a zero mean cannot be met' : 'target must be positive' };
  }
  if (n < 2 || !(dof > 0)) {
    return { ...base, bound, reached: false, samplesToTarget: null, secondsToTarget: null, progress: 0, samplesNeeded: null, note: 'not enough samples to estimate the uncertainty' };
  }
  const achieved = spec.on === 'u' ? u : u * (coverageFactor(confidence, dof) ?? Number.POSITIVE_INFINITY);
  if (achieved <= bound) {
    return { ...base, bound, reached: true, samplesToTarget: 0, secondsToTarget: 0, progress: 1, samplesNeeded: n };
  }
  let needed: number;
  if (spec.on === 'u') {
    needed = n * (u / bound) ** 2;
  } else {
    const expandedAt = (m: number) => (coverageFactor(confidence, (dof * m) / n) ?? Number.POSITIVE_INFINITY) * u * Math.sqrt(n / m);
    let low = n;
    let high = Math.max(n * (achieved / bound) ** 2, n + 1);
    let guard = 0;
    while (expandedAt(high) > bound && guard++ < 60) high *= 2;
    for (let i = 0; i < 60 && high - low > 0.5; i++) {
      const mid = (low + high) / 2;
      if (expandedAt(mid) > bound) low = mid;
      else high = mid;
    }
    needed = high;
  }
  const total = Math.ceil(needed);
  const more = Math.max(0, total - n);
  const progress = Math.max(0, Math.min(1, n / total));
  if (total > input.capacity) {
    return { ...base, bound, reached: false, samplesToTarget: null, secondsToTarget: null, progress, samplesNeeded: total, note: `needs about ${total} samples in the window, more than it holds (${input.capacity})` };
  }
  const seconds = input.rate && input.rate > 0 ? more / input.rate : null;
  return { ...base, bound, reached: false, samplesToTarget: more, secondsToTarget: seconds, progress, samplesNeeded: total };
}
