import { ConfigReader, describe, join, type Plain } from './config-reader.js';
import { TYPE_B_KINDS, type TypeBKind, type TypeBSpec } from '../core/uncertainty/type-b-component.js';
import { BOUNDED_SHAPES, type BoundedShape } from '../core/uncertainty/distribution-shape.js';
import type { DecisionRule, DecisionRuleKind, SpecificationLimits } from '../core/conformity/decision-rule.js';

/**
 * Configuration pieces for issue 10 (Type B components, specification limits and decision rules),
 * as pure readers: each takes the parsed YAML value and its key path and returns the typed value,
 * with one line per problem naming the key path ("channels.defaults.typeB[1].halfWidth: expected a
 * number at least 0, got -0.2"), in the style of config-reader.ts. Not yet wired into
 * load-config.ts (the wiring is phase 2 of issue 10).
 *
 * YAML shape:
 *   typeB:
 *     - { name: reference PRT certificate, kind: certificate, expanded: 0.012, coverageFactor: 2, shared: prt-ref }
 *     - { name: display resolution, kind: resolution, step: 0.01 }
 *     - { name: bath uniformity, kind: stability, halfWidth: 0.005, reliability: 0.25 }
 *   conformity: { lower: 19.5, upper: 20.5, rule: guarded, guardFactor: 1 }
 */
const COMMON_KEYS = ['name', 'kind', 'shared', 'sensitivity', 'dof', 'reliability', 'estimate'];
const KIND_KEYS: Record<TypeBKind, string[]> = {
  certificate: ['expanded', 'coverageFactor', 'confidence'],
  resolution: ['step'],
  drift: ['halfWidth', 'rate', 'elapsed', 'shape'],
  stability: ['halfWidth', 'shape'],
  installation: ['halfWidth', 'shape'],
  rectangular: ['halfWidth'],
  triangular: ['halfWidth'],
  'u-shaped': ['halfWidth'],
  normal: ['standardUncertainty', 'expanded', 'coverageFactor'],
};

export function readTypeBComponents(value: unknown, path: string, reader: ConfigReader): TypeBSpec[] {
  const out: TypeBSpec[] = [];
  const names = new Set<string>();
  reader.list(value, path).forEach((entry, i) => {
    const spec = readTypeBComponent(entry, join(path, i), reader);
    if (spec === null) return;
    if (names.has(spec.name)) reader.problem(join(join(path, i), 'name'), `"${spec.name}" is already used by another component of this list`);
    names.add(spec.name);
    out.push(spec);
  });
  return out;
}

