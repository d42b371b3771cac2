import { coverageFactor } from './coverage-factor.js';
import { effectiveDegreesOfFreedom, truncateDegreesOfFreedom } from './welch-satterthwaite.js';
import type { UncertaintyComponent } from './type-b-component.js';
import type { DistributionShape } from './distribution-shape.js';

/**
 * Combined standard uncertainty of a result from its input quantities and their uncertainty
 * components, with the budget, Welch-Satterthwaite effective degrees of freedom, coverage factor and
 * expanded uncertainty.
 *
 * Model: y = f(x_1, ..., x_p) with sensitivity coefficients c_i = df/dx_i at the estimates (the
 * caller evaluates f and its derivatives); each input x_i carries components j with their own
 * sensitivity c_ij (1 for an additive correction) and standard uncertainty u_ij. Each component is
 * an input quantity of the GUM's model in its own right, entering y with c_i c_ij.
 *
 * Law of propagation (JCGM 100:2008, GUM, 5.1.2 eq. (10) for independent inputs, 5.2.2 eq. (13) for
 * correlated ones): components are independent, except that components with the same `shared` key
 * (the same reference, the same certificate) are fully correlated, r = +1 (GUM 5.2.2 Note 1, from
 * memory: the same standard used in several places). So the sources of uncertainty are the
 * unshared components and one source per shared key, each independent of the others, and
 *   u_c^2(y) = sum over sources s of (sum over its members m of c_i c_ij u_ij)^2.
 * Written per component, that is the sum of the variance terms (c_i c_ij u_ij)^2 plus, for every
 * pair of members of one shared source, the covariance term 2 (c_i c_ij u_ij)(c_k c_kl u_kl); the
 * budget lists both, and the shares (each term over u_c^2) add to one. Two channels that share a
 * certificate and enter a difference get covariance terms that cancel their certificate's variance
 * terms: the shared part drops out, as it should.
 * Effective degrees of freedom: Welch-Satterthwaite (GUM G.4.1, eq. (G.2b), welch-satterthwaite.ts)
 * over the sources, which are independent, so the formula applies as derived. A shared source whose
 * members state different nu takes the smallest (a note says so). k = t_p(nu_eff) from
 * coverage-factor.ts with nu_eff truncated to the next lower integer by default (G.4.1 and H.1.6;
 * `dofRounding: 'fractional'` interpolates), U = k u_c (GUM 6.2.1, G.6).
 * Per input the budget also gives u(x_i) with its own nu_i (Welch-Satterthwaite over the input's
 * components) and, for inputs joined by shared components, u(x_i, x_k) and the term
 * 2 c_i c_k u(x_i, x_k): the same covariance the component terms add up to, at the level of the
 * channels.
 *
 * Cost: O(m + g^2) for m components in all and g members in the largest shared source, O(m) memory.
 * @throws RangeError when a sensitivity or estimate is not finite or no input is given.
 */
export interface BudgetInput {
  /** The input quantity: a channel, a named constant. */
  name: string;
  estimate: number;
  /** c_i = df/dx_i at the estimates (1 for a channel reported on its own). */
  sensitivity: number;
  components: readonly UncertaintyComponent[];
}

export interface CombineOptions {
  confidence: number;
  /** How nu_eff enters t_p: truncated to the next lower integer (default, GUM G.4.1) or real-valued. */
  dofRounding?: 'truncate' | 'fractional';
}

/** One line of the budget: one component of one input. JSON-safe: an infinite nu is null. */
export interface BudgetRow {
  input: string;
  component: string;
  kind: UncertaintyComponent['kind'];
  evaluation: 'A' | 'B';
  estimate: number;
  standardUncertainty: number;
  distribution: DistributionShape;
  /** c_i c_ij: how the component moves the result. */
  sensitivity: number;
  /** c_i c_ij u_ij, signed. */
  contribution: number;
  /** nu of u_ij; null = infinite (taken as known). */
  dof: number | null;
  /** contribution^2 / u_c^2; null when u_c = 0. */
  share: number | null;
  shared: string | null;
  basis: string;
}

export interface CovarianceTerm {
  shared: string;
  /** Indices into rows of the two members. */
  rows: [number, number];
  /** 2 c u c u of the pair (fully correlated). */
  term: number;
  share: number | null;
}

export interface InputSummary {
  name: string;
  estimate: number;
  sensitivity: number;
  /** u(x_i) from the input's components. */
  standardUncertainty: number;
  /** nu_i (Welch-Satterthwaite over the input's components); null = infinite. */
  dof: number | null;
  /** c_i u(x_i), signed. */
  contribution: number;
  share: number | null;
}

export interface InputCovariance {
  a: string;
  b: string;
  /** u(x_a, x_b) from their shared components. */
  covariance: number;
  correlation: number;
  /** 2 c_a c_b u(x_a, x_b). */
  term: number;
  share: number | null;
}

