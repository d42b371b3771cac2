import type { ChangeDirection } from './lagged-change.js';
import type { WindowBound } from './sliding-window.js';

/**
 * A stability criterion as test procedures write them: a statistic over a window of readings,
 * compared with a tolerance, that must hold continuously for a hold duration.
 *
 * Statistics (the value compared with the tolerance; units of the channel unless said):
 *   range               max - min of the window's readings
 *   deviation           the largest deviation of a reading from the window's mean
 *   mean-deviation      |window mean - set point|
 *   setpoint-deviation  the largest deviation of a reading from the set point
 *   sd                  standard deviation of the readings (divisor n - 1)
 *   cv                  coefficient of variation, sd / |mean| (a fraction)
 *   slope               least-squares slope against time, per `perSeconds` (60: per minute)
 *   change              change between readings `lag` readings apart, the largest in the window;
 *                       lag "window": between the window's first and newest reading
 *   average-change      change between successive sub-interval averages (change, lag 1, on averages)
 * `direction` (change, average-change, slope): any (absolute value), rise or fall only.
 *
 * Readings (`basis`): every sample; averages over sub-intervals of `seconds`; or the readings taken
 * every `seconds` ("readings taken every 5 minutes").
 *
 * Tolerance: absolute (channel units), relative (a fraction of |basis - zero|), or both, when the
 * larger applies ("within 2 % or 1.0 degC, whichever is greater"). The basis is the set point
 * (`relativeTo: setpoint`) or the reading (`relativeTo: reading`): the newest reading for changes,
 * the window's mean for every other statistic. `zero` moves the scale's zero, so that "1 % of the
 * absolute temperature" of a channel in degC is relative 0.01 with zero -273.15.
 * `comparison`: at-most (value <= tolerance, "within", "no more than") or less-than (strict, "less
 * than").
 */
export const STATISTIC_NAMES = ['range', 'deviation', 'mean-deviation', 'setpoint-deviation', 'sd', 'cv', 'slope', 'change', 'average-change'] as const;
export type StatisticName = (typeof STATISTIC_NAMES)[number];

export type ReadingBasis = { kind: 'readings' } | { kind: 'averages'; seconds: number } | { kind: 'sampled'; seconds: number };

export interface ToleranceSpec {
  /** Channel units; null when only relative. */
  absolute: number | null;
  /** A fraction (0.02 for 2 %); null when only absolute. */
  relative: number | null;
  relativeTo: 'reading' | 'setpoint';
  /** The relative tolerance is a fraction of |basis - zero|. */
  zero: number;
}

export type SetPointSource = { kind: 'none' } | { kind: 'config'; value: number } | { kind: 'test-point' };

export type Comparison = 'at-most' | 'less-than';

export interface CriterionSpec {
  /** Unique per channel; names events and record entries. */
  name: string;
  statistic: StatisticName;
  basis: ReadingBasis;
  window: WindowBound;
  tolerance: ToleranceSpec;
  comparison: Comparison;
  setPoint: SetPointSource;
  /** Fewest readings in the window before the rule can hold (at least the statistic's own minimum). */
  minReadings: number;
  /** The condition must be met continuously this long before the rule holds. */
  holdSeconds: number;
  /** change: readings apart, or 'window' (first to newest). Ignored by other statistics. */
  lag: number | 'window';
  direction: ChangeDirection;
  /** slope: the time unit of the value and tolerance, in seconds (1, 60, 3600). */
  perSeconds: number;
  /** Named preset this rule came from, with its citation and the rule's wording there. */
  preset: string | null;
  source: string | null;
  wording: string | null;
}

/** Statistics compared with a set point. */
export const SETPOINT_STATISTICS: readonly StatisticName[] = ['mean-deviation', 'setpoint-deviation'];

/** Fewest readings the statistic is defined on. */
export function statisticMinimum(spec: Pick<CriterionSpec, 'statistic' | 'lag'>): number {
  switch (spec.statistic) {
    case 'mean-deviation':
    case 'setpoint-deviation':
      return 1;
    case 'slope':
      return 3;
    case 'change':
      return spec.lag === 'window' ? 2 : spec.lag + 1;
    default:
      return 2;
  }
}

/** Length of time the window covers, when it is known from the spec (null: a count of individual samples). */
export function windowSeconds(spec: Pick<CriterionSpec, 'window' | 'basis'>): number | null {
  if (spec.window.kind === 'seconds') return spec.window.seconds;
  if (spec.basis.kind === 'sampled') return (spec.window.readings - 1) * spec.basis.seconds;
  if (spec.basis.kind === 'averages') return spec.window.readings * spec.basis.seconds;
  return null;
}

/** One problem with a spec: the key it concerns (as written in the configuration) and what is wrong. */
export interface SpecProblem {
  key: string;
  message: string;
}

/**
 * Everything wrong with a spec, one entry per problem (empty when it is usable). The configuration
 * reader turns each into one line naming the key path; the tracker refuses a spec with problems.
 */
