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
      return { extremes: true, moments: true };
    case 'mean-deviation':
    case 'sd':
    case 'cv':
      return { moments: true };
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

function laggedFor(spec: CriterionSpec, window: SlidingWindow): LaggedChange | null {
  const lag = spec.statistic === 'average-change' ? 1 : spec.lag;
  for (const change of window.lagged) if (change.lag === lag) return change;
  return null;
}

/** The value compared with the tolerance; NaN when the window cannot give it (too few readings, no set point, zero mean for cv). */
export function statisticValue(spec: CriterionSpec, window: SlidingWindow, setPoint: number | null): number {
  const n = window.count;
  if (n === 0) return Number.NaN;
  switch (spec.statistic) {
    case 'range': {
      const e = window.extremes!;
      return n >= 2 ? e.max - e.min : Number.NaN;
    }
    case 'deviation': {
      if (n < 2) return Number.NaN;
      const e = window.extremes!;
      const mean = window.sums!.mean;
      const above = e.max - mean;
      const below = mean - e.min;
      return above > below ? above : below;
    }
    case 'mean-deviation':
      return setPoint === null ? Number.NaN : Math.abs(window.sums!.mean - setPoint);
    case 'setpoint-deviation': {
      if (setPoint === null) return Number.NaN;
      const e = window.extremes!;
      const above = e.max - setPoint;
      const below = setPoint - e.min;
      return above > below ? above : below;
    }
    case 'sd':
      return n >= 2 ? window.sums!.standardDeviation : Number.NaN;
    case 'cv': {
      if (n < 2) return Number.NaN;
      const sums = window.sums!;
      const mean = Math.abs(sums.mean);
      return mean > 0 ? sums.standardDeviation / mean : Number.NaN;
    }
    case 'slope': {
      const fit = window.sums!.slope();
      if (!fit || n < 3) return Number.NaN;
      const perUnit = fit.perSecond * spec.perSeconds;
      return spec.direction === 'rise' ? perUnit : spec.direction === 'fall' ? -perUnit : Math.abs(perUnit);
    }
    case 'change':
    case 'average-change': {
      if (spec.statistic === 'change' && spec.lag === 'window') {
        if (n < 2) return Number.NaN;
        const change = window.newestValue - window.firstValue;
        return spec.direction === 'rise' ? change : spec.direction === 'fall' ? -change : Math.abs(change);
      }
      const largest = laggedFor(spec, window)!.largest(spec.direction);
      return largest === Number.NEGATIVE_INFINITY ? Number.NaN : largest;
    }
  }
}

/** The basis of a tolerance relative to the reading: the newest reading for changes, else the window's mean. */
export function readingBasis(spec: CriterionSpec, window: SlidingWindow): number {
  if (window.count === 0) return Number.NaN;
  if (changeStatistic(spec)) return window.newestValue;
  return window.sums ? window.sums.mean : Number.NaN;
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
  const e = needs.extremes ? window.extremes : null;
  const sums = needs.moments || needs.regression ? window.sums : null;
  const fit = spec.statistic === 'slope' && sums ? sums.slope() : null;
  return {
    readings: n,
    mean: n > 0 && sums ? finite(sums.mean) : null,
    min: n > 0 && e ? e.min : null,
    max: n > 0 && e ? e.max : null,
    sd: n > 1 && sums ? sums.standardDeviation : null,
    slope: fit ? { value: fit.perSecond * spec.perSeconds, standardError: fit.standardError === null ? null : fit.standardError * spec.perSeconds, perSeconds: spec.perSeconds } : null,
    firstTime: n > 0 ? window.firstTime : null,
    newestTime: n > 0 ? window.newestTime : null,
  };
}
