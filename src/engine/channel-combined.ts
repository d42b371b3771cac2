import { combineUncertainty, typeASplit, type CombinedUncertainty } from '../core/uncertainty/combined-uncertainty.js';
import { evaluateTypeB, typeAComponent, type UncertaintyComponent } from '../core/uncertainty/type-b-component.js';
import { proposeResolutionComponent } from '../core/uncertainty/resolution-component.js';
import { stoppingStatus, type ConditionStatus } from '../core/uncertainty/dominance-stop.js';
import type { TargetSpec } from '../core/uncertainty/target-precision.js';
import { assessConformity } from '../core/conformity/decision-rule.js';
import type { DecisionRuleKind, SpecificationLimits, Verdict } from '../core/conformity/decision-rule.js';
import type { Lattice } from '../core/resolution/lattice.js';
import type { ConformitySpec, UncertaintySettings } from './channel-options.js';
import type { ChannelVerdict, VerdictCondition } from './channel-verdict.js';
import { formatSamples } from './warmup-detector.js';

/**
 * A result's combined standard uncertainty with its budget, the stopping rule and conformity with a
 * decision rule (issue 10), for a channel (from its Type A u and nu) and, through
 * `combinedReport`, for a derived result. Pure and deterministic: it reads the snapshot's numbers
 * and the configured settings, nothing else, so the daemon and `plateau analyze` agree.
 *
 * - Inputs: the Type A component (the pipeline's autocorrelation-aware u and nu of the windowed
 *   mean, GUM 4.2), the configured Type B components (GUM 4.3, type-b-component.ts) and, when the
 *   readings lie on a coarse lattice and no resolution component is configured, the proposed
 *   resolution component (GUM F.2.2.1, resolution-component.ts), marked as proposed.
 * - u_c by the law of propagation with fully correlated shared sources (combined-uncertainty.ts,
 *   GUM 5.1.2 and 5.2.2), nu_eff by Welch-Satterthwaite (GUM G.4.1), k = t_p(nu_eff), U = k u_c.
 * - The value: the mean plus the estimates of the components (corrections; 0 unless configured),
 *   each times its sensitivity (GUM 3.2.4: a result is corrected for recognised systematic effects).
 * - Stopping (dominance-stop.ts): with a dominance fraction f, stop when u_A <= f u_c; with a
 *   combined target, when u_c (or U) meets it; whichever comes first, and the wait names the one
 *   expected first. Without f the target alone decides.
 * - Conformity (decision-rule.ts, conformance-probability.ts): the verdict of the stated rule at the
 *   value with U, and the conformance probability with u_c and nu_eff (JCGM 106:2012, clause 7).
 * Cost: O(components) plus a few t quantiles.
 */
export interface BudgetLine {
  /** The input quantity: the channel, a constant, or "readings" for a derived result's Type A part. */
  quantity: string;
  /** The component's name ("Type A: ..." for the statistical evaluation). */
  component: string;
  /** A: statistical; B: otherwise; covariance: a term between two correlated rows. */
  evaluation: 'A' | 'B' | 'covariance';
  kind: string;
  estimate: number | null;
  standardUncertainty: number | null;
  distribution: string;
  /** How the component moves the result (c_i c_ij); null for a covariance line. */
  sensitivity: number | null;
  /** c u for a component, the covariance term 2 c c u u r for a covariance line. */
  contribution: number;
  /** Degrees of freedom; null = infinite (taken as known). */
  dof: number | null;
  /** contribution^2 / u_c^2 (the term itself for a covariance line); the shares add to one. */
  share: number | null;
  shared: string | null;
  basis: string;
  /** Proposed from the readings rather than configured. */
  proposed: boolean;
}

export interface StoppingReport {
  stop: boolean;
  reason: 'target' | 'dominance' | null;
  waitingFor: 'target' | 'dominance' | null;
  samplesToStop: number | null;
  secondsToStop: number | null;
  /** u_A / u_c now. */
  typeARatio: number | null;
  /** f of u_A <= f u_c; null without the dominance rule. */
  fraction: number | null;
  dominance: ConditionStatus | null;
  target: (ConditionStatus & { basis: 'combined' | 'type-a'; on: 'u' | 'U'; bound: number | null; achieved: number | null }) | null;
}

