import { ConfigReader, describe, join, type Plain } from './config-reader.js';
import { criterionProblems, statisticMinimum, STATISTIC_NAMES, type CriterionSpec, type ReadingBasis, type SetPointSource, type StatisticName, type ToleranceSpec } from '../core/criteria/criterion-spec.js';
import type { WindowBound } from '../core/criteria/sliding-window.js';
import { findPreset, PRESET_IDS, presetKeys, presetSpec } from '../engine/criteria/criteria-presets.js';
import { READINESS_POLICIES, type ReadinessPolicy } from '../engine/criteria/readiness-policy.js';

/**
 * The `criteria` setting of a channel (under `channels.defaults` or a `channels.groups[]` entry):
 * the procedure's stability rules and the readiness policy. Validation collects one line per
 * problem, naming the key path ("channels.groups[0].criteria.rules[1].statistic: unknown statistic
 * ..."), like the rest of the configuration.
 *
 * ```yaml
 * criteria:
 *   policy: both                 # statistical | rules | both (default: both when there are rules)
 *   rules:
 *     - iec-60335-2-6            # a named public rule (criteria-presets.ts) by its name alone,
 *     - preset: iec-60335-2-6    # or as a mapping, with its parameters
 *     - preset: ashrae-93-inlet-temperature
 *       name: glycol-inlet       # presets also take name, setPoint and holdSeconds
 *       setPoint: 45.0
 *     - name: outlet-band        # a rule of one's own
 *       statistic: setpoint-deviation   # range, deviation, mean-deviation, setpoint-deviation, sd, cv,
 *                                       # slope, change, average-change
 *       windowSeconds: 900       # or windowReadings: 3
 *       averageSeconds: 30       # on sub-interval averages; or samplingSeconds: 300 (readings taken
 *                                # every 300 s); neither: every sample
 *       tolerance: 0.5           # channel units; or { absolute: 0.5, relative: 0.02,
 *                                #   relativeTo: setpoint | reading, zero: -273.15 }: the greater applies
 *       comparison: at-most      # or less-than
 *       setPoint: test-point     # or a number; omitted: no set point
 *       minReadings: 10
 *       holdSeconds: 60          # must hold continuously this long (not longer than the window,
 *                                # checked where its duration is known)
 *       lag: 1                   # change: readings apart, or "window" (first to newest reading)
 *       direction: any           # change, average-change, slope: any, rise or fall
 *       perSeconds: 60           # slope: value and tolerance per minute
 * ```
 * load-config.ts reads it among the channel setting keys (a group's criteria replace the defaults').
 */
export interface CriteriaSettings {
  /** Readiness policy; null: the default (both when there are rules). */
  policy: ReadinessPolicy | null;
  rules: CriterionSpec[];
}

const RULE_KEYS = [
  'name',
  'statistic',
  'windowSeconds',
  'windowReadings',
  'averageSeconds',
  'samplingSeconds',
  'tolerance',
  'comparison',
  'setPoint',
  'minReadings',
  'holdSeconds',
  'lag',
  'direction',
  'perSeconds',
];

/** Reads `criteria` at `path`, adding a problem to `r` for each thing wrong; null when absent. */
export function readCriteria(r: ConfigReader, value: unknown, path: string): CriteriaSettings | null {
  if (value === undefined || value === null) return null;
  const section = r.section(value, path, ['policy', 'rules']);
  const policy = section.policy === undefined || section.policy === null ? null : r.oneOf(section, 'policy', path, READINESS_POLICIES, 'both');
  const rules: CriterionSpec[] = [];
  const names = new Map<string, number>();
  const items = r.list(section.rules, join(path, 'rules'));
  items.forEach((item, index) => {
    const rulePath = join(join(path, 'rules'), index);
    const spec = readRule(r, item, rulePath, index);
    // Names are checked on what was written, so a repeated name shows even beside other problems.
    const name = ruleName(item, index);
    if (names.has(name)) r.problem(join(rulePath, 'name'), `"${name}" is already the name of rules[${names.get(name)}]: give each rule its own name`);
    else names.set(name, index);
    if (spec) rules.push(spec);
  });
  if ((policy === 'rules' || policy === 'both') && items.length === 0) r.problem(join(path, 'policy'), `policy "${policy}" needs at least one rule under rules`);
  return { policy, rules };
}

/** Validates a `criteria` value on its own: the settings (null when absent or wrong) and the problem lines. */
export function parseCriteria(value: unknown, path = 'criteria'): { settings: CriteriaSettings | null; problems: string[] } {
  const r = new ConfigReader();
  const settings = readCriteria(r, value, path);
  return { settings: r.problems.length > 0 ? null : settings, problems: r.problems };
}

