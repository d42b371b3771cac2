import { type BoundedShape, type DistributionShape, standardUncertaintyFromHalfWidth } from './distribution-shape.js';
import { dofFromReliability } from './reliability-dof.js';
import { certificateStandardUncertainty } from './certificate-uncertainty.js';

/**
 * Uncertainty components as pure values: the Type B evaluations a calibration or test engineer adds
 * to a channel's Type A uncertainty (JCGM 100:2008, GUM, 4.3), and the Type A one itself (4.2), each
 * reduced to an estimate, a standard uncertainty, a distribution and degrees of freedom.
 *
 * Kinds (the spec a configuration names):
 * - certificate: a reference's or sensor's calibration certificate, U with k or with a coverage
 *   probability (GUM 4.3.3, 4.3.4; certificate-uncertainty.ts); distribution normal.
 * - resolution: the indication's resolution (digit step) delta, rectangular of half-width delta / 2,
 *   u = delta / sqrt(12) (GUM F.2.2.1); proposed automatically for readings on a lattice
 *   (resolution-component.ts).
 * - drift: change of a reference or sensor since its calibration, within +/- a, or at a rate over the
 *   elapsed time (a = |rate| * elapsed, both in the caller's units); rectangular unless stated.
 * - stability: stability or uniformity of the source (a bath, a furnace, a flow loop) within +/- a;
 *   a live half-width comes from groupSpread (source-spread.ts); rectangular unless stated.
 * - installation: installation or immersion effects within +/- a; rectangular unless stated.
 * - rectangular, triangular, u-shaped: a free bounded component of half-width a (GUM 4.3.7, 4.3.9).
 * - normal: a free component with its standard uncertainty, or U and k.
 *
 * Degrees of freedom: stated (`dof`), or from the judged relative uncertainty of u (`reliability`,
 * GUM G.4.2: nu = 1/2 (Delta u / u)^-2), else infinite. A `shared` key names a source common to
 * several channels (the same reference thermometer, the same certificate): components with equal
 * keys are fully correlated where the channels meet in one result (combined-uncertainty.ts).
 * `sensitivity` is how the component enters its channel (1 for an additive correction in the
 * channel's unit; dT/dV for a voltmeter's certificate in a thermocouple channel).
 *
 * Cost: O(1) per component (one quantile for a certificate with a coverage probability).
 * @throws RangeError for a value no configuration check lets through (negative widths, both `dof`
 *   and `reliability`): the adapter validates first (src/config/uncertainty-config.ts).
 */
export type TypeBKind = 'certificate' | 'resolution' | 'drift' | 'stability' | 'installation' | 'rectangular' | 'triangular' | 'u-shaped' | 'normal';

export const TYPE_B_KINDS: readonly TypeBKind[] = ['certificate', 'resolution', 'drift', 'stability', 'installation', 'rectangular', 'triangular', 'u-shaped', 'normal'];

interface SpecBase {
  name: string;
  /** Estimate of the correction this component stands for (default 0). */
  estimate?: number;
  /** How the component enters its channel: c in channel units per component unit (default 1). */
  sensitivity?: number;
  /** Key of a source shared by several channels: equal keys are fully correlated. */
  shared?: string;
  /** Stated degrees of freedom of u. */
  dof?: number;
  /** Relative uncertainty of u (0.25 for "reliable to 25 %"), giving nu by GUM G.4.2. */
  reliability?: number;
}

export type TypeBSpec =
  | (SpecBase & { kind: 'certificate'; expanded: number; coverageFactor?: number; confidence?: number })
  | (SpecBase & { kind: 'resolution'; step: number })
  | (SpecBase & { kind: 'drift'; halfWidth?: number; rate?: number; elapsed?: number; shape?: BoundedShape })
  | (SpecBase & { kind: 'stability' | 'installation'; halfWidth: number; shape?: BoundedShape })
  | (SpecBase & { kind: 'rectangular' | 'triangular' | 'u-shaped'; halfWidth: number })
  | (SpecBase & { kind: 'normal'; standardUncertainty?: number; expanded?: number; coverageFactor?: number });

/** An evaluated component: what a budget row needs. */
export interface UncertaintyComponent {
  name: string;
  /** 'type-a' for the statistical evaluation of the readings, else the Type B kind. */
  kind: TypeBKind | 'type-a';
  evaluation: 'A' | 'B';
  distribution: DistributionShape;
  estimate: number;
  standardUncertainty: number;
  /** Degrees of freedom of u (Infinity when u is taken as known). */
  dof: number;
  sensitivity: number;
  shared: string | null;
  /** Half-width a for bounded distributions. */
  halfWidth: number | null;
  /** How u was obtained, in words ("U / k = 0.075 / 3", "a / sqrt(3), a = 0.05"). */
  basis: string;
}