export interface CombinedReport {
  /** The mean corrected by the components' estimates. */
  value: number;
  standardUncertainty: number;
  dof: number | null;
  coverageFactor: number | null;
  expandedUncertainty: number | null;
  confidence: number;
  /** The Type A part alone. */
  typeA: { standardUncertainty: number; dof: number | null };
  budget: BudgetLine[];
  stopping: StoppingReport | null;
  notes: string[];
}

export interface ConformityReport {
  rule: DecisionRuleKind;
  lower: number | null;
  upper: number | null;
  /** w used on each side (0 for simple acceptance); null when it needs U and there is none. */
  guardBand: number | null;
  acceptance: SpecificationLimits;
  verdict: Verdict | null;
  /** Conformance probability p_c (JCGM 106); null when it cannot be computed. */
  probability: number | null;
  /** The limit that decided a verdict other than pass. */
  side: 'lower' | 'upper' | null;
  /** The value judged (the corrected mean) and the U used. */
  value: number;
  expandedUncertainty: number | null;
  note?: string;
}

/** An input of a combined report: a quantity with its sensitivity and its components. */
export interface CombinedInput {
  name: string;
  estimate: number;
  sensitivity: number;
  components: UncertaintyComponent[];
  /** Names of components proposed from the readings. */
  proposed?: string[];
}

/** Extra covariance lines (a derived result's correlated Type A inputs), already in u_c^2. */
export interface ExtraCovariance {
  quantity: string;
  component: string;
  term: number;
}

export function combinedReport(
  inputs: CombinedInput[],
  options: { confidence: number; value: number; n: number; mean: number; rate: number | null; capacity: number; settings: Pick<UncertaintySettings, 'combinedTarget' | 'dominanceFraction'>; typeATarget?: TargetSpec | null; typeAOverride?: { rows: BudgetLine[]; covariance: ExtraCovariance[] } },
): CombinedReport {
  const combined = combineUncertainty(inputs, { confidence: options.confidence });
  const proposed = new Set(inputs.flatMap((i) => (i.proposed ?? []).map((c) => `${i.name}\u0000${c}`)));
  const share = (term: number) => (combined.variance > 0 ? term / combined.variance : null);
  let budget: BudgetLine[] = combined.rows.map((row) => ({
    quantity: row.input,
    component: row.component,
    evaluation: row.evaluation,
    kind: row.kind,
    estimate: row.estimate,
    standardUncertainty: row.standardUncertainty,
    distribution: row.distribution,
    sensitivity: row.sensitivity,
    contribution: row.contribution,
    dof: row.dof,
    share: row.share,
    shared: row.shared,
    basis: row.basis,
    proposed: proposed.has(`${row.input}\u0000${row.component}`),
  }));
  if (options.typeAOverride) {
    // a derived result: its Type A part entered as one joint source; show it per channel with the covariance line
    const rest = budget.filter((line) => line.evaluation !== 'A');
    budget = [...options.typeAOverride.rows.map((line) => ({ ...line, share: share(line.contribution * line.contribution) })), ...rest];
    for (const c of options.typeAOverride.covariance) budget.push({ quantity: c.quantity, component: c.component, evaluation: 'covariance', kind: 'covariance', estimate: null, standardUncertainty: null, distribution: 'correlated (from the readings)', sensitivity: null, contribution: c.term, dof: null, share: share(c.term), shared: null, basis: '2 c_i c_j u(x_i, x_j) of the channel means over the common rows', proposed: false });
  }
  for (const term of combined.covarianceTerms) {
    const a = combined.rows[term.rows[0]];
    const b = combined.rows[term.rows[1]];
    if (!a || !b) continue;
    budget.push({ quantity: `${a.input} / ${b.input}`, component: `${a.component} with ${b.component} (shared: ${term.shared})`, evaluation: 'covariance', kind: 'covariance', estimate: null, standardUncertainty: null, distribution: 'fully correlated', sensitivity: null, contribution: term.term, dof: null, share: term.share, shared: term.shared, basis: 'the same source in both: r = +1 (GUM 5.2.2)', proposed: false });
  }
  const split = typeASplit(combined);
  const notes: string[] = [];
  if (combined.dofNote) notes.push(combined.dofNote);
  for (const line of budget) if (line.proposed) notes.push(`${line.component}: proposed because the readings lie on a lattice (step ${((line.standardUncertainty ?? 0) * Math.sqrt(12)).toPrecision(3)}); configure a resolution component, or proposeResolution: false, to replace it`);
  return {
    value: options.value,
    standardUncertainty: combined.standardUncertainty,
    dof: combined.dof,
    coverageFactor: combined.coverageFactor,
    expandedUncertainty: combined.expandedUncertainty,
    confidence: options.confidence,
    typeA: { standardUncertainty: Math.sqrt(split.typeAVariance), dof: split.typeADof },
    budget,
    stopping: stopping(combined, options),
    notes,
  };
}