function ruleName(item: unknown, index: number): string {
  if (typeof item === 'string' && item.length > 0) return item;
  const plain = item !== null && typeof item === 'object' && !Array.isArray(item) ? (item as Plain) : {};
  if (typeof plain.name === 'string' && plain.name.length > 0) return plain.name;
  if (typeof plain.preset === 'string') return plain.preset;
  return `rule-${index + 1}`;
}

function readRule(r: ConfigReader, item: unknown, path: string, index: number): CriterionSpec | null {
  // A preset by its name alone.
  if (typeof item === 'string') return readPresetRule(r, { preset: item }, path);
  if (item === null || typeof item !== 'object' || Array.isArray(item)) {
    r.problem(path, `expected a rule (a mapping with preset, or statistic, window and tolerance), got ${describe(item)}`);
    return null;
  }
  const plain = item as Plain;
  if (plain.preset !== undefined) return readPresetRule(r, plain, path);
  const rule = r.section(plain, path, RULE_KEYS);
  const problemsBefore = r.problems.length;
  const name = r.string(rule, 'name', path, `rule-${index + 1}`);
  if (!r.require(rule, 'statistic', path, `the statistic (one of ${STATISTIC_NAMES.join(', ')})`)) return null;
  const statisticValue = rule.statistic;
  if (typeof statisticValue !== 'string' || !(STATISTIC_NAMES as readonly string[]).includes(statisticValue)) {
    r.problem(join(path, 'statistic'), `unknown statistic ${describe(statisticValue)} (expected one of ${STATISTIC_NAMES.join(', ')})`);
    return null;
  }
  const statistic = statisticValue as StatisticName;

  const windowSeconds = r.number(rule, 'windowSeconds', path, {}, null);
  const windowReadings = r.number(rule, 'windowReadings', path, {}, null);
  let window: WindowBound | null = null;
  if ((windowSeconds === null) === (windowReadings === null)) {
    if (rule.windowSeconds === undefined && rule.windowReadings === undefined) r.problem(path, 'missing: the window, as windowSeconds (a duration) or windowReadings (a number of readings)');
    else if (windowSeconds !== null && windowReadings !== null) r.problem(join(path, 'windowReadings'), 'give the window as windowSeconds or windowReadings, not both');
  } else window = windowSeconds !== null ? { kind: 'seconds', seconds: windowSeconds } : { kind: 'readings', readings: windowReadings as number };

  const averageSeconds = r.number(rule, 'averageSeconds', path, {}, null);
  const samplingSeconds = r.number(rule, 'samplingSeconds', path, {}, null);
  let basis: ReadingBasis = { kind: 'readings' };
  if (averageSeconds !== null && samplingSeconds !== null) r.problem(join(path, 'samplingSeconds'), 'a rule is on sub-interval averages (averageSeconds) or on readings taken at an interval (samplingSeconds), not both');
  else if (averageSeconds !== null) basis = { kind: 'averages', seconds: averageSeconds };
  else if (samplingSeconds !== null) basis = { kind: 'sampled', seconds: samplingSeconds };

  const toleranceShorthand = typeof rule.tolerance === 'number';
  const tolerance = readTolerance(r, rule.tolerance, join(path, 'tolerance'));
  const setPoint = readSetPoint(r, rule.setPoint, join(path, 'setPoint'));
  const lagValue = rule.lag;
  let lag: number | 'window' = 1;
  if (lagValue === 'window') lag = 'window';
  else if (lagValue !== undefined && lagValue !== null) {
    if (typeof lagValue !== 'number') r.problem(join(path, 'lag'), `expected a whole number of readings or "window", got ${describe(lagValue)}`);
    else lag = lagValue;
  }
  if (lagValue !== undefined && statistic !== 'change') r.problem(join(path, 'lag'), `applies to the change statistic only, not ${statistic}`);
  if (rule.direction !== undefined && !['change', 'average-change', 'slope'].includes(statistic)) r.problem(join(path, 'direction'), `applies to change, average-change and slope only, not ${statistic}`);
  if (rule.perSeconds !== undefined && statistic !== 'slope') r.problem(join(path, 'perSeconds'), `applies to slope only, not ${statistic}`);
  const minReadings = r.number(rule, 'minReadings', path, {}, null);
  if (r.problems.length > problemsBefore || window === null || tolerance === null || setPoint === undefined) return null;

  const spec: CriterionSpec = {
    name,
    statistic,
    basis,
    window,
    tolerance,
    comparison: r.oneOf(rule, 'comparison', path, ['at-most', 'less-than'] as const, 'at-most'),
    setPoint,
    minReadings: minReadings ?? Math.ceil(statisticMinimum({ statistic, lag })),
    holdSeconds: r.number(rule, 'holdSeconds', path, {}, 0),
    lag,
    direction: r.oneOf(rule, 'direction', path, ['any', 'rise', 'fall'] as const, 'any'),
    perSeconds: r.number(rule, 'perSeconds', path, {}, 1),
    preset: null,
    source: null,
    wording: null,
  };
  const keyPaths: Record<string, string> = toleranceShorthand ? { 'tolerance.absolute': 'tolerance' } : {};
  return reportSpec(r, spec, path, keyPaths) ? spec : null;
}