export function readTypeBComponent(value: unknown, path: string, reader: ConfigReader): TypeBSpec | null {
  if (value === null || typeof value !== 'object' || Array.isArray(value)) {
    reader.problem(path, `expected a mapping (name, kind and its values), got ${describe(value)}`);
    return null;
  }
  const raw = value as Plain;
  const before = reader.problems.length;
  const hasName = reader.require(raw, 'name', path, 'the component needs a name');
  const name = reader.string(raw, 'name', path, '');
  if (!reader.require(raw, 'kind', path, `one of ${TYPE_B_KINDS.join(', ')}`)) return null;
  const kind = raw.kind;
  if (!TYPE_B_KINDS.includes(kind as TypeBKind)) {
    reader.problem(join(path, 'kind'), `unknown kind ${describe(kind)} (expected one of ${TYPE_B_KINDS.join(', ')})`);
    return null;
  }
  const k = kind as TypeBKind;
  reader.section(raw, path, [...COMMON_KEYS, ...KIND_KEYS[k]]);
  const base: { name: string; shared?: string; sensitivity?: number; dof?: number; reliability?: number; estimate?: number } = { name };
  const shared = reader.string(raw, 'shared', path, null);
  if (shared !== null) base.shared = shared;
  const sensitivity = reader.number(raw, 'sensitivity', path, {}, null);
  if (sensitivity !== null) base.sensitivity = sensitivity;
  const estimate = reader.number(raw, 'estimate', path, {}, null);
  if (estimate !== null) base.estimate = estimate;
  const dof = reader.number(raw, 'dof', path, { above: 0 }, null);
  const reliability = reader.number(raw, 'reliability', path, { above: 0 }, null);
  if (dof !== null && reliability !== null) reader.problem(join(path, 'reliability'), 'give dof or reliability, not both');
  if (dof !== null) base.dof = dof;
  else if (reliability !== null) base.reliability = reliability;
  const need = (key: string, what: string, options: { min?: number; above?: number; below?: number } = { min: 0 }): number | null => {
    if (!reader.require(raw, key, path, what)) return null;
    return reader.number(raw, key, path, options, null);
  };
  const shape = (): BoundedShape => reader.oneOf(raw, 'shape', path, BOUNDED_SHAPES, 'rectangular');
  let spec: TypeBSpec | null = null;
  switch (k) {
    case 'certificate': {
      const expanded = need('expanded', 'the expanded uncertainty U printed on the certificate');
      const hasK = raw.coverageFactor !== undefined && raw.coverageFactor !== null;
      const hasP = raw.confidence !== undefined && raw.confidence !== null;
      if (hasK === hasP) reader.problem(path, hasK ? 'give coverageFactor or confidence, not both' : 'missing: coverageFactor (k) or confidence (coverage probability) of the certificate');
      const coverage = hasK ? reader.number(raw, 'coverageFactor', path, { above: 0 }, null) : null;
      const confidence = hasP ? reader.number(raw, 'confidence', path, { above: 0, below: 1 }, null) : null;
      if (expanded !== null && (coverage !== null || confidence !== null)) spec = { ...base, kind: 'certificate', expanded, ...(coverage !== null ? { coverageFactor: coverage } : { confidence: confidence as number }) };
      break;
    }
    case 'resolution': {
      const step = need('step', 'the resolution step of the indication', { above: 0 });
      if (step !== null) spec = { ...base, kind: 'resolution', step };
      break;
    }
    case 'drift': {
      const hasWidth = raw.halfWidth !== undefined && raw.halfWidth !== null;
      const hasRate = raw.rate !== undefined || raw.elapsed !== undefined;
      if (hasWidth && hasRate) reader.problem(path, 'give halfWidth, or rate and elapsed, not both');
      const s = shape();
      if (!hasRate) {
        const halfWidth = need('halfWidth', 'the half-width of the drift since calibration (or rate and elapsed)');
        if (halfWidth !== null) spec = { ...base, kind: 'drift', halfWidth, shape: s };
      } else {
        const rate = need('rate', 'the drift rate (per unit of elapsed)', {});
        const elapsed = need('elapsed', 'the time since calibration, in the unit of the rate');
        if (rate !== null && elapsed !== null && !hasWidth) spec = { ...base, kind: 'drift', rate, elapsed, shape: s };
      }
      break;
    }
    case 'stability':
    case 'installation': {
      const halfWidth = need('halfWidth', k === 'stability' ? 'the half-width of the source\'s stability or uniformity' : 'the half-width of the installation or immersion effect');
      const s = shape();
      if (halfWidth !== null) spec = { ...base, kind: k, halfWidth, shape: s };
      break;
    }
    case 'rectangular':
    case 'triangular':
    case 'u-shaped': {
      const halfWidth = need('halfWidth', 'the half-width of the distribution');
      if (halfWidth !== null) spec = { ...base, kind: k, halfWidth };
      break;
    }
    case 'normal': {
      const hasU = raw.standardUncertainty !== undefined && raw.standardUncertainty !== null;
      const hasExpanded = raw.expanded !== undefined || raw.coverageFactor !== undefined;
      if (hasU && hasExpanded) reader.problem(path, 'give standardUncertainty, or expanded and coverageFactor, not both');
      if (hasU || !hasExpanded) {
        const u = need('standardUncertainty', 'the standard uncertainty (or expanded and coverageFactor)');
        if (u !== null && !hasExpanded) spec = { ...base, kind: 'normal', standardUncertainty: u };
      } else {
        const expanded = need('expanded', 'the expanded uncertainty U');
        const coverage = need('coverageFactor', 'the coverage factor k of U', { above: 0 });
        if (expanded !== null && coverage !== null) spec = { ...base, kind: 'normal', expanded, coverageFactor: coverage };
      }
      break;
    }
  }
  if (!hasName || reader.problems.length > before) return null;
  return spec;
}

export interface ConformitySpec {
  limits: SpecificationLimits;
  rule: DecisionRule;
}

const RULES: readonly DecisionRuleKind[] = ['simple', 'guarded', 'non-binary'];