function stopping(combined: CombinedUncertainty, options: Parameters<typeof combinedReport>[1]): StoppingReport | null {
  const f = options.settings.dominanceFraction;
  const combinedTarget = options.settings.combinedTarget;
  const typeATarget = options.typeATarget ?? null;
  if (f === null && combinedTarget === null) return null;
  const target = combinedTarget !== null ? { ...combinedTarget, basis: 'combined' as const } : typeATarget !== null && f !== null ? { ...typeATarget, basis: 'type-a' as const } : null;
  const split = typeASplit(combined);
  const status = stoppingStatus(
    { fraction: f ?? 0.5, target },
    {
      n: options.n,
      mean: options.mean,
      typeAVariance: split.typeAVariance,
      typeADofDenominator: split.typeADofDenominator,
      otherVariance: split.otherVariance,
      otherDofDenominator: split.otherDofDenominator,
      typeADof: split.typeADof ?? Number.POSITIVE_INFINITY,
      confidence: options.confidence,
      rate: options.rate,
      capacity: options.capacity,
    },
  );
  const targetReport = status.target === null || target === null ? null : { ...status.target, on: target.on };
  if (f !== null) return { ...status, target: targetReport };
  const t = targetReport as NonNullable<typeof targetReport>;
  return {
    stop: t.met,
    reason: t.met ? 'target' : null,
    waitingFor: !t.met && t.samplesToMeet !== null ? 'target' : null,
    samplesToStop: t.met ? 0 : t.samplesToMeet,
    secondsToStop: t.met ? 0 : t.secondsToMeet,
    typeARatio: status.typeARatio,
    fraction: null,
    dominance: null,
    target: t,
  };
}

export function conformityReport(spec: ConformitySpec, combined: CombinedReport): ConformityReport {
  const a = assessConformity({ value: combined.value, standardUncertainty: combined.standardUncertainty, dof: combined.dof, expandedUncertainty: combined.expandedUncertainty, limits: spec.limits, rule: spec.rule });
  const out: ConformityReport = {
    rule: a.rule,
    lower: spec.limits.lower,
    upper: spec.limits.upper,
    guardBand: a.guardBand,
    acceptance: a.acceptance,
    verdict: a.verdict,
    probability: a.probability.probability,
    side: a.side,
    value: combined.value,
    expandedUncertainty: combined.expandedUncertainty,
  };
  const notes = [a.note, a.probability.note].filter((n): n is string => n !== undefined);
  if (notes.length > 0) out.note = notes.join('; ');
  return out;
}

/** What a channel's snapshot gives the combined report. */
export interface ChannelCombinedInput {
  name: string;
  mean: number;
  n: number;
  standardUncertainty: number;
  dof: number;
  confidence: number;
  rate: number | null;
  capacity: number;
  lattice: Lattice | null;
  settings: UncertaintySettings;
  typeATarget: TargetSpec | null;
}

