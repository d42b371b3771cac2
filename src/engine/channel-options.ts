import type { EstimatorName } from '../core/tau/tau-estimate.js';
import type { TargetSpec } from '../core/uncertainty/target-precision.js';
import type { WarmupSetting } from './warmup-detector.js';
import type { ChannelCriteriaSettings } from './criteria/channel-criteria.js';
import type { TypeBSpec } from '../core/uncertainty/type-b-component.js';
import type { DecisionRule, SpecificationLimits } from '../core/conformity/decision-rule.js';

/** Specification limits with the decision rule that judges a result against them (issue 10). */
export interface ConformitySpec {
  limits: SpecificationLimits;
  rule: DecisionRule;
}

/**
 * What turns a channel's Type A uncertainty into the statement a lab signs (channel-combined.ts):
 * its Type B components, specification limits with a decision rule, a target on the combined
 * uncertainty and the dominance fraction f of the stopping rule u_A <= f u_c.
 */
export interface UncertaintySettings {
  typeB: TypeBSpec[];
  conformity: ConformitySpec | null;
  /** A target on the combined uncertainty (u_c or U = k u_c), absolute or relative to |mean|. */
  combinedTarget: TargetSpec | null;
  /** f in (0, 1): stop when u_A <= f u_c; null: no dominance rule. */
  dominanceFraction: number | null;
  /** Add the resolution component found from readings on a coarse lattice (default true). */
  proposeResolution: boolean;
}

export const DEFAULT_UNCERTAINTY_SETTINGS: UncertaintySettings = { typeB: [], conformity: null, combinedTarget: null, dominanceFraction: null, proposeResolution: true };

/** How a channel's averaging window is bounded. */
export interface WindowSpec {
  /** growing: every sample since the window (test point) started; sliding: the most recent ones. */
  kind: 'growing' | 'sliding';
  /** Sliding window length in samples. */
  samples?: number;
  /** Sliding window length in seconds (samples older than this leave). */
  seconds?: number;
  /** Hard cap on the samples held; a growing window that reaches it slides from then on. */
  maxSamples: number;
}

export interface ChannelOptions {
  window: WindowSpec;
  /** Largest lag of the maintained autocovariance. */
  maxLag: number;
  /** The estimator whose result is reported as the channel's uncertainty (`auto`: the default rule). */
  estimator: EstimatorName;
  /** How the warm-up is found: auto (default), none (every sample as given) or a fixed count. */
  warmup?: WarmupSetting;
  /** Coverage probability of the expanded uncertainty. */
  confidence: number;
  target: TargetSpec | null;
  /** Samples per second, when known from the rig; otherwise estimated from the timestamps. */
  rate: number | null;
  /** Mean samples between false stationarity alarms on a stationary channel (the detectors' budget). */
  falseAlarmSamples: number;
  /** No sample for this long (by the daemon's clock) makes the channel stale. */
  staleSeconds: number;
  /**
   * Run the steady-state and stationarity detectors (default). Off, the window is never cut and no
   * stationarity event is raised: the plain statistics of every sample (estimator studies).
   */
  detectors?: boolean;
  /** Stability rules from the test procedure and the readiness policy (src/engine/criteria/); none when absent. */
  criteria?: ChannelCriteriaSettings | null;
  /** Type B components, limits, decision rule, combined target and stopping rule (default: none, resolution proposed). */
  uncertainty?: UncertaintySettings;
}

/**
 * The default estimator: the `auto` rule (core/tau/estimator-set.ts), chosen by the coverage
 * benchmark (test/core/coverage.test.ts; the table is in DEVELOPERS.md): the autoregressive spectral estimate
 * with spectral lines removed, and Beran's law under long memory, keeps the 95 % interval's coverage
 * within 0.93-0.97 on AR(1) up to phi = 0.99, heavy-tailed innovations, ARMA(1,1) and damped
 * oscillations at n_eff near 100, and reads only the maintained lags.
 */
export const DEFAULT_ESTIMATOR: EstimatorName = 'auto';

/** Default growing-window cap: 2^22 samples (about 96 MiB of window per channel at the most). */
export const DEFAULT_MAX_SAMPLES = 4_194_304;

export const DEFAULT_CHANNEL_OPTIONS: ChannelOptions = {
  window: { kind: 'growing', maxSamples: DEFAULT_MAX_SAMPLES },
  maxLag: 64,
  estimator: DEFAULT_ESTIMATOR,
  confidence: 0.95,
  target: null,
  rate: null,
  falseAlarmSamples: 1_000_000,
  staleSeconds: 30,
  warmup: { mode: 'auto' },
};

/** Below this many samples the default estimator falls back to independent observations. */
export const FEW_SAMPLES = 16;

/** Lags of the autocorrelation function in every snapshot (at least 20, as the contract requires). */
export const MIN_REPORTED_LAGS = 20;
