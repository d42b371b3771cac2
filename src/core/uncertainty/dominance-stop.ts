import { coverageFactor } from './coverage-factor.js';
import { targetStatus, type TargetSpec } from './target-precision.js';

/**
 * The stopping rule used with Type B budgets: stop averaging when the statistical part no longer
 * matters, u_A <= f u_c (f configurable, for example 0.2: the Type A share of u_c^2 is then at most
 * f^2 = 4 %), or when the precision target is met, whichever comes first; and say which of the two
 * a wait is for.
 *
 * Why: once the Type B components dominate, a longer average barely moves u_c (with f = 0.2,
 * removing u_A altogether lowers u_c by 2 %), so waiting for a Type A target that the budget
 * cannot reach is wasted rig time. The rule is common practice in calibration laboratories (no
 * published source cited; the threshold is the user's). It assumes a stationary channel: u_A^2
 * scales as 1/n and its degrees of freedom as n, as in target-precision.ts (Chow & Robbins 1965).
 *
 * With m = n'/n, u_A^2(m) = V_A / m, the other variance V_B fixed:
 * - dominance: V_A / m <= f^2 (V_A / m + V_B), i.e. m >= V_A (1 - f^2) / (f^2 V_B); never met when
 *   V_B = 0 (nothing else to dominate).
 * - a target on the combined uncertainty, u: V_A / m + V_B <= T^2, i.e. m >= V_A / (T^2 - V_B),
 *   unreachable when V_B >= T^2 (the Type B part alone exceeds it); U: k(nu_eff(m)) u_c(m) <= T,
 *   found by bisection, with nu_eff(m) = u_c^4(m) / (D_A / m^3 + D_B) (each Type A term's u^4 falls
 *   as 1/m^2 while its nu grows as m).
 * - a target on the Type A part alone: target-precision.ts, unchanged.
 * A window that cannot hold n' samples (a sliding window's capacity) makes that condition
 * unreachable, with a note, rather than promising a time.
 *
 * Cost: O(1) for u targets and the dominance rule; O(log) t quantiles for U targets.
 */
export interface StoppingInput {
  /** Samples in the window now. */
  n: number;
  /** Mean of the result (for relative targets). */
  mean: number;
  /** V_A: sum of the Type A variance terms (c u_A)^2 now. */
  typeAVariance: number;
  /** D_A: sum of the Type A terms (c u_A)^4 / nu_A now (0 when their nu are infinite). */
  typeADofDenominator: number;
  /** V_B: everything else in u_c^2 (Type B terms and their covariances). */
  otherVariance: number;
  /** D_B: sum of (c u)^4 / nu over the Type B sources (0 when all are taken as known). */
  otherDofDenominator: number;
  /** Type A nu now (for a Type A target). */
  typeADof: number;
  confidence: number;
  /** Samples per second, when known. */
  rate: number | null;
  /** Largest window the samples can fill (Infinity for a growing window). */
  capacity: number;
}

export interface StoppingRule {
  /** f in (0, 1): stop when u_A <= f u_c. */
  fraction: number;
  /** Optional precision target, on the combined uncertainty or on the Type A part alone. */
  target?: (TargetSpec & { basis: 'combined' | 'type-a' }) | null;
}

export interface ConditionStatus {
  met: boolean;
  /** Further samples needed (0 when met; null when it cannot be met in this window). */
  samplesToMeet: number | null;
  secondsToMeet: number | null;
  note?: string;
}

export interface StoppingStatus {
  stop: boolean;
  /** The condition that is met (target first when both are). */
  reason: 'target' | 'dominance' | null;
  /** Not stopped yet: the condition expected first; null when neither can be met. */
  waitingFor: 'target' | 'dominance' | null;
  samplesToStop: number | null;
  secondsToStop: number | null;
  /** u_A / u_c now. */
  typeARatio: number | null;
  fraction: number;
  dominance: ConditionStatus;
  target: (ConditionStatus & { basis: 'combined' | 'type-a'; bound: number | null; achieved: number | null }) | null;
}

