import { TIME_EPSILON } from '../../core/criteria/time-grid.js';
import type { CriterionState } from './criteria-tracker.js';

/**
 * Readiness policy: when a channel (and so a test point) is ready to record, combining the
 * statistical verdict (steady state confirmed, target precision met: channel-verdict.ts) with the
 * procedure's stability criteria.
 *
 *   statistical  the statistical verdict alone (the default without rules)
 *   rules        every configured rule holds
 *   both         both (the default when rules are configured)
 *
 * Evidence for the record: per rule, whether it held throughout the recorded window (it holds now
 * and has held since before the window began), its value, tolerance and margin now, and the
 * smallest margin since its condition became met. A rule that holds now but began to hold inside
 * the window did not hold for the whole data period, and the record says so.
 * Pure and O(rules); the window is read against the rules' current state, so call it with the
 * window that ends at the newest sample.
 */
export type ReadinessPolicy = 'statistical' | 'rules' | 'both';

export const READINESS_POLICIES: readonly ReadinessPolicy[] = ['statistical', 'rules', 'both'];

export interface StatisticalVerdict {
  ready: boolean;
  /** Why not, one line each (empty when ready). */
  reasons: string[];
}

export interface CriterionEvidence {
  name: string;
  preset: string | null;
  source: string | null;
  /** The tolerance in words. */
  rule: string;
  holds: boolean;
  /** Held for the whole recorded window; null when no window was given. */
  heldOverWindow: boolean | null;
  since: number | null;
  holdsFrom: number | null;
  value: number | null;
  tolerance: number | null;
  margin: number | null;
  worstMargin: number | null;
  setPoint: number | null;
}

export interface Readiness {
  policy: ReadinessPolicy;
  ready: boolean;
  statistical: StatisticalVerdict;
  rules: { ready: boolean; count: number; evidence: CriterionEvidence[] };
  /** Why not ready under the policy, one line each (empty when ready). */
  reasons: string[];
}

/** The policy when none is configured: both when there are rules, else the statistical verdict. */
export function defaultPolicy(ruleCount: number): ReadinessPolicy {
  return ruleCount > 0 ? 'both' : 'statistical';
}

export function combineReadiness(input: {
  policy?: ReadinessPolicy | null;
  statistical: StatisticalVerdict;
  criteria: readonly CriterionState[];
  /** The recorded window (times of its first and last sample). */
  window?: { startTime: number; endTime: number } | null;
}): Readiness {
  const criteria = input.criteria;
  const policy = input.policy ?? defaultPolicy(criteria.length);
  const window = input.window ?? null;
  const evidence: CriterionEvidence[] = criteria.map((c) => ({
    name: c.name,
    preset: c.preset,
    source: c.source,
    rule: c.rule,
    holds: c.holds,
    heldOverWindow: window === null ? null : c.holds && c.holdsFrom !== null && c.holdsFrom <= window.startTime + TIME_EPSILON,
    since: c.since,
    holdsFrom: c.holdsFrom,
    value: c.value,
    tolerance: c.tolerance,
    margin: c.margin,
    worstMargin: c.worstMargin,
    setPoint: c.setPoint,
  }));
  const rulesReady = criteria.length > 0 && criteria.every((c) => c.holds);
  const ruleReasons: string[] = criteria.length === 0 ? ['no stability rules are configured'] : criteria.filter((c) => !c.holds).map((c) => `rule ${c.name}: ${c.pending ?? 'does not hold'}`);
  const statisticalReasons = input.statistical.ready || input.statistical.reasons.length > 0 ? [...input.statistical.reasons] : ['the statistical verdict is not ready'];
  const statistical = { ready: input.statistical.ready, reasons: statisticalReasons };
  let ready: boolean;
  let reasons: string[];
  if (policy === 'statistical') {
    ready = statistical.ready;
    reasons = ready ? [] : statistical.reasons;
  } else if (policy === 'rules') {
    ready = rulesReady;
    reasons = ready ? [] : ruleReasons;
  } else {
    ready = statistical.ready && rulesReady;
    reasons = ready ? [] : [...(statistical.ready ? [] : statistical.reasons), ...(rulesReady ? [] : ruleReasons)];
  }
  return { policy, ready, statistical, rules: { ready: rulesReady, count: criteria.length, evidence }, reasons };
}
