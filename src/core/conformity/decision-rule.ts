import { conformanceProbability, type ConformanceProbability } from './conformance-probability.js';

/**
 * Conformity with a stated decision rule (ISO/IEC 17025:2017 7.8.6 asks for the rule to be stated
 * with the statement of conformity), with the outcomes of ILAC-G8:09/2019 "Guidelines on Decision
 * Rules and Statements of Conformity", 4.2 (read in a public copy of pages 9 and 10):
 * - simple acceptance (4.2.1, guard band w = 0): pass when the measured value lies within the
 *   tolerance limits (acceptance limit AL = TL), else fail;
 * - guarded acceptance, binary (4.2.2): AL = TL - w on each side (the acceptance interval narrowed by
 *   w); pass within it, else fail;
 * - guarded, non-binary (4.2.3): pass within the acceptance interval; conditional pass inside a guard
 *   band and within the tolerance ([TL - w, TL]); conditional fail beyond the tolerance by at most
 *   w ([TL, TL + w]); fail beyond TL + w.
 * Guard band: w = r U (r configurable, 1 by default: ILAC-G8 shows w = U), or a fixed width in the
 * result's unit. Boundaries (our choice, stated in the record): ILAC-G8 writes the zones as closed
 * intervals sharing their ends; a value exactly on a boundary gets the outcome of the zone on the
 * conforming side (at TL: conditional pass; at TL + w: conditional fail; at AL: pass).
 * One-sided limits: the missing side never decides. When the guard bands of a two-sided tolerance
 * meet or cross (2 w >= T_U - T_L) the acceptance interval is empty: the binary guarded rule cannot
 * pass anything, and the result says so.
 * The conformance probability (conformance-probability.ts, JCGM 106:2012 clause 7) is reported beside
 * the verdict: the verdict follows the rule, the probability informs it.
 *
 * Cost: O(1) plus two CDF evaluations.
 */
export interface SpecificationLimits {
  lower: number | null;
  upper: number | null;
}

export type DecisionRuleKind = 'simple' | 'guarded' | 'non-binary';

export interface DecisionRule {
  kind: DecisionRuleKind;
  /** r in w = r U (default 1) for guarded and non-binary rules. */
  guardFactor?: number;
  /** A fixed guard band w in the result's unit, instead of r U. */
  guardBand?: number;
}

export type Verdict = 'pass' | 'conditional-pass' | 'conditional-fail' | 'fail';

export interface ConformityDecision {
  rule: DecisionRuleKind;
  verdict: Verdict | null;
  /** w used (0 for simple acceptance); null when it needs U and there is none. */
  guardBand: number | null;
  acceptance: SpecificationLimits;
  limits: SpecificationLimits;
  /** The limit that decided a verdict other than pass ('lower' or 'upper'). */
  side: 'lower' | 'upper' | null;
  note?: string;
}

export function decideConformity(input: { value: number; expandedUncertainty: number | null; limits: SpecificationLimits; rule: DecisionRule }): ConformityDecision {
  const { value: y, limits, rule } = input;
  const { lower, upper } = limits;
  const base = { rule: rule.kind, limits };
  if (lower !== null && upper !== null && lower > upper) return { ...base, verdict: null, guardBand: null, acceptance: { lower: null, upper: null }, side: null, note: 'the lower limit lies above the upper limit' };
  if (!Number.isFinite(y)) return { ...base, verdict: null, guardBand: null, acceptance: { lower: null, upper: null }, side: null, note: 'no measured value' };
  let w = 0;
  if (rule.kind !== 'simple') {
    if (rule.guardBand !== undefined) w = rule.guardBand;
    else {
      const U = input.expandedUncertainty;
      if (U === null || !Number.isFinite(U)) return { ...base, verdict: null, guardBand: null, acceptance: { lower: null, upper: null }, side: null, note: 'the guard band needs the expanded uncertainty, which is not available' };
      w = (rule.guardFactor ?? 1) * U;
    }
    if (!(w >= 0)) return { ...base, verdict: null, guardBand: null, acceptance: { lower: null, upper: null }, side: null, note: 'the guard band must not be negative' };
  }
  const acceptance = { lower: lower === null ? null : lower + w, upper: upper === null ? null : upper - w };
  const empty = acceptance.lower !== null && acceptance.upper !== null && acceptance.lower > acceptance.upper;
  const note = empty ? `the guard bands (w = ${w}) leave no acceptance interval between the limits` : undefined;
  const out = (verdict: Verdict, side: 'lower' | 'upper' | null): ConformityDecision => {
    const decision: ConformityDecision = { ...base, verdict, guardBand: w, acceptance, side };
    if (note !== undefined) decision.note = note;
    return decision;
  };
  // distance beyond each tolerance limit (positive outside)
  const beyondLower = lower === null ? Number.NEGATIVE_INFINITY : lower - y;
  const beyondUpper = upper === null ? Number.NEGATIVE_INFINITY : y - upper;
  const side = beyondUpper >= beyondLower ? 'upper' : 'lower';
  const beyond = Math.max(beyondLower, beyondUpper); // > 0: outside the tolerance
  const inAcceptance = !empty && (acceptance.lower === null || y >= acceptance.lower) && (acceptance.upper === null || y <= acceptance.upper);
  if (rule.kind === 'simple') return beyond <= 0 ? out('pass', null) : out('fail', side);
  if (rule.kind === 'guarded') return inAcceptance ? out('pass', null) : out('fail', beyond > 0 ? side : nearestGuardSide(y, acceptance));
  if (inAcceptance) return out('pass', null);
  if (beyond <= 0) return out('conditional-pass', nearestGuardSide(y, acceptance));
  if (beyond <= w) return out('conditional-fail', side);
  return out('fail', side);
}

/** Inside the tolerance but outside the acceptance interval: which guard band holds the value. */
function nearestGuardSide(y: number, acceptance: SpecificationLimits): 'lower' | 'upper' {
  if (acceptance.upper !== null && y > acceptance.upper) return 'upper';
  if (acceptance.lower !== null && y < acceptance.lower) return 'lower';
  return 'upper';
}

/** The verdict under a rule and the conformance probability beside it: what a record carries. */
export interface ConformityAssessment extends ConformityDecision {
  probability: ConformanceProbability;
}

export function assessConformity(input: { value: number; standardUncertainty: number; dof: number | null; expandedUncertainty: number | null; limits: SpecificationLimits; rule: DecisionRule }): ConformityAssessment {
  const decision = decideConformity(input);
  const probability = conformanceProbability({ value: input.value, standardUncertainty: input.standardUncertainty, dof: input.dof, lower: input.limits.lower, upper: input.limits.upper });
  return { ...decision, probability };
}