export interface CombinedUncertainty {
  standardUncertainty: number;
  variance: number;
  /** Welch-Satterthwaite nu_eff; null = infinite or undefined (see dofNote). */
  dof: number | null;
  dofNote?: string;
  /** The nu used for k (truncated or real); null = infinity. */
  coverageDof: number | null;
  coverageFactor: number | null;
  expandedUncertainty: number | null;
  confidence: number;
  dofRounding: 'truncate' | 'fractional';
  rows: BudgetRow[];
  covarianceTerms: CovarianceTerm[];
  inputs: InputSummary[];
  inputCovariances: InputCovariance[];
}

interface Source {
  members: number[];
  contribution: number;
  dof: number;
}

export function combineUncertainty(inputs: readonly BudgetInput[], options: CombineOptions): CombinedUncertainty {
  if (inputs.length === 0) throw new RangeError('combineUncertainty requires at least one input');
  const rounding = options.dofRounding ?? 'truncate';
  const rows: BudgetRow[] = [];
  const sources: Source[] = [];
  const sharedSources = new Map<string, Source>();
  const notes: string[] = [];
  const rowInput: number[] = [];
  const rowOwn: number[] = []; // c_ij of each row's component
  inputs.forEach((input, inputIndex) => {
    if (!Number.isFinite(input.sensitivity)) throw new RangeError(`combineUncertainty: sensitivity of ${input.name} is not finite`);
    if (!Number.isFinite(input.estimate)) throw new RangeError(`combineUncertainty: estimate of ${input.name} is not finite`);
    for (const component of input.components) {
      const sensitivity = input.sensitivity * component.sensitivity;
      const contribution = sensitivity * component.standardUncertainty;
      if (!Number.isFinite(contribution)) throw new RangeError(`combineUncertainty: contribution of ${input.name} / ${component.name} is not finite`);
      const index = rows.length;
      rows.push({
        input: input.name,
        component: component.name,
        kind: component.kind,
        evaluation: component.evaluation,
        estimate: component.estimate,
        standardUncertainty: component.standardUncertainty,
        distribution: component.distribution,
        sensitivity,
        contribution,
        dof: finiteOrNull(component.dof),
        share: null,
        shared: component.shared,
        basis: component.basis,
      });
      rowInput.push(inputIndex);
      rowOwn.push(component.sensitivity);
      if (component.shared === null) {
        sources.push({ members: [index], contribution, dof: component.dof });
        continue;
      }
      const source = sharedSources.get(component.shared);
      if (source === undefined) {
        const created = { members: [index], contribution, dof: component.dof };
        sharedSources.set(component.shared, created);
        sources.push(created);
      } else {
        if (component.dof !== source.dof) notes.push(`shared source ${component.shared} has members with different degrees of freedom: the smallest is used`);
        source.members.push(index);
        source.contribution += contribution;
        source.dof = Math.min(source.dof, component.dof);
      }
    }
  });

  let variance = 0;
  for (const source of sources) variance += source.contribution * source.contribution;
  const standardUncertainty = Math.sqrt(variance);
  const share = (term: number) => (variance > 0 ? term / variance : null);
  for (const row of rows) row.share = share(row.contribution * row.contribution);

  const covarianceTerms: CovarianceTerm[] = [];
  for (const [key, source] of sharedSources) {
    const m = source.members;
    for (let p = 0; p < m.length; p++) {
      for (let q = p + 1; q < m.length; q++) {
        const term = 2 * (rows[m[p] as number] as BudgetRow).contribution * (rows[m[q] as number] as BudgetRow).contribution;
        covarianceTerms.push({ shared: key, rows: [m[p] as number, m[q] as number], term, share: share(term) });
      }
    }
  }

  const nu = effectiveDegreesOfFreedom(sources.map((s) => ({ contribution: s.contribution, dof: s.dof })), variance);
  const dof: number | null = nu === null || nu === Number.POSITIVE_INFINITY ? null : nu;
  let dofNote: string | undefined;
  if (nu === null) dofNote = 'combined standard uncertainty is zero: effective degrees of freedom undefined';
  if (notes.length > 0) dofNote = [dofNote, ...new Set(notes)].filter(Boolean).join('; ');
  const coverageDof = dof === null ? null : rounding === 'truncate' ? truncateDegreesOfFreedom(dof) : dof;
  const k = coverageFactor(options.confidence, coverageDof ?? Number.POSITIVE_INFINITY);

  const { summaries, covariances } = inputLevel(inputs, rows, rowInput, rowOwn, sharedSources, share);
  const result: CombinedUncertainty = {
    standardUncertainty,
    variance,
    dof,
    coverageDof,
    coverageFactor: k,
    expandedUncertainty: k === null ? null : k * standardUncertainty,
    confidence: options.confidence,
    dofRounding: rounding,
    rows,
    covarianceTerms,
    inputs: summaries,
    inputCovariances: covariances,
  };
  if (dofNote !== undefined) result.dofNote = dofNote;
  return result;
}