function readPresetRule(r: ConfigReader, plain: Plain, path: string): CriterionSpec | null {
  const id = plain.preset;
  const preset = typeof id === 'string' ? findPreset(id) : undefined;
  if (!preset) {
    r.problem(join(path, 'preset'), `unknown preset ${describe(id)} (expected one of ${PRESET_IDS.join(', ')})`);
    return null;
  }
  const known = ['preset', ...presetKeys(preset)];
  for (const key of Object.keys(plain)) {
    if (!known.includes(key)) {
      const hint = RULE_KEYS.includes(key) ? ` (a preset fixes ${key}; write the rule out in full to change it)` : '';
      r.problem(join(path, key), `unknown key for preset ${preset.id} (expected one of ${known.join(', ')})${hint}`);
    }
  }
  const problemsBefore = r.problems.length;
  const name = r.string(plain, 'name', path, preset.id);
  const setPoint = plain.setPoint === undefined ? preset.setPoint : readSetPoint(r, plain.setPoint, join(path, 'setPoint'));
  const holdSeconds = r.number(plain, 'holdSeconds', path, {}, null);
  if (r.problems.length > problemsBefore || setPoint === undefined) return null;
  const overrides: { name: string; setPoint: SetPointSource; holdSeconds?: number } = { name, setPoint };
  if (holdSeconds !== null) overrides.holdSeconds = holdSeconds;
  const { spec, problems } = presetSpec(preset.id, plain, overrides);
  for (const p of problems) r.problem(join(path, p.key), p.message);
  if (!spec) return null;
  return reportSpec(r, spec, path, {}, known) ? spec : null;
}

/** Adds a line per problem of the finished spec; true when it has none. */
function reportSpec(r: ConfigReader, spec: CriterionSpec, path: string, keyPaths: Record<string, string>, presetKeysGiven?: string[]): boolean {
  const problems = criterionProblems(spec);
  for (const p of problems) {
    let key = keyPaths[p.key] ?? p.key;
    // A preset's fixed parts are not keys of the file: name the preset instead.
    if (presetKeysGiven && !presetKeysGiven.includes(key.split('.')[0] as string)) key = 'preset';
    r.problem(join(path, key), p.message);
  }
  return problems.length === 0;
}

function readTolerance(r: ConfigReader, value: unknown, path: string): ToleranceSpec | null {
  if (value === undefined || value === null) {
    r.problem(path, 'missing: the tolerance (a number in the channel unit, or a mapping with absolute and/or relative)');
    return null;
  }
  if (typeof value === 'number') {
    if (!Number.isFinite(value)) {
      r.problem(path, `expected a number, got ${describe(value)}`);
      return null;
    }
    return { absolute: value, relative: null, relativeTo: 'reading', zero: 0 };
  }
  const before = r.problems.length;
  const t = r.section(value, path, ['absolute', 'relative', 'relativeTo', 'zero']);
  const absolute = r.number(t, 'absolute', path, {}, null);
  const relative = r.number(t, 'relative', path, {}, null);
  const relativeTo = r.oneOf(t, 'relativeTo', path, ['reading', 'setpoint'] as const, 'reading');
  if (t.relativeTo !== undefined && t.relative === undefined) r.problem(join(path, 'relativeTo'), 'applies to a relative tolerance: give relative as well');
  const zero = r.number(t, 'zero', path, {}, 0);
  if (r.problems.length > before) return null;
  return { absolute, relative, relativeTo, zero };
}

/** The set point: a number (from the configuration), "test-point", or none; undefined when wrong. */
function readSetPoint(r: ConfigReader, value: unknown, path: string): SetPointSource | undefined {
  if (value === undefined || value === null || value === 'none') return { kind: 'none' };
  if (value === 'test-point') return { kind: 'test-point' };
  if (typeof value === 'number' && Number.isFinite(value)) return { kind: 'config', value };
  r.problem(path, `expected a number, "test-point" or "none", got ${describe(value)}`);
  return undefined;
}