export function criterionProblems(spec: CriterionSpec): SpecProblem[] {
  const problems: SpecProblem[] = [];
  const add = (key: string, message: string) => problems.push({ key, message });
  if (!(STATISTIC_NAMES as readonly string[]).includes(spec.statistic)) {
    add('statistic', `unknown statistic "${String(spec.statistic)}" (expected one of ${STATISTIC_NAMES.join(', ')})`);
    return problems;
  }
  const basis = spec.basis;
  if (basis.kind !== 'readings' && !(basis.seconds > 0 && Number.isFinite(basis.seconds))) {
    add(basis.kind === 'averages' ? 'averageSeconds' : 'samplingSeconds', `expected a number above 0, got ${basis.seconds}`);
  }
  if (spec.window.kind === 'seconds') {
    if (!(spec.window.seconds > 0 && Number.isFinite(spec.window.seconds))) add('windowSeconds', `expected a window above 0 seconds, got ${spec.window.seconds}`);
  } else if (!(Number.isInteger(spec.window.readings) && spec.window.readings >= 1)) {
    add('windowReadings', `expected a whole number of readings of at least 1, got ${spec.window.readings}`);
  }
  const minimum = statisticMinimum(spec);
  const countWindowUsable = spec.window.kind === 'readings' && Number.isInteger(spec.window.readings) && spec.window.readings >= minimum;
  if (spec.window.kind === 'readings' && spec.window.readings >= 1 && spec.window.readings < minimum) {
    add('windowReadings', `${spec.statistic}${spec.statistic === 'change' ? ` (lag ${spec.lag})` : ''} needs at least ${minimum} readings in the window, got ${spec.window.readings}`);
  }
  if (!(Number.isInteger(spec.minReadings) && spec.minReadings >= minimum)) {
    add('minReadings', `expected a whole number of at least ${minimum} (what ${spec.statistic} needs), got ${spec.minReadings}`);
  } else if (countWindowUsable && spec.window.kind === 'readings' && spec.minReadings > spec.window.readings) {
    add('minReadings', `${spec.minReadings} readings can never fit a window of ${spec.window.readings}`);
  }
  const span = windowSeconds(spec);
  if (!(spec.holdSeconds >= 0 && Number.isFinite(spec.holdSeconds))) add('holdSeconds', `expected a number of at least 0, got ${spec.holdSeconds}`);
  else if (span !== null && span > 0 && spec.holdSeconds > span) {
    add('holdSeconds', `hold of ${spec.holdSeconds} s is longer than the window (${span} s): widen the window to state how long the condition must hold`);
  }
  if (spec.window.kind === 'seconds' && basis.kind !== 'readings' && basis.seconds > spec.window.seconds) {
    add('windowSeconds', `a window of ${spec.window.seconds} s is shorter than one ${basis.kind === 'averages' ? 'sub-interval' : 'sampling interval'} (${basis.seconds} s)`);
  }
  if (spec.statistic === 'average-change' && basis.kind !== 'averages') add('averageSeconds', 'average-change compares successive sub-interval averages: give their length');
  if (spec.statistic === 'change' && spec.lag !== 'window' && !(Number.isInteger(spec.lag) && spec.lag >= 1)) add('lag', `expected a whole number of readings of at least 1 or "window", got ${spec.lag}`);
  if (spec.statistic === 'slope' && !(spec.perSeconds > 0 && Number.isFinite(spec.perSeconds))) add('perSeconds', `expected a number above 0, got ${spec.perSeconds}`);
  const t = spec.tolerance;
  if (t.absolute === null && t.relative === null) add('tolerance', 'expected an absolute tolerance, a relative one, or both');
  if (t.absolute !== null && !(t.absolute >= 0 && Number.isFinite(t.absolute))) add('tolerance.absolute', `expected a number of at least 0, got ${t.absolute}`);
  if (t.relative !== null && !(t.relative >= 0 && Number.isFinite(t.relative))) add('tolerance.relative', `expected a fraction of at least 0, got ${t.relative}`);
  if (!Number.isFinite(t.zero)) add('tolerance.zero', `expected a number, got ${t.zero}`);
  if (t.relative !== null && spec.statistic === 'cv') add('tolerance.relative', 'the coefficient of variation is already relative: give its limit as an absolute fraction');
  if (SETPOINT_STATISTICS.includes(spec.statistic) && spec.setPoint.kind === 'none') {
    add('setPoint', `${spec.statistic} compares with a set point: give setPoint: <value> or setPoint: test-point`);
  } else if (t.relative !== null && t.relativeTo === 'setpoint' && spec.setPoint.kind === 'none') {
    add('tolerance.relativeTo', 'a tolerance relative to the set point needs a set point (setPoint: <value> or setPoint: test-point)');
  }
  if (spec.setPoint.kind === 'config' && !Number.isFinite(spec.setPoint.value)) add('setPoint', `expected a number or "test-point", got ${spec.setPoint.value}`);
  return problems;
}

/**
 * The tolerance for a basis value (the set point or the reading, see above) and a set point; null
 * when a relative tolerance needs a set point that is not known (none from the test point yet).
 */
export function toleranceFor(tolerance: ToleranceSpec, reading: number, setPoint: number | null): number | null {
  let limit = tolerance.absolute ?? 0;
  if (tolerance.relative !== null) {
    const basis = tolerance.relativeTo === 'setpoint' ? setPoint : reading;
    if (basis === null || !Number.isFinite(basis)) return null;
    const relative = tolerance.relative * Math.abs(basis - tolerance.zero);
    if (relative > limit) limit = relative;
  }
  return limit;
}

/** The tolerance in words, for messages and records: "3 or 1 % of the reading above -273.15, whichever is greater". */
export function describeTolerance(spec: Pick<CriterionSpec, 'tolerance' | 'comparison'>): string {
  const t = spec.tolerance;
  const parts: string[] = [];
  if (t.absolute !== null) parts.push(String(t.absolute));
  if (t.relative !== null) parts.push(`${+(t.relative * 100).toPrecision(6)} % of the ${t.relativeTo === 'setpoint' ? 'set point' : 'reading'}${t.zero !== 0 ? ` above ${t.zero}` : ''}`);
  return `${spec.comparison === 'less-than' ? 'less than' : 'at most'} ${parts.join(' or ')}${parts.length > 1 ? ', whichever is greater' : ''}`;
}
