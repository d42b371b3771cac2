import { heidelbergerWelch } from '../core/stationarity/heidelberger-welch.js';
import { geweke } from '../core/stationarity/geweke.js';
import { kpss } from '../core/stationarity/kpss.js';
import { mser, batchMeans, batchSizeFromTau } from '../core/stationarity/mser.js';
import { CAO_RHINEHART_CRITICAL_VALUE } from '../core/stationarity/cao-rhinehart.js';
import { overlappingAllanDeviation, octaveFactors, averagingLimit, type AllanPoint } from '../core/allan/allan-deviation.js';
import type { StationarityBreak, StationarityMonitor } from './stationarity-monitor.js';
import type { WarmupVerdict, TransientSummary } from './warmup-detector.js';

/**
 * The steady-state evidence of a snapshot: the engine's verdict and the tests behind it, each with
 * its statistic and verdict, computed over the current window on demand (O(n) each, plus an AR fit).
 */
export interface StationarityReport {
  steady: boolean;
  /** 0-based index of the first sample after the warm-up, or null while warming. */
  warmupEnd: number | null;
  excluded: number;
  /** How the warm-up end was found: transient-fit, whole-window, mser, none or fixed. */
  warmupMethod: WarmupVerdict['method'] | null;
  /** The fitted warm-up: amplitude, time constant (samples), level, significance. */
  transient: TransientSummary | null;
  tests: {
    heidelbergerWelch: { statistic: number | null; pValue: number | null; passed: boolean; startIndex: number | null; halfwidthPassed: boolean | null } | null;
    geweke: { statistic: number | null; passed: boolean | null; note?: string } | null;
    kpss: { statistic: number; pValue: number; lags: number; passed: boolean; batchSize: number } | null;
    mser: { truncation: number; batchSize: number; tooShort: boolean } | null;
    caoRhinehart: { statistic: number | null; critical: number; passed: boolean | null };
    cusum: { upper: number; lower: number; decisionInterval: number; blockSize: number; blocks: number } | null;
  };
  lastBreak: StationarityBreak | null;
}

export interface StationarityInput {
  values: Float64Array;
  tauInt: number;
  phase: 'warming' | 'steady' | 'unsteady';
  warmupEnd: number | null;
  excluded: number;
  indicator: number | null;
  monitor: StationarityMonitor | null;
  lastBreak: StationarityBreak | null;
  /** How the warm-up end was found (null while warming). */
  warmupMethod: WarmupVerdict['method'] | null;
  /** The fitted warm-up transient, when one was fitted. */
  transient: TransientSummary | null;
}

/** Fewest samples for the window tests to mean anything. */
const MIN_TEST_SAMPLES = 20;

export function stationarityReport(input: StationarityInput): StationarityReport {
  const { values, tauInt } = input;
  const enough = values.length >= MIN_TEST_SAMPLES;
  const hw = enough ? heidelbergerWelch(values) : null;
  const gw = enough ? geweke(values) : null;
  const batchSize = batchSizeFromTau(Math.max(1, tauInt));
  // KPSS on block means: on raw autocorrelated samples its short lag window rejects a stationary
  // AR(1) (test/core/stationarity shows tseries doing so), block means several tau_int long do not.
  const means = batchMeans(values, batchSize);
  const kp = means.length >= 12 ? kpss(means, { lags: 'short' }) : null;
  const truncation = values.length >= 2 * batchSize && enough ? mser(values, batchSize) : null;
  const monitor = input.monitor;
  return {
    steady: input.phase === 'steady',
    warmupEnd: input.warmupEnd,
    excluded: input.excluded,
    warmupMethod: input.warmupMethod,
    transient: input.transient,
    tests: {
      heidelbergerWelch: hw ? { statistic: hw.statistic, pValue: hw.pValue, passed: hw.stationary, startIndex: hw.startIndex, halfwidthPassed: hw.halfwidthPassed } : null,
      geweke: gw ? { statistic: gw.z, passed: gw.z === null ? null : Math.abs(gw.z) < 1.96, ...(gw.note ? { note: gw.note } : {}) } : null,
      kpss: kp ? { statistic: kp.statistic, pValue: kp.pValue, lags: kp.lags, passed: kp.stationaryAt5Percent, batchSize } : null,
      mser: truncation ? { truncation: truncation.truncation, batchSize: truncation.batchSize, tooShort: truncation.tooShort } : null,
      caoRhinehart: { statistic: input.indicator, critical: CAO_RHINEHART_CRITICAL_VALUE, passed: input.indicator === null ? null : input.indicator < CAO_RHINEHART_CRITICAL_VALUE },
      cusum: monitor ? { ...monitor.cusumSums, blockSize: monitor.settings.blockSize, blocks: monitor.blockTotal } : null,
    },
    lastBreak: input.lastBreak,
  };
}

export interface AllanReport {
  points: { m: number; tauSeconds: number | null; adev: number; count: number; edf: number; low: number; high: number }[];
  averagingLimit: { m: number; tauSeconds: number | null; adev: number } | null;
}

/**
 * Overlapping Allan deviation of the window at octave averaging factors (NIST SP 1065, 5.2.4) with
 * one-sigma error bars, and the averaging limit: the averaging time beyond which it stops falling.
 * Cost: O(n log n).
 */
/**
 * Log-log slope of the Allan deviation over one octave at which the averaging counts as having
 * reached the white-noise regime (-1/2 exactly; -0.4 leaves room for the error bars).
 */
const WHITE_SLOPE = -0.4;

export function allanReport(values: Float64Array, rate: number | null): AllanReport {
  if (values.length < 4) return { points: [], averagingLimit: null };
  const points = overlappingAllanDeviation(values, octaveFactors(values.length), 1);
  const tau0 = rate && rate > 0 ? 1 / rate : null;
  const limit = limitFromPoints(points, values.length);
  return {
    points: points.map((p) => ({ m: p.m, tauSeconds: tau0 === null ? null : p.m * tau0, adev: p.adev, count: p.count, edf: p.edf, low: p.low, high: p.high })),
    averagingLimit: limit ? { m: limit.m, tauSeconds: tau0 === null ? null : limit.m * tau0, adev: limit.adev } : null,
  };
}

/**
 * The Allan deviation of positively correlated noise rises over the first octaves (averaging has
 * not yet reached independent samples) and approaches the white-noise fall, 1/sqrt(m), only for m
 * well beyond tau_int; in between it falls more slowly, which a test against the white-noise
 * continuation reads as a floor (it did on ARMA(1,1) about half the time). The limit is sought only
 * after the averaging has been seen to reach the white-noise regime (an octave over which the
 * deviation falls as fast as m^-0.4 or faster), and it must be confirmed by the error bars
 * (core/allan/allan-deviation.ts averagingLimit). A series that never gets there (a drift that sets
 * in before its own correlation has averaged out) is not given a limit it cannot support.
 */
function limitFromPoints(points: readonly AllanPoint[], n: number): { m: number; adev: number } | null {
  let white = -1;
  for (let i = 0; i + 1 < points.length; i++) {
    const slope = Math.log2((points[i + 1] as AllanPoint).adev / (points[i] as AllanPoint).adev);
    if (slope <= WHITE_SLOPE) {
      white = i;
      break;
    }
  }
  // Octaves with fewer than 16 independent averages carry error bars too wide to name a limit.
  const candidates = white >= 0 ? points.slice(white).filter((p) => p.m <= n / 16) : [];
  return candidates.length >= 3 ? averagingLimit(candidates) : null;
}