export function evaluateTypeB(spec: TypeBSpec): UncertaintyComponent {
  if (spec.dof !== undefined && spec.reliability !== undefined) throw new RangeError(`${spec.name}: give dof or reliability, not both`);
  if (spec.dof !== undefined && !(spec.dof > 0)) throw new RangeError(`${spec.name}: degrees of freedom must be positive, got ${spec.dof}`);
  const sensitivity = spec.sensitivity ?? 1;
  if (!Number.isFinite(sensitivity)) throw new RangeError(`${spec.name}: sensitivity must be finite`);
  const estimate = spec.estimate ?? 0;
  const dof = spec.dof ?? dofFromReliability(spec.reliability);
  const base = { name: spec.name, kind: spec.kind, evaluation: 'B' as const, estimate, dof, sensitivity, shared: spec.shared ?? null };
  switch (spec.kind) {
    case 'certificate': {
      const statement = { expanded: spec.expanded, ...(spec.coverageFactor !== undefined ? { coverageFactor: spec.coverageFactor } : {}), ...(spec.confidence !== undefined ? { confidence: spec.confidence } : {}), ...(spec.dof !== undefined ? { dof: spec.dof } : {}) };
      const c = certificateStandardUncertainty(statement);
      const how = c.basis === 'coverage-factor' ? `U / k = ${spec.expanded} / ${c.divisor}` : c.basis === 'normal-quantile' ? `U / z = ${spec.expanded} / ${c.divisor.toFixed(3)} (normal, p = ${spec.confidence})` : `U / t_p(nu) = ${spec.expanded} / ${c.divisor.toFixed(3)}`;
      return { ...base, distribution: 'normal', standardUncertainty: c.standardUncertainty, halfWidth: null, basis: how };
    }
    case 'resolution': {
      if (!(spec.step > 0) || !Number.isFinite(spec.step)) throw new RangeError(`${spec.name}: resolution step must be positive, got ${spec.step}`);
      const halfWidth = spec.step / 2;
      return { ...base, distribution: 'rectangular', standardUncertainty: standardUncertaintyFromHalfWidth('rectangular', halfWidth), halfWidth, basis: `step / sqrt(12), step = ${spec.step}` };
    }
    case 'drift': {
      let halfWidth: number;
      let how: string;
      if (spec.halfWidth !== undefined) {
        if (spec.rate !== undefined || spec.elapsed !== undefined) throw new RangeError(`${spec.name}: give halfWidth, or rate and elapsed, not both`);
        halfWidth = spec.halfWidth;
        how = `a = ${halfWidth}`;
      } else {
        if (spec.rate === undefined || spec.elapsed === undefined) throw new RangeError(`${spec.name}: drift needs halfWidth, or rate and elapsed`);
        if (!(spec.elapsed >= 0) || !Number.isFinite(spec.rate)) throw new RangeError(`${spec.name}: drift needs a finite rate and a non-negative elapsed time`);
        halfWidth = Math.abs(spec.rate) * spec.elapsed;
        how = `a = |rate| x elapsed = ${Math.abs(spec.rate)} x ${spec.elapsed}`;
      }
      return bounded(base, spec.shape ?? 'rectangular', halfWidth, how);
    }
    case 'stability':
    case 'installation':
      return bounded(base, spec.shape ?? 'rectangular', spec.halfWidth, `a = ${spec.halfWidth}`);
    case 'rectangular':
    case 'triangular':
    case 'u-shaped':
      return bounded(base, spec.kind, spec.halfWidth, `a = ${spec.halfWidth}`);
    case 'normal': {
      if (spec.standardUncertainty !== undefined) {
        if (spec.expanded !== undefined) throw new RangeError(`${spec.name}: give standardUncertainty, or expanded and coverageFactor, not both`);
        if (!(spec.standardUncertainty >= 0) || !Number.isFinite(spec.standardUncertainty)) throw new RangeError(`${spec.name}: standard uncertainty must be finite and non-negative`);
        return { ...base, distribution: 'normal', standardUncertainty: spec.standardUncertainty, halfWidth: null, basis: `u = ${spec.standardUncertainty}` };
      }
      if (spec.expanded === undefined || spec.coverageFactor === undefined) throw new RangeError(`${spec.name}: normal needs standardUncertainty, or expanded and coverageFactor`);
      const c = certificateStandardUncertainty({ expanded: spec.expanded, coverageFactor: spec.coverageFactor });
      return { ...base, distribution: 'normal', standardUncertainty: c.standardUncertainty, halfWidth: null, basis: `U / k = ${spec.expanded} / ${spec.coverageFactor}` };
    }
  }
}

function bounded(base: Omit<UncertaintyComponent, 'distribution' | 'standardUncertainty' | 'halfWidth' | 'basis'>, shape: BoundedShape, halfWidth: number, how: string): UncertaintyComponent {
  if (!(halfWidth >= 0) || !Number.isFinite(halfWidth)) throw new RangeError(`${base.name}: half-width must be finite and non-negative, got ${halfWidth}`);
  const divisor = shape === 'rectangular' ? 'sqrt(3)' : shape === 'triangular' ? 'sqrt(6)' : 'sqrt(2)';
  return { ...base, distribution: shape, standardUncertainty: standardUncertaintyFromHalfWidth(shape, halfWidth), halfWidth, basis: `a / ${divisor}, ${how}` };
}

/**
 * The Type A component: the autocorrelation-aware standard uncertainty of a channel's windowed mean
 * (mean-uncertainty.ts, GUM 4.2 with the GUM 4.2.7 caution) and its degrees of freedom, as a budget
 * entry. Distribution normal (a t with nu degrees of freedom when nu is finite, GUM G.3).
 */
export function typeAComponent(input: { name: string; standardUncertainty: number; dof: number; estimate?: number; sensitivity?: number; shared?: string }): UncertaintyComponent {
  if (!(input.standardUncertainty >= 0) || !Number.isFinite(input.standardUncertainty)) throw new RangeError(`${input.name}: Type A standard uncertainty must be finite and non-negative`);
  if (!(input.dof > 0)) throw new RangeError(`${input.name}: Type A degrees of freedom must be positive, got ${input.dof}`);
  return {
    name: input.name,
    kind: 'type-a',
    evaluation: 'A',
    distribution: 'normal',
    estimate: input.estimate ?? 0,
    standardUncertainty: input.standardUncertainty,
    dof: input.dof,
    sensitivity: input.sensitivity ?? 1,
    shared: input.shared ?? null,
    halfWidth: null,
    basis: 'statistical analysis of the readings',
  };
}