/** u(x_i), nu_i and the covariances between inputs joined by shared components. */
function inputLevel(inputs: readonly BudgetInput[], rows: BudgetRow[], rowInput: number[], rowOwn: number[], sharedSources: Map<string, Source>, share: (term: number) => number | null) {
  const summaries: InputSummary[] = inputs.map((input, i) => {
    // per input: its own sources (components with one shared key inside one input add up)
    const own = new Map<string, { contribution: number; dof: number }>();
    const terms: { contribution: number; dof: number }[] = [];
    rows.forEach((row, r) => {
      if (rowInput[r] !== i) return;
      const c = row.standardUncertainty * (rowOwn[r] as number);
      const nuRow = row.dof ?? Number.POSITIVE_INFINITY;
      if (row.shared === null) terms.push({ contribution: c, dof: nuRow });
      else {
        const entry = own.get(row.shared);
        if (entry) {
          entry.contribution += c;
          entry.dof = Math.min(entry.dof, nuRow);
        } else own.set(row.shared, { contribution: c, dof: nuRow });
      }
    });
    for (const entry of own.values()) terms.push(entry);
    let v = 0;
    for (const t of terms) v += t.contribution * t.contribution;
    const u = Math.sqrt(v);
    const nu = effectiveDegreesOfFreedom(terms, v);
    const contribution = input.sensitivity * u;
    return { name: input.name, estimate: input.estimate, sensitivity: input.sensitivity, standardUncertainty: u, dof: nu === null || nu === Number.POSITIVE_INFINITY ? null : nu, contribution, share: share(contribution * contribution) };
  });
  const covariances: InputCovariance[] = [];
  for (let a = 0; a < inputs.length; a++) {
    for (let b = a + 1; b < inputs.length; b++) {
      let covariance = 0;
      let joined = false;
      for (const source of sharedSources.values()) {
        let sa = 0;
        let sb = 0;
        for (const m of source.members) {
          const row = rows[m] as BudgetRow;
          if (rowInput[m] === a) sa += row.standardUncertainty * (rowOwn[m] as number);
          if (rowInput[m] === b) sb += row.standardUncertainty * (rowOwn[m] as number);
        }
        if (sa !== 0 && sb !== 0) {
          joined = true;
          covariance += sa * sb;
        }
      }
      if (!joined) continue;
      const ua = (summaries[a] as InputSummary).standardUncertainty;
      const ub = (summaries[b] as InputSummary).standardUncertainty;
      const term = 2 * (inputs[a] as BudgetInput).sensitivity * (inputs[b] as BudgetInput).sensitivity * covariance;
      covariances.push({ a: (inputs[a] as BudgetInput).name, b: (inputs[b] as BudgetInput).name, covariance, correlation: ua > 0 && ub > 0 ? Math.max(-1, Math.min(1, covariance / (ua * ub))) : 0, term, share: share(term) });
    }
  }
  return { summaries, covariances };
}

function finiteOrNull(nu: number): number | null {
  return Number.isFinite(nu) ? nu : null;
}

/**
 * The split the stopping rule needs (dominance-stop.ts): the Type A variance terms and their
 * Welch-Satterthwaite denominator, and the rest of u_c^2 with the denominator of its (independent)
 * sources, shared components merged as in combineUncertainty.
 * Cost: O(rows).
 */
export function typeASplit(combined: CombinedUncertainty): { typeAVariance: number; typeADofDenominator: number; typeADof: number | null; otherVariance: number; otherDofDenominator: number } {
  let typeAVariance = 0;
  let typeADofDenominator = 0;
  const others = new Map<string, { contribution: number; dof: number | null }>();
  combined.rows.forEach((row, i) => {
    if (row.evaluation === 'A') {
      const v = row.contribution * row.contribution;
      typeAVariance += v;
      if (row.dof !== null) typeADofDenominator += (v * v) / row.dof;
      return;
    }
    const key = row.shared === null ? `#${i}` : `shared:${row.shared}`;
    const entry = others.get(key);
    if (entry) {
      entry.contribution += row.contribution;
      if (row.dof !== null) entry.dof = entry.dof === null ? row.dof : Math.min(entry.dof, row.dof);
    } else others.set(key, { contribution: row.contribution, dof: row.dof });
  });
  let otherVariance = 0;
  let otherDofDenominator = 0;
  for (const { contribution, dof } of others.values()) {
    const v = contribution * contribution;
    otherVariance += v;
    if (dof !== null) otherDofDenominator += (v * v) / dof;
  }
  const typeADof = typeADofDenominator > 0 ? (typeAVariance * typeAVariance) / typeADofDenominator : null;
  return { typeAVariance, typeADofDenominator, typeADof, otherVariance, otherDofDenominator };
}