export function stoppingStatus(rule: StoppingRule, input: StoppingInput): StoppingStatus {
  const { fraction } = rule;
  if (!(fraction > 0 && fraction < 1)) throw new RangeError(`stoppingStatus: fraction must lie in (0, 1), got ${fraction}`);
  const { n, typeAVariance: va, otherVariance: vb } = input;
  const combined = va + vb;
  const typeARatio = combined > 0 ? Math.sqrt(va / combined) : null;
  const seconds = (samples: number | null) => (samples === null ? null : input.rate && input.rate > 0 ? samples / input.rate : null);
  const fromFactor = (m: number | null, what: string): ConditionStatus => {
    if (m === null) return { met: false, samplesToMeet: null, secondsToMeet: null, note: what };
    if (m <= 1) return { met: true, samplesToMeet: 0, secondsToMeet: 0 };
    const total = Math.ceil(n * m);
    if (total > input.capacity) return { met: false, samplesToMeet: null, secondsToMeet: null, note: `needs about ${total} samples in the window, more than it holds (${input.capacity})` };
    const more = Math.max(0, total - n);
    return { met: false, samplesToMeet: more, secondsToMeet: seconds(more) };
  };

  let dominance: ConditionStatus;
  if (va === 0) dominance = { met: true, samplesToMeet: 0, secondsToMeet: 0 };
  else if (!(vb > 0)) dominance = fromFactor(null, 'no Type B component: the statistical part cannot be dominated');
  else if (n < 2) dominance = fromFactor(null, 'not enough samples to estimate the Type A uncertainty');
  else dominance = fromFactor((va * (1 - fraction * fraction)) / (fraction * fraction * vb), '');

  const target = rule.target ? targetCondition(rule.target, input, fromFactor) : null;

  const targetMet = target?.met ?? false;
  const stop = targetMet || dominance.met;
  let waitingFor: StoppingStatus['waitingFor'] = null;
  let samplesToStop: number | null = stop ? 0 : null;
  if (!stop) {
    const candidates: ['target' | 'dominance', number][] = [];
    if (target && target.samplesToMeet !== null) candidates.push(['target', target.samplesToMeet]);
    if (dominance.samplesToMeet !== null) candidates.push(['dominance', dominance.samplesToMeet]);
    candidates.sort((a, b) => a[1] - b[1]);
    const first = candidates[0];
    if (first) {
      waitingFor = first[0];
      samplesToStop = first[1];
    }
  }
  return {
    stop,
    reason: targetMet ? 'target' : dominance.met ? 'dominance' : null,
    waitingFor,
    samplesToStop,
    secondsToStop: stop ? 0 : seconds(samplesToStop),
    typeARatio,
    fraction,
    dominance,
    target,
  };
}

function targetCondition(
  spec: TargetSpec & { basis: 'combined' | 'type-a' },
  input: StoppingInput,
  fromFactor: (m: number | null, what: string) => ConditionStatus,
): NonNullable<StoppingStatus['target']> {
  const bound = spec.relative ? spec.value * Math.abs(input.mean) : spec.value;
  if (spec.basis === 'type-a') {
    const s = targetStatus(spec, { mean: input.mean, n: input.n, standardUncertainty: Math.sqrt(input.typeAVariance), dof: input.typeADof, confidence: input.confidence, rate: input.rate, capacity: input.capacity });
    const k = coverageFactor(input.confidence, input.typeADof);
    const achieved = spec.on === 'u' ? Math.sqrt(input.typeAVariance) : k === null ? null : k * Math.sqrt(input.typeAVariance);
    const out: NonNullable<StoppingStatus['target']> = { basis: 'type-a', bound: s.bound, achieved, met: s.reached, samplesToMeet: s.samplesToTarget, secondsToMeet: s.secondsToTarget };
    if (s.note !== undefined) out.note = s.note;
    return out;
  }
  const { n, typeAVariance: va, otherVariance: vb, typeADofDenominator: da, otherDofDenominator: db } = input;
  const kAt = (m: number): number | null => {
    const variance = va / m + vb;
    const denominator = da / (m * m * m) + db;
    const nu = denominator > 0 ? (variance * variance) / denominator : Number.POSITIVE_INFINITY;
    return coverageFactor(input.confidence, nu);
  };
  const achievedAt = (m: number): number => {
    const u = Math.sqrt(va / m + vb);
    if (spec.on === 'u') return u;
    const k = kAt(m);
    return k === null ? Number.POSITIVE_INFINITY : k * u;
  };
  const base = { basis: 'combined' as const, bound: spec.relative && input.mean === 0 ? null : bound };
  const achieved = achievedAt(1);
  if (!(bound > 0)) return { ...base, achieved, ...fromFactor(null, spec.relative ? 'relative target with a zero mean cannot be met' : 'target must be positive') };
  if (achieved <= bound) return { ...base, achieved, met: true, samplesToMeet: 0, secondsToMeet: 0 };
  if (n < 2) return { ...base, achieved, ...fromFactor(null, 'not enough samples to estimate the Type A uncertainty') };
  if (va === 0) return { ...base, achieved, ...fromFactor(null, 'the Type B components alone exceed the target: averaging longer cannot meet it') };
  // the limit m -> infinity: u_c -> sqrt(V_B), nu_eff -> V_B^2 / D_B
  if (achievedAt(1e12) > bound) return { ...base, achieved, ...fromFactor(null, 'the Type B components alone exceed the target: averaging longer cannot meet it') };
  let m: number;
  if (spec.on === 'u') m = va / (bound * bound - vb);
  else {
    let low = 1;
    let high = 2;
    while (achievedAt(high) > bound && high < 1e12) high *= 2;
    for (let i = 0; i < 80 && high - low > 0.5 / n; i++) {
      const mid = (low + high) / 2;
      if (achievedAt(mid) > bound) low = mid;
      else high = mid;
    }
    m = high;
  }
  return { ...base, achieved, ...fromFactor(m, '') };
}