/** The channel's Type B components, evaluated, with the proposed resolution component. */
export function channelComponents(name: string, settings: UncertaintySettings, lattice: Lattice | null, typeA: { standardUncertainty: number; dof: number } | null): { components: UncertaintyComponent[]; proposed: string[] } {
  const components: UncertaintyComponent[] = [];
  if (typeA !== null) components.push(typeAComponent({ name: 'Type A: scatter of the readings (autocorrelation-aware)', standardUncertainty: typeA.standardUncertainty, dof: typeA.dof }));
  for (const spec of settings.typeB) components.push(evaluateTypeB(spec));
  const proposed: string[] = [];
  if (settings.proposeResolution && !settings.typeB.some((s) => s.kind === 'resolution')) {
    const spec = proposeResolutionComponent(lattice);
    if (spec !== null) {
      components.push(evaluateTypeB(spec));
      proposed.push(spec.name);
    }
  }
  void name;
  return { components, proposed };
}

export function channelCombined(input: ChannelCombinedInput): { combined: CombinedReport; conformity: ConformityReport | null } {
  const { components, proposed } = channelComponents(input.name, input.settings, input.lattice, { standardUncertainty: input.standardUncertainty, dof: input.dof });
  const correction = components.reduce((sum, c) => sum + c.sensitivity * c.estimate, 0);
  const combined = combinedReport([{ name: input.name, estimate: input.mean, sensitivity: 1, components, proposed }], {
    confidence: input.confidence,
    value: input.mean + correction,
    n: input.n,
    mean: input.mean,
    rate: input.rate,
    capacity: input.capacity,
    settings: input.settings,
    typeATarget: input.typeATarget,
  });
  if (correction !== 0) combined.notes.push(`corrected for the components' estimates: ${correction.toPrecision(4)} added to the mean`);
  return { combined, conformity: input.settings.conformity === null ? null : conformityReport(input.settings.conformity, combined) };
}

/**
 * The verdict with the stopping rule: a pending `stopping` condition naming what it waits for (the
 * dominance rule or the combined target) with the samples and time to go while the channel is
 * steady; when the dominance rule has stopped, a pending Type A target is no longer needed.
 */
export function verdictWithStopping(verdict: ChannelVerdict, stoppingReport: StoppingReport | null, steady: boolean): ChannelVerdict {
  if (stoppingReport === null) return verdict;
  let pending = verdict.pending;
  if (stoppingReport.stop && stoppingReport.reason === 'dominance') pending = pending.filter((p) => p.condition !== 'target');
  if (!stoppingReport.stop) pending = [...pending, stoppingCondition(stoppingReport, steady)];
  return { ready: pending.length === 0, summary: pending.length === 0 ? 'ready to record' : (pending[0] as VerdictCondition).message, pending };
}

function stoppingCondition(s: StoppingReport, steady: boolean): VerdictCondition {
  const ratio = s.typeARatio === null ? '' : ` (u_A = ${s.typeARatio.toFixed(2)} u_c now)`;
  const t = s.target;
  const targetText = t === null ? '' : `${t.basis === 'combined' ? 'combined' : 'Type A'} target ${t.on === 'U' ? 'U' : 'u'} <= ${t.bound === null ? 'n/a' : t.bound.toPrecision(3)}${t.achieved === null ? '' : ` (now ${t.achieved.toPrecision(3)})`}`;
  const dominanceText = s.fraction === null ? '' : `u_A <= ${s.fraction} u_c${ratio}`;
  const toGo = steady ? s.samplesToStop : null;
  const eta = toGo !== null && toGo > 0 ? `: about ${formatSamples(toGo)} more samples` : '';
  let message: string;
  if (s.waitingFor === 'dominance') message = `waiting for the statistical part to stop mattering, ${dominanceText}${steady ? eta : ' (no estimate of the time to go until the channel is steady)'}${t && !t.met ? `; the ${targetText} comes later` : ''}`;
  else if (s.waitingFor === 'target') message = `waiting for the ${targetText}${steady ? eta : ' (no estimate of the time to go until the channel is steady)'}${s.fraction !== null ? `; ${dominanceText} comes later` : ''}`;
  else {
    const why = [t?.note, s.dominance?.note].filter(Boolean).join('; ');
    message = `the stopping rule cannot be met in this window${why ? `: ${why}` : ''}`;
  }
  return { condition: 'stopping', message, samplesToGo: toGo, secondsToGo: steady && toGo !== null ? (s.secondsToStop ?? null) : null };
}
