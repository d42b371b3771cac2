import type { CriterionSpec } from './criterion-spec.js';
import type { LaggedChange } from './lagged-change.js';
import type { SlidingWindow, WindowNeeds } from './sliding-window.js';

/**
 * A criterion's statistic read from a sliding window's running statistics (see criterion-spec.ts
 * for the list): O(1) per evaluation, plus O(held readings) for `blockingReading`, which is read
 * on demand (live state), not per sample.
 */

/** The running statistics a window must keep for this criterion. */
export function criterionNeeds(spec: CriterionSpec): WindowNeeds {
  const relativeToMean = spec.tolerance.relative !== null && spec.tolerance.relativeTo === 'reading' && !changeStatistic(spec);
  switch (spec.statistic) {
    case 'range':
    case 'setpoint-deviation':
      return { extremes: true, moments: relativeToMean };
    case 'deviation':
    case 'mean-deviation':
      return { extremes: spec.statistic === 'deviation', moments: true };
    case 'sd':
    case 'cv':
      return { moments: true, spread: true };
    case 'slope':
      return { regression: true };
    case 'change':
      return { lags: spec.lag === 'window' ? [] : [spec.lag], moments: relativeToMean };
    case 'average-change':
      return { lags: [1] };
  }
}

function changeStatistic(spec: CriterionSpec): boolean {
  return spec.statistic === 'change' || spec.statistic === 'average-change';
}

/** The lagged change a change statistic reads from its window (null for other statistics). */
export function laggedFor(spec: CriterionSpec, window: SlidingWindow): LaggedChange | null {
  if (spec.statistic !== 'average-change' && (spec.statistic !== 'change' || spec.lag === 'window')) return null;
  const lag = spec.statistic === 'average-change' ? 1 : spec.lag;
  for (const change of window.lagged) if (change.lag === lag) return change;
  return null;
}

// Statistic codes: the per-sample evaluation switches on small integers.
const RANGE = 0;
const DEVIATION = 1;
const MEAN_DEVIATION = 2;
const SETPOINT_DEVIATION = 3;
const SD = 4;
const CV = 5;
const SLOPE = 6;
const CHANGE_ACROSS = 7;
const CHANGE_LAGGED = 8;

function statisticCode(spec: CriterionSpec): number {
  switch (spec.statistic) {
    case 'range':
      return RANGE;
    case 'deviation':
      return DEVIATION;
    case 'mean-deviation':
      return MEAN_DEVIATION;
    case 'setpoint-deviation':
      return SETPOINT_DEVIATION;
    case 'sd':
      return SD;
    case 'cv':
      return CV;
    case 'slope':
      return SLOPE;
    case 'change':
      return spec.lag === 'window' ? CHANGE_ACROSS : CHANGE_LAGGED;
    case 'average-change':
      return CHANGE_LAGGED;
  }
}

const ANY = 0;
const RISE = 1;
const FALL = 2;

/**
 * A criterion's statistic and tolerance over its window, worked out after each reading: `update`
 * reads the window's figures (fields, see sliding-window.ts) and sets `value` and `tolerance`;
 * NaN when the window cannot give them (too few readings, no set point, a zero mean for cv). O(1),
 * and nothing is passed or returned as a number, so V8 boxes nothing on the per-sample path.
 */
export class CriterionEvaluator {
  readonly spec: CriterionSpec;
  readonly window: SlidingWindow;
  /** The set point now (NaN: none). */
  setPoint = Number.NaN;
  /** The statistic's value at the last update. */
  value = Number.NaN;
  /** The tolerance at the last update (NaN: unknown, e.g. relative to a set point not given). */
  tolerance = Number.NaN;
  private readonly code: number;
  private readonly direction: number;
  private readonly perSeconds: number;
  private readonly lagged: LaggedChange | null;
  /** The tolerance when it depends on neither the readings nor the set point, else NaN. */
  private readonly fixedTolerance: number;
  // A relative tolerance, worked out in place (toleranceFor's arithmetic, without its boxed result).
  private readonly absoluteLimit: number;
  private readonly relative: number;
  private readonly zero: number;
  private readonly relativeToSetPoint: boolean;
  private readonly basisNewest: boolean;
  /** A tolerance relative to the set point depends on it alone: worked out again only when it changes. */
  private toleranceSetPoint = Number.NaN;
  private setPointTolerance = Number.NaN;

  constructor(spec: CriterionSpec, window: SlidingWindow) {
    this.spec = spec;
    this.window = window;
    this.code = statisticCode(spec);
    this.direction = spec.direction === 'rise' ? RISE : spec.direction === 'fall' ? FALL : ANY;
    this.perSeconds = spec.perSeconds;
    this.lagged = laggedFor(spec, window);
    this.fixedTolerance = spec.tolerance.relative === null && spec.tolerance.absolute !== null ? spec.tolerance.absolute : Number.NaN;
    this.absoluteLimit = spec.tolerance.absolute ?? 0;
    this.relative = spec.tolerance.relative ?? 0;
    this.zero = spec.tolerance.zero;
    this.relativeToSetPoint = spec.tolerance.relative !== null && spec.tolerance.relativeTo === 'setpoint';
    this.basisNewest = changeStatistic(spec);
  }