export function readConformity(value: unknown, path: string, reader: ConfigReader): ConformitySpec | null {
  if (value === undefined || value === null) return null;
  const before = reader.problems.length;
  const raw = reader.section(value, path, ['lower', 'upper', 'rule', 'guardFactor', 'guardBand']);
  if (reader.problems.length > before && Object.keys(raw).length === 0) return null;
  const lower = reader.number(raw, 'lower', path, {}, null);
  const upper = reader.number(raw, 'upper', path, {}, null);
  const hasLower = raw.lower !== undefined && raw.lower !== null;
  const hasUpper = raw.upper !== undefined && raw.upper !== null;
  if (!hasLower && !hasUpper) reader.problem(path, 'missing: a lower or an upper specification limit (or both)');
  if (lower !== null && upper !== null && lower > upper) reader.problem(join(path, 'lower'), `the lower limit ${lower} lies above the upper limit ${upper}`);
  const kind = reader.oneOf(raw, 'rule', path, RULES, 'simple');
  const guardFactor = reader.number(raw, 'guardFactor', path, { min: 0 }, null);
  const guardBand = reader.number(raw, 'guardBand', path, { min: 0 }, null);
  if (guardFactor !== null && guardBand !== null) reader.problem(join(path, 'guardBand'), 'give guardFactor (w = r U) or guardBand (a fixed w), not both');
  if (kind === 'simple' && (guardFactor !== null || guardBand !== null)) reader.problem(join(path, guardBand !== null ? 'guardBand' : 'guardFactor'), 'simple acceptance has no guard band (use rule: guarded or non-binary)');
  if (guardBand !== null && lower !== null && upper !== null && lower <= upper && 2 * guardBand >= upper - lower) {
    reader.problem(join(path, 'guardBand'), `a guard band of ${guardBand} on each side leaves no acceptance interval between ${lower} and ${upper} (it must be less than ${(upper - lower) / 2})`);
  }
  if (reader.problems.length > before) return null;
  const rule: DecisionRule = { kind };
  if (kind !== 'simple') {
    if (guardBand !== null) rule.guardBand = guardBand;
    else rule.guardFactor = guardFactor ?? 1;
  }
  return { limits: { lower, upper }, rule };
}

/**
 * Named constants of a derived expression (GUM H.1: the reference's length, an expansion
 * coefficient): `{ name, value, kind, ... }`, the value and the constant's uncertainty as any Type B
 * kind (`normal` with `standardUncertainty` for a value with its u; `rectangular` for a handbook
 * value within +/- a; `dof` or `reliability` as for any component).
 */
export function readDerivedConstants(value: unknown, path: string, reader: ConfigReader): { name: string; value: number; uncertainty: TypeBSpec }[] {
  const out: { name: string; value: number; uncertainty: TypeBSpec }[] = [];
  reader.list(value, path).forEach((entry, i) => {
    const where = join(path, i);
    if (entry === null || typeof entry !== 'object' || Array.isArray(entry)) {
      reader.problem(where, `expected a mapping (name, value, kind and its values), got ${describe(entry)}`);
      return;
    }
    const { value: raw, ...rest } = entry as Plain;
    const hasValue = reader.require(entry as Plain, 'value', where, 'the constant\'s value');
    const number = reader.number(entry as Plain, 'value', where, {}, null);
    const spec = readTypeBComponent(rest, where, reader);
    if (spec === null || !hasValue || number === null || raw === undefined) return;
    if (!/^[A-Za-z_][A-Za-z0-9_]*$/.test(spec.name)) {
      reader.problem(join(where, 'name'), `"${spec.name}" cannot be used in an expression (letters, digits and _, starting with a letter or _)`);
      return;
    }
    if (out.some((c) => c.name === spec.name)) {
      reader.problem(join(where, 'name'), `"${spec.name}" is already used by another constant`);
      return;
    }
    out.push({ name: spec.name, value: number, uncertainty: spec });
  });
  return out;
}

/** A list of Type B components and one line per problem (the list is to be used only when there is none). */
export function parseTypeB(value: unknown, path: string): { typeB: TypeBSpec[]; problems: string[] } {
  const reader = new ConfigReader();
  const typeB = readTypeBComponents(value, path, reader);
  return { typeB, problems: reader.problems };
}

/** One line per problem in a list of Type B components (empty when it is valid). */
export function typeBProblems(value: unknown, path: string): string[] {
  const reader = new ConfigReader();
  readTypeBComponents(value, path, reader);
  return reader.problems;
}

/** One line per problem in specification limits with their decision rule (empty when valid). */
export function conformityProblems(value: unknown, path: string): string[] {
  const reader = new ConfigReader();
  readConformity(value, path, reader);
  return reader.problems;
}