  /** Sets `value` and `tolerance` (assigned, not returned: V8 boxes a number returned from a call it does not inline). */
  update(): void {
    if (Number.isNaN(this.fixedTolerance)) this.updateTolerance();
    else this.tolerance = this.fixedTolerance;
    const window = this.window;
    const n = window.end - window.start;
    let value = Number.NaN;
    if (n > 0) {
      switch (this.code) {
        case RANGE:
          if (n >= 2) value = window.max - window.min;
          break;
        case DEVIATION:
          if (n >= 2) {
            const above = window.max - window.mean;
            const below = window.mean - window.min;
            value = above > below ? above : below;
          }
          break;
        case MEAN_DEVIATION:
          value = Math.abs(window.mean - this.setPoint);
          break;
        case SETPOINT_DEVIATION: {
          const above = window.max - this.setPoint;
          const below = this.setPoint - window.min;
          value = above > below ? above : below;
          break;
        }
        case SD:
          if (n >= 2) value = Math.sqrt(window.variance);
          break;
        case CV: {
          const mean = Math.abs(window.mean);
          if (n >= 2 && mean > 0) value = Math.sqrt(window.variance) / mean;
          break;
        }
        case SLOPE:
          if (n >= 3) value = this.directed(window.slopePerSecond * this.perSeconds);
          break;
        case CHANGE_ACROSS:
          if (n >= 2) value = this.directed(window.newestValue - window.firstValue);
          break;
        default: {
          const lagged = this.lagged;
          if (lagged !== null) {
            const largest = this.direction === RISE ? lagged.largest('rise') : this.direction === FALL ? lagged.largest('fall') : lagged.largest('any');
            if (largest !== Number.NEGATIVE_INFINITY) value = largest;
          }
        }
      }
    }
    this.value = value;
  }

  /** As toleranceFor (criterion-spec.ts): the greater of the absolute and the relative part; NaN without a finite basis. */
  private updateTolerance(): void {
    let basis: number;
    if (this.relativeToSetPoint) {
      const setPoint = this.setPoint;
      if (setPoint === this.toleranceSetPoint) {
        this.tolerance = this.setPointTolerance;
        return;
      }
      basis = setPoint;
    } else {
      const window = this.window;
      basis = window.end === window.start ? Number.NaN : this.basisNewest ? window.newestValue : window.sums !== null ? window.mean : Number.NaN;
    }
    let tolerance = Number.NaN;
    if (Number.isFinite(basis)) {
      const relative = this.relative * Math.abs(basis - this.zero);
      tolerance = relative > this.absoluteLimit ? relative : this.absoluteLimit;
    }
    if (this.relativeToSetPoint) {
      this.toleranceSetPoint = basis;
      this.setPointTolerance = tolerance;
    }
    this.tolerance = tolerance;
  }

  private directed(change: number): number {
    return this.direction === RISE ? change : this.direction === FALL ? -change : Math.abs(change);
  }
}

/** The basis of a tolerance relative to the reading: the newest reading for changes, else the window's mean. */
export function readingBasis(spec: CriterionSpec, window: SlidingWindow): number {
  if (window.count === 0) return Number.NaN;
  if (changeStatistic(spec)) return window.newestValue;
  return window.sums ? window.mean : Number.NaN;
}

/**
 * For statistics that are the worst of the readings (or pairs of readings) in the window: the
 * sequence number of the newest reading that must leave the window before the value can come
 * within `limit` (-1 when none must). Statistics of the window as a whole (mean, sd, cv, slope,
 * change across the window) can change with the next reading: -1.
 */
export function blockingReading(spec: CriterionSpec, window: SlidingWindow, setPoint: number | null, limit: number): number {
  if (window.count === 0) return -1;
  switch (spec.statistic) {
    case 'range':
      return window.extremes!.newestSpanBreak(limit);
    case 'deviation':
      // Every reading within `limit` of a mean that lies between min and max needs max - min <= 2 limit.
      return window.extremes!.newestSpanBreak(2 * limit);
    case 'setpoint-deviation': {
      if (setPoint === null) return -1;
      const e = window.extremes!;
      const above = e.newestAbove(setPoint + limit);
      const below = e.newestBelow(setPoint - limit);
      return above > below ? above : below;
    }
    case 'change':
    case 'average-change': {
      const lagged = laggedFor(spec, window);
      return lagged ? lagged.newestOffendingStart(spec.direction, limit) : -1;
    }
    default:
      return -1;
  }
}

/** What the statistic is made of, for live displays and records. */
export interface StatisticDetail {
  readings: number;
  mean: number | null;
  min: number | null;
  max: number | null;
  sd: number | null;
  /** slope: per `perSeconds`, signed, with its standard error (independent residuals). */
  slope: { value: number; standardError: number | null; perSeconds: number } | null;
  firstTime: number | null;
  newestTime: number | null;
}

export function statisticDetail(spec: CriterionSpec, window: SlidingWindow): StatisticDetail {
  // Only what this criterion keeps: a window shared with other rules may keep more.
  const needs = criterionNeeds(spec);
  const n = window.count;
  const finite = (x: number) => (Number.isFinite(x) ? x : null);
  const extremes = needs.extremes === true && n > 0;
  const sums = (needs.moments === true || needs.regression === true) && window.sums !== null && n > 0;
  const fit = spec.statistic === 'slope' && sums ? window.sums!.slope() : null;
  return {
    readings: n,
    mean: sums ? finite(window.mean) : null,
    min: extremes ? window.min : null,
    max: extremes ? window.max : null,
    sd: sums && n > 1 ? window.sums!.standardDeviation : null,
    slope: fit ? { value: fit.perSecond * spec.perSeconds, standardError: fit.standardError === null ? null : fit.standardError * spec.perSeconds, perSeconds: spec.perSeconds } : null,
    firstTime: n > 0 ? window.firstTime : null,
    newestTime: n > 0 ? window.newestTime : null,
  };
}
