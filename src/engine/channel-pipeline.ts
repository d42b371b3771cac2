import { WindowedSeries } from '../core/window/windowed-series.js';
import { BlockHistory, type BlockHistoryState } from '../core/window/block-history.js';
import { EstimatorSet } from '../core/tau/estimator-set.js';
import { AutocovarianceFft } from '../core/acf/autocovariance-fft.js';
import type { MethodEstimatorName, MethodName, TauEstimate } from '../core/tau/tau-estimate.js';
import { meanUncertainty } from '../core/uncertainty/mean-uncertainty.js';
import { targetStatus, type TargetStatus } from '../core/uncertainty/target-precision.js';
import { PeriodogramWorkspace, MAX_SEGMENT } from '../core/spectrum/periodogram.js';
import { diagnoseSpectrum, removeLines, linesBlockVariance, type SpectralDiagnosis } from '../core/spectrum/spectral-diagnosis.js';
import { fitAutoregression, blockMeanVariance, type ArFit } from '../core/tau/autoregressive-spectrum.js';
import { detectLattice, detectLatticeAt, type Lattice } from '../core/resolution/lattice.js';
import { type ChannelOptions, FEW_SAMPLES, MIN_REPORTED_LAGS } from './channel-options.js';
import { CaoRhinehartFilter, type CaoRhinehartState } from '../core/stationarity/cao-rhinehart.js';
import { StationarityMonitor, type MonitorState, type StationarityBreak } from './stationarity-monitor.js';
import { detectWarmup, recheckTransient, alarmIsWarmup, transientSummary, formatSamples, MIN_EFFECTIVE, type WarmupPending, type WarmupVerdict, type TransientSummary } from './warmup-detector.js';
import type { ChannelEvent, ChannelState } from './channel-events.js';
import { stationarityReport, allanReport, type StationarityReport, type AllanReport } from './stationarity-report.js';
import type { WindowedSeriesState } from '../core/window/windowed-series.js';
import { channelVerdict, type ChannelVerdict } from './channel-verdict.js';
import { expectRecord, type StateRecord } from '../core/state/record.js';
import { channelCriteria, type ChannelCriteria, type CriterionBrief } from './criteria/channel-criteria.js';
import type { CriterionState, CriteriaTracker } from './criteria/criteria-tracker.js';
import type { CriterionEvent } from './criteria/criteria-events.js';
import type { Readiness } from './criteria/readiness-policy.js';
import { channelCombined, verdictWithStopping, type CombinedReport, type ConformityReport } from './channel-combined.js';
import { DEFAULT_UNCERTAINTY_SETTINGS } from './channel-options.js';
import type { Verdict } from '../core/conformity/decision-rule.js';

/** One estimator's result as reported in a snapshot. */
export interface EstimatorReport {
  tauInt: number;
  nEff: number;
  standardUncertainty: number;
  dof: number;
  window: number;
  reliable: boolean;
  note?: string;
}

/** What the spectral diagnosis found, as reported. */
export interface SpectralReport {
  /** Samples in the periodogram segment. */
  segment: number;
  /** Periodic components (a limit cycle, a pump stroke): period in samples, amplitude in data units. */
  lines: { period: number; periodSeconds: number | null; amplitude: number; pValue: number }[];
  /** Long memory: the Hurst exponent and whether the mean converges more slowly than 1 / sqrt(n). */
  longMemory: { hurst: number; standardError: number; detected: boolean } | null;
}

/** A channel's state at one moment: the `plateau analyze --json` contract, one entry per channel. */
export interface ChannelSnapshot {
  name: string;
  n: number;
  mean: number | null;
  sd: number | null;
  /** Autocorrelation at lags 1, 2, ... (biased estimator). */
  acf: number[];
  tauInt: number | null;
  nEff: number | null;
  standardUncertainty: number | null;
  dof: number | null;
  coverageFactor: number | null;
  expandedUncertainty: number | null;
  confidence: number;
  target: TargetStatus | null;
  /** The method behind tauInt and the uncertainty (what `auto` chose, or the configured estimator). */
  estimator: MethodName;
  /** Why that method: the rule that chose it, in words. */
  estimatorReason: string;
  estimators: Partial<Record<MethodEstimatorName, EstimatorReport>>;
  /** Present when the estimators differ by more than their sampling error. */
  disagreement: string[];
  /** The verdict: ready to record, or which conditions are still pending and what they need. */
  verdict: ChannelVerdict;
  window: {
    kind: 'growing' | 'sliding';
    /** 0-based index of the window's first sample since the channel (or test point) began. */
    startIndex: number;
    /** 0-based index of the window's last sample. */
    endIndex: number;
    startTime: number | null;
    endTime: number | null;
    capacity: number;
  };
  /** Samples per second (configured, or estimated from the window's timestamps). */
  rate: number | null;
  /** Total samples the channel has received. */
  received: number;
  last: { value: number; time: number | null } | null;
  /** warming, steady, precise, unsteady or stale. */
  state: ChannelState;
  /** Samples dropped from the window as warm-up, or because they came before a break. */
  excluded: number;
  /** Steady-state evidence: the warm-up end, the reported tests, the monitor, the last break. */
  stationarity: StationarityReport | null;
  /** Spectral lines and long memory (null before the window holds 512 samples). */
  spectrum: SpectralReport | null;
  /** Readings on a lattice (an indication's resolution): the step and how many distinct values. */
  resolution: Lattice | null;
  /** Overlapping Allan deviation at octave averaging factors. */
  allan: AllanReport['points'];
  averagingLimit: AllanReport['averagingLimit'];
  /** The channel's most recent events (up to 256), oldest first. */
  events: ChannelEvent[];
  eventCount: number;
  notes: string[];
  /** Stability rules (src/engine/criteria/): live state per rule, in configuration order; empty without rules. */
  criteria: CriterionState[];
  /** Readiness under the policy (the statistical verdict and the rules); null when no criteria are configured. */
  readiness: Readiness | null;
  /** Type A with the Type B components: u_c, nu_eff, k, U, the budget and the stopping rule (null without a Type A u). */
  combined: CombinedReport | null;
  /** Conformity with the configured limits and decision rule (null without limits or without u_c). */
  conformity: ConformityReport | null;
}

/** A channel at a glance (live displays, retained status messages). */
export interface ChannelSummary {
  name: string;
  state: ChannelState;
  n: number;
  received: number;
  last: { value: number; time: number | null } | null;
  mean: number | null;
  standardUncertainty: number | null;
  expandedUncertainty: number | null;
  coverageFactor: number | null;
  dof: number | null;
  confidence: number;
  tauInt: number | null;
  nEff: number | null;
  excluded: number;
  target: TargetStatus | null;
  estimator: MethodName | null;
  verdict: ChannelVerdict;
  /** Stability rules at a glance; empty without rules. */
  criteria: CriterionBrief[];
  /** Ready under the readiness policy; null when no criteria are configured (the verdict decides). */
  readyUnderPolicy: boolean | null;
  /** u_c, nu_eff, k, U and the stopping rule, when Type B components, limits or a stopping rule are configured. */
  combined?: Pick<CombinedReport, 'value' | 'standardUncertainty' | 'dof' | 'coverageFactor' | 'expandedUncertainty' | 'stopping'> | null;
  conformity?: Pick<ConformityReport, 'rule' | 'verdict' | 'probability'> | null;
}

const SHARED_FFT = new AutocovarianceFft();
const SHARED_PERIODOGRAM = new PeriodogramWorkspace();
const NO_EVENTS: readonly ChannelEvent[] = Object.freeze([]);

/** The snapshot without the combined uncertainty and the stability rules (added by `snapshot`). */
type StatisticalSnapshot = Omit<ChannelSnapshot, 'criteria' | 'readiness' | 'combined' | 'conformity'>;
/** The snapshot with the combined uncertainty, before the stability rules. */
type CombinedSnapshot = Omit<ChannelSnapshot, 'criteria' | 'readiness'>;
/** The summary without the stability rules. */
type SummaryBase = Omit<ChannelSummary, 'criteria' | 'readyUnderPolicy'>;

type SnapshotBase = Pick<ChannelSnapshot, 'name' | 'n' | 'confidence' | 'estimator' | 'window' | 'rate' | 'received' | 'last' | 'state' | 'excluded' | 'events' | 'eventCount'>;

function finiteOrNull(value: number): number | null {
  return Number.isFinite(value) ? value : null;
}

/** Samples the window must hold before the first warm-up check. */
const FIRST_CHECK = 64;
/** Warm-up and transient checks run every 1/CHECK_DIVISOR of the window, and at most every MIN_CHECK_STEP samples. */
const CHECK_DIVISOR = 16;
const MIN_CHECK_STEP = 16;
/** Most recent events kept for snapshots (all events go to the caller as they happen). */
const RECENT_EVENTS = 256;
/** Blocks of this many tau_int feed the stationarity monitor. */
const MONITOR_BLOCK_TAUS = 8;
/** Effective samples since a break before stationarity may be regained (hysteresis). */
const REGAIN_EFFECTIVE = 200;
/**
 * Monitor blocks (of MONITOR_BLOCK_TAUS tau_int) the first steady state must hold before an alarm
 * counts as a break; an earlier alarm withdraws a premature verdict instead (the monitor's own
 * reference period).
 */
const PREMATURE_BLOCKS = 64;
/** Effective samples of uninterrupted steadiness after a regain that end a streak of losses. */
const LONG_STEADY = 5000;
/** precision-reached re-arms when U climbs this far above the bound (hysteresis). */
const PRECISION_REARM = 1.1;
/** Smallest periodogram segment the spectral diagnosis runs on. */
const DIAGNOSIS_SEGMENT = 512;
/** The diagnosis is refreshed after this many segments of new samples (or when the segment grows). */
const DIAGNOSIS_REFRESH_SEGMENTS = 4;
/** Version of the saved state below; a checkpoint of another version is replayed from samples. */
export const PIPELINE_STATE_VERSION = 3;

type Phase = 'warming' | 'steady' | 'unsteady';

/**
 * The pipeline's checkpoint: a named record. Versions 1 (positional) and 2 (named) were written by
 * the engine before the verdict's warm-up, spectral and break-revision state: their decisions are
 * not this engine's, so src/engine/channel-state.ts replays such a channel from its samples.
 */
export interface ChannelPipelineState extends StateRecord<'channel-pipeline', typeof PIPELINE_STATE_VERSION> {
  series: WindowedSeriesState;
  history: BlockHistoryState;
  phase: Phase;
  received: number;
  lastValue: number;
  lastTime: number;
  warmupEnd: number | null;
  excluded: number;
  windowOrigin: number;
  nextWarmupCheck: number;
  nextPrecisionCheck: number;
  nextAllanCheck: number;
  nextDiagnosis: number;
  nextReclassify: number;
  breakChangePoint: number;
  failedChecks: number;
  indicatorBlock: number;
  indicatorSum: number;
  indicatorCount: number;
  eventCount: number;
  lastBreakAt: number;
  breakNoise: number;
  lossStreak: number;
  regainedAt: number;
  precise: boolean;
  stale: boolean;
  lostBefore: boolean;
  averagingLimitSeen: boolean;
  /** The conformity outcome last announced (absent in checkpoints written before it existed). */
  lastConformity?: Verdict | null;
  monitor: MonitorState | null;
  brokenMonitor: MonitorState | null;
  indicator: CaoRhinehartState;
  lastBreak: StationarityBreak | null;
  diagnosis: SpectralDiagnosis | null;
  warmupPending: WarmupPending | null;
  warmupMethod: WarmupVerdict['method'] | null;
  transient: TransientSummary | null;
  recentEvents: ChannelEvent[];
}

/**
 * A channel's pipeline: the window, its estimators, the detectors that decide when averaging is
 * valid, the channel's state, its verdict and its events. Deterministic given the samples: the
 * daemon and `plateau analyze` both feed samples here, one at a time, in arrival order, and get the
 * same events at the same sample indices. Reading (snapshot, summary) never changes the state.
 *
 * Phases: warming (no steady state yet: the warm-up detector runs on a geometric schedule),
 * steady (the stationarity monitor watches every sample; the precision check and, for a growing
 * window, the transient check run on a schedule), unsteady (after a break: a growing window
 * restarts at the change point and the warm-up detector looks for steady state again). The
 * displayed state adds precise (steady and at the target) and stale (no data by the daemon's clock).
 * The detectors take their long-run variance from the `auto` rule whatever estimator the user
 * reports with, so that choosing, say, `iid` for a report cannot make every correlated channel
 * lose stationarity.
 */
export class ChannelPipeline {
  readonly name: string;
  readonly options: ChannelOptions;
  readonly series: WindowedSeries;
  /** Every sample since the window began (block means): the transient fit reads it. */
  readonly history = new BlockHistory(512);
  private readonly estimatorSet: EstimatorSet;
  private received = 0;
  private lastValue = Number.NaN;
  private lastTime = Number.NaN;
  private phase: Phase = 'warming';
  private precise = false;
  private stale = false;
  private lostBefore = false;
  private averagingLimitSeen = false;
  private lastConformity: Verdict | null = null;
  private latticeCache: { key: string; lattice: Lattice | null } | null = null;
  private monitor: StationarityMonitor | null = null;
  /** The monitor that raised the last break (its CUSUM trace stays on display). */
  private brokenMonitor: StationarityMonitor | null = null;
  private lastBreak: StationarityBreak | null = null;
  private lastBreakAt = -1;
  /** Losses in the current streak, and where the last regain happened. */
  private lossStreak = 0;
  private regainedAt = -1;
  /** Long-run variance before the last break (the channel's noise when it was steady). */
  private breakNoise = 0;
  /** Absolute index of the first sample after the warm-up (null while warming). */
  private warmupEnd: number | null = null;
  /** Samples dropped from the window as warm-up (or before a break) since the window began. */
  private excluded = 0;
  /** Absolute index where the current window began (test point start or channel start). */
  private windowOrigin = 0;
  private nextWarmupCheck = FIRST_CHECK;
  private nextPrecisionCheck = 0;
  private nextAllanCheck = 256;
  private nextDiagnosis = DIAGNOSIS_SEGMENT;
  /** Index at which the last break is classified again (-1: not any more). */
  private nextReclassify = -1;
  /** The change point the last break was first classified with. */
  private breakChangePoint = -1;
  /** Warm-up checks in a row that did not find steady state (a full sliding window backs off). */
  private failedChecks = 0;
  private diagnosis: SpectralDiagnosis | null = null;
  /** What the last warm-up check is still waiting for (null once steady). */
  private warmupPending: WarmupPending | null = null;
  private warmupMethod: WarmupVerdict['method'] | null = null;
  private transient: TransientSummary | null = null;
  private indicator = new CaoRhinehartFilter();
  private indicatorBlock = 16;
  private indicatorSum = 0;
  private indicatorCount = 0;
  private recentEvents: ChannelEvent[] = [];
  private eventCount = 0;
  private pendingEvents: ChannelEvent[] | null = null;
  private snapshotCache: { key: string; snapshot: ChannelSnapshot } | null = null;
  /** The unit as printed, for the verdict's words (setUnitLabel). */
  private unitText = '';
  /** The stability rules, fed every sample beside the statistics (null without any). */
  readonly criteria: ChannelCriteria | null;
  /** Its tracker, called directly on the per-sample path (one call less). */
  private readonly criteriaTracker: CriteriaTracker | null;

  /**
   * @param fft transform workspace shared by the channels of one process (a snapshot's FFT fallback
   *   then allocates its tables once, not once per channel); the engine is single-threaded.
   */
  constructor(name: string, options: ChannelOptions, fft: AutocovarianceFft = SHARED_FFT) {
    this.name = name;
    this.options = options;
    this.estimatorSet = new EstimatorSet(fft);
    this.criteria = channelCriteria(options.criteria);
    this.criteriaTracker = this.criteria?.tracker ?? null;
    const { window } = options;
    const capacity = window.kind === 'sliding' && window.samples ? Math.min(window.samples, window.maxSamples) : window.maxSamples;
    this.series = new WindowedSeries({
      maxSamples: Math.max(4, capacity),
      maxLag: options.maxLag,
      preallocate: window.kind === 'sliding' && window.samples !== undefined,
    });
  }

  private get growing(): boolean {
    return this.options.window.kind === 'growing';
  }

  /**
   * Feeds one sample (time in seconds; NaN when unknown). Values must be finite: the decoders and
   * the CSV reader reject the rest. Returns the events this sample raised (usually none).
   */
  push(value: number, timeSeconds: number): readonly ChannelEvent[] {
    const index = this.series.nextIndex;
    this.series.push(value, timeSeconds);
    this.history.push(value);
    this.received++;
    this.lastValue = value;
    this.lastTime = timeSeconds;
    const { window } = this.options;
    if (window.seconds !== undefined && window.kind === 'sliding') {
      const ring = this.series.ring;
      const oldest = timeSeconds - window.seconds;
      while (ring.length > 1 && ring.timeAt(0) < oldest) this.series.shift();
    }
    this.pendingEvents = null;
    if (this.stale) {
      this.stale = false;
      this.raise({ kind: 'fresh', at: index });
    }
    if (this.criteriaTracker !== null) {
      const raised = this.criteriaTracker.push(value, timeSeconds);
      if (raised.length !== 0) this.raiseCriteria(raised, index);
    }
    if (index >= this.nextDiagnosis) this.updateDiagnosis(index);
    if (this.options.detectors === false) {
      if (this.phase !== 'steady' && this.series.length >= 2) {
        this.phase = 'steady';
        this.warmupEnd = this.series.firstIndex;
        this.warmupPending = null;
      }
      if (this.phase === 'steady' && index >= this.nextPrecisionCheck) this.checkPrecision(index);
      return this.pendingEvents ?? NO_EVENTS;
    }
    this.feedIndicator(value);
    if (this.brokenMonitor && index >= 0 && this.phase !== 'steady' && this.nextReclassify >= 0) {
      this.brokenMonitor.observe(value, index);
      if (index >= this.nextReclassify) this.reclassifyBreak(index);
    }
    if (this.phase === 'steady' && this.monitor) {
      const found = this.monitor.push(value, index);
      if (found) this.breakFound(found, index);
    }
    if (index >= this.nextWarmupCheck) {
      if (this.phase !== 'steady') this.checkWarmup(index);
      else this.checkTransient(index);
    }
    if (this.phase === 'steady' && index >= this.nextPrecisionCheck) this.checkPrecision(index);
    if (index >= this.nextAllanCheck) this.checkAveragingLimit(index);
    return this.pendingEvents ?? NO_EVENTS;
  }

  /** The rules' events of one sample, with the pipeline's index (as ChannelCriteria.push gives them). */
  private raiseCriteria(raised: readonly CriterionEvent[], index: number): void {
    for (const event of raised) {
      event.at = index;
      this.raise(event);
    }
  }

  /** The options' uncertainty settings were replaced (Type B components from the API): read them afresh. */
  settingsChanged(): void {
    this.snapshotCache = null;
    this.latticeCache = null;
  }

  /** The test point's set point for the rules that take it (null: none), from the next sample on. */
  setSetPoint(value: number | null): void {
    if (this.criteria === null) return;
    this.criteria.setSetPoint(value);
    this.snapshotCache = null;
  }

  private raise(event: ChannelEvent): void {
    (this.pendingEvents ??= []).push(event);
    this.remember(event);
    // conformity is judged afresh once the channel is steady again
    if (event.kind === 'stationarity-lost' || event.kind === 'steady-withdrawn') this.lastConformity = null;
  }

  /**
   * The daemon's clock: a channel that has had no sample for staleSeconds of wall-clock time (the
   * daemon measures the silence from arrival times, not from the samples' own time stamps, which may
   * come from a replayed log) turns stale: one event, at the index of its last sample. `plateau
   * analyze` has no clock and never calls this. `now`: stale at once, whatever the silence (the
   * source said so: a Sparkplug B death).
   */
  checkStale(silentSeconds: number, now = false): ChannelEvent | null {
    if (this.stale || this.received === 0) return null;
    if (!now && silentSeconds < this.options.staleSeconds) return null;
    this.stale = true;
    const event: ChannelEvent = { kind: 'stale', at: this.received - 1, silentSeconds };
    this.remember(event);
    return event;
  }

  /** Starts a new growing window at the next sample (a test point starts): warming again. */
  restartWindow(): void {
    this.series.clear();
    this.windowOrigin = this.series.nextIndex;
    this.history.clear(this.windowOrigin);
    this.resetDetectors();
    this.lostBefore = false;
    this.lastBreak = null;
    this.brokenMonitor = null;
    this.nextReclassify = -1;
    this.breakNoise = 0;
    this.lossStreak = 0;
    this.regainedAt = -1;
    this.excluded = 0;
    this.averagingLimitSeen = false;
    this.lastConformity = null;
    this.nextAllanCheck = this.windowOrigin + 256;
    this.diagnosis = null;
    this.nextDiagnosis = this.windowOrigin + DIAGNOSIS_SEGMENT;
    this.snapshotCache = null;
  }

  get count(): number {
    return this.series.length;
  }

  /** Events raised so far (changes whenever a snapshot would). */
  get snapshotKeyEvents(): number {
    return this.eventCount;
  }

  /** The last `count` samples of the window, oldest first (times in seconds, null when unknown). */
  recentTrace(count: number): { times: (number | null)[]; values: number[]; firstIndex: number } {
    const ring = this.series.ring;
    const n = ring.length;
    const from = Math.max(0, n - count);
    const times: (number | null)[] = [];
    const values: number[] = [];
    for (let i = from; i < n; i++) {
      times.push(finiteOrNull(ring.timeAt(i)));
      values.push(ring.at(i));
    }
    return { times, values, firstIndex: this.series.firstIndex + from };
  }

  /**
   * The stationarity monitor's recent CUSUM sums: the live monitor's, or after a break the sums of
   * the monitor that raised it (so the alarm stays visible); null before the first steady state.
   */
  cusumTrace(): { blockSize: number; decisionInterval: number; upper: number[]; lower: number[]; alarmed: boolean } | null {
    const monitor = this.monitor ?? this.brokenMonitor;
    return monitor ? { ...monitor.cusumTrace(), alarmed: monitor === this.brokenMonitor } : null;
  }

  get totalReceived(): number {
    return this.received;
  }

  get state(): ChannelState {
    if (this.stale) return 'stale';
    if (this.phase === 'warming') return 'warming';
    if (this.phase === 'unsteady') return 'unsteady';
    return this.precise ? 'precise' : 'steady';
  }

  /** Samples per second: configured, else from the window's first and last timestamps. */
  rate(): number | null {
    if (this.options.rate && this.options.rate > 0) return this.options.rate;
    const ring = this.series.ring;
    const n = ring.length;
    if (n < 2) return null;
    const span = ring.timeAt(n - 1) - ring.timeAt(0);
    return span > 0 ? (n - 1) / span : null;
  }

  /** Plain-data state: restoring it into a pipeline with the same name and options continues bit for bit. */
  saveState(): ChannelPipelineState {
    return {
      record: 'channel-pipeline',
      version: PIPELINE_STATE_VERSION,
      series: this.series.saveState(),
      history: this.history.saveState(),
      phase: this.phase,
      received: this.received,
      lastValue: this.lastValue,
      lastTime: this.lastTime,
      warmupEnd: this.warmupEnd,
      excluded: this.excluded,
      windowOrigin: this.windowOrigin,
      nextWarmupCheck: this.nextWarmupCheck,
      nextPrecisionCheck: this.nextPrecisionCheck,
      nextAllanCheck: this.nextAllanCheck,
      nextDiagnosis: this.nextDiagnosis,
      nextReclassify: this.nextReclassify,
      breakChangePoint: this.breakChangePoint,
      failedChecks: this.failedChecks,
      indicatorBlock: this.indicatorBlock,
      indicatorSum: this.indicatorSum,
      indicatorCount: this.indicatorCount,
      eventCount: this.eventCount,
      lastBreakAt: this.lastBreakAt,
      breakNoise: this.breakNoise,
      lossStreak: this.lossStreak,
      regainedAt: this.regainedAt,
      precise: this.precise,
      stale: this.stale,
      lostBefore: this.lostBefore,
      averagingLimitSeen: this.averagingLimitSeen,
      lastConformity: this.lastConformity,
      monitor: this.monitor ? this.monitor.saveState() : null,
      brokenMonitor: this.brokenMonitor ? this.brokenMonitor.saveState() : null,
      indicator: this.indicator.state(),
      lastBreak: this.lastBreak ? { ...this.lastBreak } : null,
      diagnosis: this.diagnosis ? structuredClone(this.diagnosis) : null,
      warmupPending: this.warmupPending ? { ...this.warmupPending } : null,
      warmupMethod: this.warmupMethod,
      transient: this.transient ? { ...this.transient } : null,
      recentEvents: this.recentEvents.map((event) => ({ ...event })),
    };
  }

  /** @throws RangeError for a record of another name or version (the caller replays from samples). */
  loadState(state: ChannelPipelineState): void {
    expectRecord(state, 'channel-pipeline', PIPELINE_STATE_VERSION);
    this.series.loadState(state.series);
    this.history.loadState(state.history);
    this.phase = state.phase;
    this.received = state.received;
    this.lastValue = state.lastValue;
    this.lastTime = state.lastTime;
    this.warmupEnd = state.warmupEnd;
    this.excluded = state.excluded;
    this.windowOrigin = state.windowOrigin;
    this.nextWarmupCheck = state.nextWarmupCheck;
    this.nextPrecisionCheck = state.nextPrecisionCheck;
    this.nextAllanCheck = state.nextAllanCheck;
    this.nextDiagnosis = state.nextDiagnosis;
    this.nextReclassify = state.nextReclassify;
    this.breakChangePoint = state.breakChangePoint;
    this.failedChecks = state.failedChecks;
    this.indicatorBlock = state.indicatorBlock;
    this.indicatorSum = state.indicatorSum;
    this.indicatorCount = state.indicatorCount;
    this.eventCount = state.eventCount;
    this.lastBreakAt = state.lastBreakAt;
    this.breakNoise = state.breakNoise;
    this.lossStreak = state.lossStreak;
    this.regainedAt = state.regainedAt;
    this.precise = state.precise;
    this.stale = state.stale;
    this.lostBefore = state.lostBefore;
    this.averagingLimitSeen = state.averagingLimitSeen;
    this.lastConformity = state.lastConformity ?? null;
    this.monitor = state.monitor ? StationarityMonitor.fromState(state.monitor) : null;
    this.brokenMonitor = state.brokenMonitor ? StationarityMonitor.fromState(state.brokenMonitor) : null;
    this.indicator = CaoRhinehartFilter.fromState(state.indicator);
    this.lastBreak = state.lastBreak;
    this.diagnosis = state.diagnosis;
    this.warmupPending = state.warmupPending;
    this.warmupMethod = state.warmupMethod;
    this.transient = state.transient;
    this.recentEvents = state.recentEvents;
    this.snapshotCache = null;
  }

  private remember(event: ChannelEvent): void {
    this.eventCount++;
    this.recentEvents.push(event);
    if (this.recentEvents.length > RECENT_EVENTS) this.recentEvents.shift();
    this.snapshotCache = null;
  }

  private resetDetectors(): void {
    this.phase = 'warming';
    this.precise = false;
    this.monitor = null;
    this.warmupEnd = null;
    this.warmupPending = null;
    this.warmupMethod = null;
    this.transient = null;
    this.failedChecks = 0;
    this.nextWarmupCheck = this.series.firstIndex + FIRST_CHECK;
    this.indicator.reset();
    this.indicatorSum = 0;
    this.indicatorCount = 0;
  }

  /** Cao-Rhinehart R on block means: the cheap per-sample steadiness indicator. */
  private feedIndicator(value: number): void {
    this.indicatorSum += value - (Number.isFinite(this.series.anchor) ? this.series.anchor : 0);
    if (++this.indicatorCount < this.indicatorBlock) return;
    const mean = this.indicatorSum / this.indicatorCount;
    this.indicatorSum = 0;
    this.indicatorCount = 0;
    this.indicator.update(mean + (Number.isFinite(this.series.anchor) ? this.series.anchor : 0));
  }

  /** The detectors' estimate: the `auto` rule, whatever the reported estimator (robust, fixed). */
  private detectorEstimate(): TauEstimate {
    return this.estimatorSet.auto(this.series, this.diagnosis).estimate;
  }

  /**
   * The noise the transient fit is judged against: the short-memory autoregressive estimate of the
   * window (never Beran's law: a transient still in the window reads as long memory, and its
   * inflated tau_int would leave too few blocks to see it by). O(maxLag^2).
   */
  private shortMemoryNoise(): { longRunVariance: number; tauInt: number } {
    const estimate = this.estimatorSet.estimate(this.series, 'ar', this.diagnosis);
    return { longRunVariance: estimate.varianceOfMean * this.series.length, tauInt: Math.max(1, estimate.tauInt) };
  }

  private tauNow(): number {
    if (this.series.length < 8 || !(this.series.variance > 0)) return 1;
    return Math.max(1, this.detectorEstimate().tauInt);
  }

  /**
   * The spectral diagnosis (lines, long memory) of the most recent power-of-two segment of the
   * window, refreshed when the segment grows or after DIAGNOSIS_REFRESH_SEGMENTS segments of new
   * samples: O(log n) amortised per sample.
   */
  private updateDiagnosis(index: number): void {
    const n = this.series.length;
    let segment = 1;
    while (segment * 2 <= n && segment < MAX_SEGMENT) segment *= 2;
    if (segment < DIAGNOSIS_SEGMENT || !(this.series.variance > 0)) {
      this.nextDiagnosis = index + Math.max(64, DIAGNOSIS_SEGMENT - n);
      return;
    }
    // Only the periodogram's segment is read (the newest `segment` samples), never the whole window.
    const values = this.series.newestValues(segment);
    const periodogram = SHARED_PERIODOGRAM.compute(values);
    this.diagnosis = periodogram ? diagnoseSpectrum(periodogram, this.series.autocovariance(), n, this.series.variance, values) : null;
    this.snapshotCache = null;
    // Next: when the window reaches the next power of two, or after a few segments of new samples.
    const grows = segment < MAX_SEGMENT ? Math.max(1, 2 * segment - n) : Number.POSITIVE_INFINITY;
    this.nextDiagnosis = index + Math.max(1, Math.min(grows, Math.floor(DIAGNOSIS_REFRESH_SEGMENTS * segment)));
  }

  /** The window was cut: the diagnosis of the samples that left must not outlive them. */
  private diagnosisAfterCut(index: number): void {
    this.diagnosis = null;
    this.nextDiagnosis = index + 1;
  }

  private checkWarmup(index: number): void {
    const n = this.series.length;
    // A growing window's checks thin out as it grows; a full sliding window's would not, so while it
    // stays not steady they back off (doubling, up to four window lengths apart): a drifting channel
    // costs no more than a steady one.
    const backoff = this.growing || n < this.series.maxSamples ? 1 : 2 ** Math.min(6, this.failedChecks);
    this.nextWarmupCheck = index + Math.max(MIN_CHECK_STEP, Math.floor((n / CHECK_DIVISOR) * backoff));
    this.failedChecks++;
    // After a break a sliding window waits until the change point has slid out.
    if (this.lastBreak && this.series.firstIndex <= this.lastBreak.changePoint && !this.growing) {
      this.warmupPending = { condition: 'warm-up', message: 'waiting for the break to slide out of the window', samplesToGo: this.lastBreak.changePoint - this.series.firstIndex + 1 };
      return;
    }
    if (n < FIRST_CHECK) {
      this.warmupPending = { condition: 'effective-samples', message: `${n} samples; the first steady-state check comes at ${FIRST_CHECK}`, samplesToGo: FIRST_CHECK - n };
      return;
    }
    if (!(this.series.variance > 0)) {
      this.warmupPending = { condition: 'warm-up', message: 'constant window: no variation to judge steady state by', samplesToGo: null };
      return;
    }
    const values = this.series.values();
    const verdict = detectWarmup({ values, firstIndex: this.series.firstIndex, history: this.history, setting: this.options.warmup ?? { mode: 'auto' }, growing: this.growing, noise: this.shortMemoryNoise() });
    this.transient = verdict.transient;
    this.warmupMethod = verdict.method;
    this.indicatorBlock = Math.max(8, Math.ceil(4 * this.tauNow()));
    if (!verdict.steady) {
      this.warmupPending = verdict.pending;
      return;
    }
    const tau = verdict.effectiveSamples ? Math.max(1, (index + 1 - verdict.start) / verdict.effectiveSamples) : this.tauNow();
    if (this.lostBefore) {
      const regain = this.regainEvidence(values.subarray(Math.max(0, verdict.start - this.series.firstIndex)), tau);
      if (regain) {
        this.warmupPending = regain;
        return;
      }
    }
    this.warmupPending = null;
    const end = verdict.start;
    if (this.growing && end > this.series.firstIndex) {
      this.excluded += end - this.series.firstIndex;
      this.series.dropBefore(end);
      this.diagnosisAfterCut(index);
    }
    if (this.nextReclassify >= 0 && this.lostBefore) this.reclassifyBreak(index);
    this.warmupEnd = end;
    this.phase = 'steady';
    this.failedChecks = 0;
    this.nextReclassify = -1;
    this.startMonitor(index);
    const excluded = this.excluded;
    if (this.lostBefore) this.regainedAt = index;
    this.raise(this.lostBefore ? { kind: 'stationarity-regained', at: index, warmupEnd: end, excluded } : { kind: 'steady', at: index, warmupEnd: end, excluded });
    this.nextPrecisionCheck = index;
  }

  /**
   * A steady growing window: the record since the window began is fitted again as it grows. When
   * the warm-up turns out longer than it looked (its tail, now resolved, still biases the kept mean),
   * the start moves later (`warmup-extended`); when no later start leaves enough samples, the
   * warm-up is not over and the channel is warming again.
   */
  private checkTransient(index: number): void {
    const n = this.series.length;
    this.nextWarmupCheck = index + Math.max(MIN_CHECK_STEP, Math.floor(n / CHECK_DIVISOR));
    if (!this.growing || (this.options.warmup && this.options.warmup.mode !== 'auto') || !(this.series.variance > 0)) return;
    const noise = this.shortMemoryNoise();
    const found = recheckTransient(this.history, noise.longRunVariance, noise.tauInt, this.series.firstIndex, this.series.nextIndex);
    if (!found) return;
    this.transient = { ...transientSummary(found.fit), significant: true };
    if (found.start === null) {
      // After a break the level's own movements are the monitor's to judge (a drift is a trend).
      if (this.lostBefore) return;
      // The warm-up is not over: back to warming (not a break: the level is what it was heading for).
      this.withdrawSteady(index, found.fit.timeConstant, found.fit.decays ? 'the warm-up is still decaying: its remaining transient biases the mean by more than its uncertainty allows' : 'the level is still moving, as it has since the window began: the mean is biased by more than its uncertainty allows');
      return;
    }
    if (found.start <= this.series.firstIndex) return;
    this.excluded += found.start - this.series.firstIndex;
    this.series.dropBefore(found.start);
    this.diagnosisAfterCut(index);
    this.warmupEnd = found.start;
    this.startMonitor(index);
    this.raise({ kind: 'warmup-extended', at: index, warmupEnd: found.start, excluded: this.excluded });
  }

  /**
   * Hysteresis after a break: stationarity is regained only on twice the evidence that declared it
   * first (REGAIN_EFFECTIVE effective samples since the cut) and with no trend left in the block
   * means (|z| < 2 against the pre-break long-run variance), so an ongoing drift cannot flap between
   * lost and regained. Returns what is still missing, or null when the regain is confirmed.
   */
  private regainEvidence(kept: Float64Array, tau: number): WarmupPending | null {
    // Each loss in a streak doubles the evidence the next regain needs (a slow drift looks steady
    // over short stretches), so lost/regained cannot alternate quickly.
    const needed = REGAIN_EFFECTIVE * 2 ** Math.min(10, this.lossStreak - 1);
    const have = kept.length / tau;
    if (have < needed) return { condition: 'effective-samples', message: `after the break: ${Math.floor(have)} effective samples of the new level, ${needed} needed to regain steady state`, samplesToGo: Math.ceil((needed - have) * tau) };
    // A stretch shorter than twice the time the last break took to show cannot rule it out (a
    // sliding window asks at most half its length).
    const delay = this.lastBreak ? this.lastBreakAt - this.breakChangePoint : 0;
    const wanted = this.growing ? 2 * delay : Math.min(2 * delay, this.series.maxSamples / 2);
    if (kept.length < wanted) return { condition: 'effective-samples', message: 'after the break: the new level must last twice as long as the break took to show', samplesToGo: Math.ceil(wanted - kept.length) };
    const blockSize = Math.max(4, Math.ceil(MONITOR_BLOCK_TAUS * tau));
    const blocks = Math.floor(kept.length / blockSize);
    if (blocks < 8) return { condition: 'effective-samples', message: 'after the break: too few blocks to check for a trend', samplesToGo: (8 - blocks) * blockSize };
    const means = new Float64Array(blocks);
    for (let b = 0; b < blocks; b++) {
      let sum = 0;
      for (let i = b * blockSize; i < (b + 1) * blockSize; i++) sum += kept[i] as number;
      means[b] = sum / blockSize;
    }
    // The noise level from before the break: a drift would inflate an estimate from the drifting
    // data itself and hide its own trend.
    const longRunVariance = this.breakNoise > 0 ? this.breakNoise : this.detectorEstimate().varianceOfMean * this.series.length;
    const sigmaBlock = Math.sqrt(longRunVariance / blockSize);
    const centre = (blocks - 1) / 2;
    let sxy = 0;
    let sxx = 0;
    for (let b = 0; b < blocks; b++) {
      sxy += (b - centre) * (means[b] as number);
      sxx += (b - centre) ** 2;
    }
    const z = sxy / sxx / (sigmaBlock / Math.sqrt(sxx));
    return Math.abs(z) < 2 ? null : { condition: 'break', message: `after the break the level still trends (z = ${z.toFixed(1)})`, samplesToGo: null };
  }

  /**
   * What the stationarity monitor works with: its block size and the variance of a block mean
   * (passed as blockSize times that variance, the "long-run variance" at that block size).
   * Block size: at least 16 samples, MONITOR_BLOCK_TAUS tau_int, twice the fitted model's correlation
   * length (a damped oscillation decays slower than its tau_int says) and four periods of any
   * spectral line. Variance: that of the mean of a block under the fitted autoregression plus the
   * lines' share (blockMeanVariance, linesBlockVariance), not S(0) / b, which a damped oscillation or
   * a cycle that does not fit a whole number of times into a block would get wrong.
   */
  private monitorNoise(blockSize?: number): { blockSize: number; longRunVariance: number; dof: number } {
    const estimate = this.detectorEstimate();
    const n = this.series.length;
    const lines = this.diagnosis?.lines ?? [];
    const maintained = this.series.autocovariance();
    const gamma = lines.length > 0 ? removeLines(maintained, n, lines) : maintained;
    const fit = fitAutoregression(gamma, n);
    let size = blockSize;
    if (size === undefined) {
      size = Math.max(16, Math.ceil(MONITOR_BLOCK_TAUS * Math.max(1, estimate.tauInt)));
      if (fit) size = Math.max(size, 2 * correlationLength(gamma, fit));
      for (const line of lines) size = Math.max(size, Math.ceil(4 * line.period));
    }
    let longRunVariance = estimate.varianceOfMean * n;
    if (fit && estimate.method !== 'beran') longRunVariance = size * (blockMeanVariance(gamma, fit, size) + linesBlockVariance(lines, size));
    return { blockSize: size, longRunVariance: Math.max(longRunVariance, Number.MIN_VALUE), dof: Math.max(1, estimate.dof) };
  }

  private startMonitor(index: number): void {
    const noise = this.monitorNoise();
    let longRunVariance = noise.longRunVariance;
    // After a shift or a trend the noise is the channel's own: keep the pre-break level, since a
    // drift still in the data would inflate a fresh estimate. After a variance change, the new one.
    if (this.lastBreak && this.lastBreak.cause !== 'variance' && this.breakNoise > 0) longRunVariance = Math.min(longRunVariance, this.breakNoise);
    this.monitor = new StationarityMonitor(
      {
        blockSize: noise.blockSize,
        longRunVariance,
        longRunDof: noise.dof,
        falseAlarmSamples: this.options.falseAlarmSamples,
      },
      index + 1,
      this.series.mean,
    );
  }

  /**
   * Whether an alarm of the monitor is the warm-up's tail rather than a break: a steady state
   * declared early on a short record can hide a slow warm-up that the monitor then sees as a drift.
   * When the record since the window began is explained by a decaying exponential that still biases
   * the kept mean, the channel goes back to warming (no break, no penalty on the regain).
   */
  private alarmIsWarmupTail(index: number): boolean {
    if (!this.growing || (this.options.warmup && this.options.warmup.mode !== 'auto') || this.lostBefore) return false;
    const noise = this.shortMemoryNoise();
    const fit = alarmIsWarmup(this.history, noise.longRunVariance, noise.tauInt);
    if (!fit) return false;
    this.transient = { ...transientSummary(fit), significant: true };
    this.withdrawSteady(index, fit.timeConstant, 'the monitor\'s alarm is the warm-up still running: the record since the window began is explained by a decaying transient, not by a break');
    return true;
  }

  private withdrawSteady(index: number, timeConstant: number, reason: string): void {
    this.phase = 'warming';
    this.precise = false;
    this.monitor = null;
    this.warmupEnd = null;
    this.warmupPending = { condition: 'warm-up', message: Number.isFinite(timeConstant) ? `warm-up still decaying (time constant about ${formatSamples(timeConstant)} samples)` : 'steady state withdrawn', samplesToGo: null };
    this.raise({ kind: 'steady-withdrawn', at: index, reason });
    this.nextWarmupCheck = index + MIN_CHECK_STEP;
  }

  private breakFound(found: StationarityBreak, index: number): void {
    if (this.alarmIsWarmupTail(index)) return;
    if (!this.lostBefore && this.monitor && this.monitor.blockTotal < PREMATURE_BLOCKS) {
      // The first steady state did not hold up through the monitor's reference period: it was
      // declared on a record too short to show a slow movement. Warming again, from the change.
      if (this.growing && found.changePoint > this.series.firstIndex) {
        this.excluded += found.changePoint - this.series.firstIndex;
        this.series.dropBefore(found.changePoint);
        this.diagnosisAfterCut(index);
      }
      this.withdrawSteady(index, Number.NaN, `the level moved (${found.cause} from sample ${found.changePoint}) before the first steady state had held long enough to be a reference`);
      this.warmupPending = { condition: 'warm-up', message: `not steady: the level moved (${found.cause}) soon after steady state was first declared`, samplesToGo: null };
      return;
    }
    // A break within LONG_STEADY effective samples of the last regain continues the streak.
    if (this.lossStreak > 0 && this.regainedAt >= 0 && (index - this.regainedAt) / this.tauNow() > LONG_STEADY) this.lossStreak = 0;
    this.lossStreak++;
    this.lastBreak = found;
    this.lastBreakAt = index;
    this.breakNoise = this.monitor?.settings.longRunVariance ?? this.breakNoise;
    this.lostBefore = true;
    this.raise({ kind: 'stationarity-lost', at: index, cause: found.cause, changePoint: found.changePoint, detail: found.detail, ...(found.slope ? { slope: found.slope } : {}) });
    delete found.margin;
    this.phase = 'unsteady';
    this.precise = false;
    this.brokenMonitor = this.monitor;
    this.breakChangePoint = found.changePoint;
    this.nextReclassify = index + Math.max(index - found.changePoint, 16 * (this.brokenMonitor?.settings.blockSize ?? 16));
    this.monitor = null;
    this.warmupEnd = null;
    this.warmupPending = { condition: 'break', message: `stationarity lost (${found.cause}) at sample ${found.changePoint}`, samplesToGo: null };
    if (this.growing && found.changePoint > this.series.firstIndex) {
      // The level before the break is not the level now: the window restarts at the change point.
      this.excluded += found.changePoint - this.series.firstIndex;
      this.series.dropBefore(found.changePoint);
      this.diagnosisAfterCut(index);
    }
    // The transient fit starts again with the new level.
    this.history.rebuild(this.series.values(), this.series.firstIndex);
    this.nextWarmupCheck = index + FIRST_CHECK;
  }

  /**
   * A break is classified again when what followed the alarm is once, then three times, as long as
   * the time the alarm took (and at least 16, then 96, monitor blocks), and a last time when
   * stationarity is regained: stationarity-monitor.ts
   * reclassify. A changed cause or change point is raised as `break-revised` and the verdict
   * follows it.
   */
  private reclassifyBreak(index: number): void {
    const last = this.lastBreak;
    const monitor = this.brokenMonitor;
    if (!last || !monitor) {
      this.nextReclassify = -1;
      return;
    }
    // After once, then three times what the alarm took (at least 16 and 96 monitor blocks after it);
    // later the monitor's history (1024 blocks) would begin to lose the level before the break.
    const second = this.lastBreakAt + Math.max(3 * (this.lastBreakAt - this.breakChangePoint), 96 * monitor.settings.blockSize);
    this.nextReclassify = index < second ? second : -1;
    // Only while the monitor's history still holds a stretch of the level before the break.
    if (monitor.referenceStart > this.breakChangePoint - 16 * monitor.settings.blockSize) {
      this.nextReclassify = -1;
      return;
    }
    const revised = monitor.reclassify(index, last.detail, last.cause);
    if (revised.cause === last.cause && Math.abs(revised.changePoint - last.changePoint) <= monitor.settings.blockSize) {
      this.lastBreak = { ...last, ...(revised.slope ? { slope: revised.slope } : {}) };
      return;
    }
    this.lastBreak = { ...revised, detail: last.detail };
    // A trend that began where the monitor's reference began was the warm-up still running when
    // steady state was first declared: no break of an established steady state, so regaining it
    // needs no more evidence than a first verdict.
    const warmup = revised.cause === 'trend' && this.lossStreak === 1 && revised.changePoint <= monitor.referenceStart + monitor.settings.blockSize;
    if (warmup) {
      this.lostBefore = false;
      this.lossStreak = 0;
      this.warmupPending = { condition: 'warm-up', message: `the level has been moving since steady state was first declared: the warm-up is still running`, samplesToGo: null };
    }
    this.raise({ kind: 'break-revised', at: index, cause: revised.cause, changePoint: revised.changePoint, ...(revised.slope ? { slope: revised.slope } : {}), ...(warmup ? { warmup: true } : {}) });
  }

  private checkPrecision(index: number): void {
    const n = this.series.length;
    // Every 1/16 of the window (or a monitor block): an estimate costs O(maxLag^2) plus the pending
    // chunk of lagged products, so checking more often would dominate the per-sample cost.
    this.nextPrecisionCheck = index + Math.max(this.monitor?.settings.blockSize ?? 16, Math.floor(n / 16));
    if (n < 2 || !(this.series.variance > 0)) return;
    const detector = this.detectorEstimate();
    if (this.monitor?.refining) {
      const noise = this.monitorNoise(this.monitor.settings.blockSize);
      this.monitor.refresh(noise.longRunVariance, noise.dof);
    }
    const reported = this.options.estimator === 'auto' ? detector : this.estimatorSet.estimate(this.series, this.options.estimator, this.diagnosis);
    this.estimatorSet.maintainLags(this.series, reported);
    this.checkConformity(index, reported, n);
    const target = this.options.target;
    if (!target) return;
    const u = meanUncertainty(withAnticorrelationFloor(reported, n), this.options.confidence);
    const status = targetStatus(target, { mean: this.series.mean, n, standardUncertainty: u.standardUncertainty, dof: u.dof, confidence: this.options.confidence, rate: null, capacity: Number.POSITIVE_INFINITY });
    // Under long memory U is a scale, not a calibrated interval: the target is never declared met.
    const longMemory = this.diagnosis?.longMemory?.detected === true;
    if (!this.precise && status.reached && status.bound !== null && !longMemory) {
      this.precise = true;
      this.raise({ kind: 'precision-reached', at: index, standardUncertainty: u.standardUncertainty, expandedUncertainty: u.expandedUncertainty, bound: status.bound });
    } else if (this.precise && status.bound !== null) {
      const achieved = target.on === 'u' ? u.standardUncertainty : (u.expandedUncertainty ?? Number.POSITIVE_INFINITY);
      if (achieved > PRECISION_REARM * status.bound || longMemory) this.precise = false;
    }
  }

  /**
   * Conformity on the precision checks' schedule while steady: the outcome of the decision rule
   * with the combined uncertainty (channel-combined.ts); a `conformity-changed` event when it
   * differs from the one last announced (edge-triggered; forgotten when stationarity is lost or the
   * window restarts). Costs one combined evaluation and, with the resolution proposal, O(n) for the
   * lattice check, every 1/16 of the window.
   */
  private checkConformity(index: number, reported: TauEstimate, n: number): void {
    const settings = this.options.uncertainty;
    if (!settings?.conformity) return;
    const u = meanUncertainty(withAnticorrelationFloor(reported, n), this.options.confidence);
    if (!(u.dof > 0) || !Number.isFinite(u.standardUncertainty)) return;
    const lattice = settings.proposeResolution ? this.windowLattice() : null;
    const { conformity } = channelCombined({ name: this.name, mean: this.series.mean, n, standardUncertainty: u.standardUncertainty, dof: u.dof, confidence: this.options.confidence, rate: null, capacity: Number.POSITIVE_INFINITY, lattice, settings: { ...settings, combinedTarget: null, dominanceFraction: null }, typeATarget: null });
    if (conformity === null || conformity.verdict === null || conformity.verdict === this.lastConformity) return;
    const previous = this.lastConformity;
    this.lastConformity = conformity.verdict;
    this.raise({ kind: 'conformity-changed', at: index, verdict: conformity.verdict, previous, rule: conformity.rule, probability: conformity.probability, value: conformity.value, expandedUncertainty: conformity.expandedUncertainty });
  }

  private checkAveragingLimit(index: number): void {
    const n = this.series.length;
    this.nextAllanCheck = index + Math.max(256, n);
    if (this.averagingLimitSeen || this.phase === 'warming' || n < 4096) return;
    const report = allanReport(this.series.values(), this.rate());
    if (!report.averagingLimit) return;
    this.averagingLimitSeen = true;
    this.raise({ kind: 'averaging-limit', at: index, m: report.averagingLimit.m, tauSeconds: report.averagingLimit.tauSeconds, adev: report.averagingLimit.adev });
  }

  /** What the verdict needs from the pipeline's own state (the rest comes from the estimate). */
  private verdictInput(estimate: TauEstimate | null, target: TargetStatus | null, n: number) {
    return {
      state: this.state,
      n,
      received: this.received,
      nEff: estimate ? n / estimate.tauInt : null,
      warmupPending: this.warmupPending,
      lastBreak: this.phase === 'unsteady' ? this.lastBreak : null,
      longMemory: this.diagnosis?.longMemory?.detected ? this.diagnosis.longMemory : null,
      target,
      rate: this.rate(),
      constant: n >= 2 && !(this.series.variance > 0),
      unit: this.unitText,
    };
  }

  /**
   * The channel's unit as people write it (°C), for the numbers in the verdict's words; display
   * only: no statistic, event or checkpoint depends on it.
   */
  setUnitLabel(label: string): void {
    if (label === this.unitText) return;
    this.unitText = label;
    this.snapshotCache = null;
  }

  /** Snapshot of an empty, one-sample or constant window: the mean where there is one, and why no uncertainty. */
  private degenerateSnapshot(base: SnapshotBase, notes: string[]): StatisticalSnapshot {
    const n = base.n;
    const none = {
      sd: null,
      acf: [],
      tauInt: null,
      nEff: null,
      standardUncertainty: null,
      dof: null,
      coverageFactor: null,
      expandedUncertainty: null,
      target: null,
      estimatorReason: 'no variation to estimate from',
      estimators: {},
      disagreement: [],
      stationarity: null,
      spectrum: null,
      resolution: n > 0 ? detectLattice(this.series.values()) : null,
      allan: [],
      averagingLimit: null,
      verdict: channelVerdict(this.verdictInput(null, null, n)),
    };
    if (n === 0) return { ...base, ...none, mean: null, notes: ['no samples in the window'] };
    const mean = this.series.mean;
    if (n === 1) return { ...base, ...none, mean, notes: ['one sample: no spread, so no uncertainty can be stated'] };
    notes.push('constant window: every sample is equal, so its spread gives no uncertainty (check the sensor or the resolution)');
    return { ...base, ...none, mean, sd: 0, standardUncertainty: 0, dof: n - 1, notes };
  }

  /** The reported estimate: the configured estimator (or `auto`), independent observations below FEW_SAMPLES. */
  private reportedEstimate(): { estimate: TauEstimate; reason: string } {
    const n = this.series.length;
    if (n < FEW_SAMPLES) return { estimate: this.estimatorSet.estimate(this.series, 'iid', null), reason: `only ${n} samples: treated as independent observations (GUM 4.2.3)` };
    if (this.options.estimator === 'auto') {
      const auto = this.estimatorSet.auto(this.series, this.diagnosis);
      return { estimate: auto.estimate, reason: auto.reason };
    }
    return { estimate: this.estimatorSet.estimate(this.series, this.options.estimator, this.diagnosis), reason: `configured estimator ${this.options.estimator}` };
  }

  /**
   * The light view for live displays and status messages: no stationarity tests, no Allan
   * deviation, only the reported estimator. Cost: one estimator run (tens of microseconds).
   */
  summary(): ChannelSummary {
    const summary = this.summaryWithCombined(this.statisticalSummary());
    const criteria = this.criteria;
    if (criteria === null) return { ...summary, criteria: [], readyUnderPolicy: null };
    const states = criteria.states();
    const readiness = criteria.readiness({ ready: summary.verdict.ready, reasons: summary.verdict.pending.map((p) => p.message) }, null, states);
    return { ...summary, criteria: criteria.briefs(states), readyUnderPolicy: readiness.ready };
  }

  /**
   * The summary with the combined uncertainty and conformity when the channel has Type B
   * components, limits or a stopping rule (the verdict then includes the stopping rule, so a test
   * point's readiness honours it). O(n) for the lattice check of the resolution component.
   */
  private summaryWithCombined(summary: SummaryBase): SummaryBase {
    const settings = this.options.uncertainty ?? DEFAULT_UNCERTAINTY_SETTINGS;
    const configured = settings.typeB.length > 0 || settings.conformity !== null || settings.combinedTarget !== null || settings.dominanceFraction !== null;
    if (!configured || summary.mean === null || summary.standardUncertainty === null || summary.n < 2) return configured ? { ...summary, combined: null, conformity: null } : summary;
    const lattice = settings.proposeResolution ? this.windowLattice() : null;
    const growing = this.growing;
    const capacity = growing ? Math.max(this.series.maxSamples, summary.n) : this.series.maxSamples;
    const dof = summary.dof !== null && summary.dof > 0 ? summary.dof : summary.n - 1;
    const { combined, conformity } = channelCombined({ name: this.name, mean: summary.mean, n: summary.n, standardUncertainty: summary.standardUncertainty, dof, confidence: summary.confidence, rate: this.rate(), capacity, lattice, settings, typeATarget: this.options.target });
    const steady = summary.state === 'steady' || summary.state === 'precise';
    return {
      ...summary,
      verdict: verdictWithStopping(summary.verdict, combined.stopping, steady),
      combined: { value: combined.value, standardUncertainty: combined.standardUncertainty, dof: combined.dof, coverageFactor: combined.coverageFactor, expandedUncertainty: combined.expandedUncertainty, stopping: combined.stopping },
      conformity: conformity === null ? null : { rule: conformity.rule, verdict: conformity.verdict, probability: conformity.probability },
    };
  }

  /** The window's lattice, cached until the window changes (a summary per commit stays O(1) between samples). */
  private windowLattice(): Lattice | null {
    const key = `${this.series.firstIndex}:${this.series.nextIndex}`;
    const ring = this.series.ring;
    if (this.latticeCache?.key !== key) this.latticeCache = { key, lattice: detectLatticeAt(this.series.length, (i) => ring.at(i)) };
    return this.latticeCache.lattice;
  }

  private statisticalSummary(): SummaryBase {
    const { series, options } = this;
    const n = series.length;
    const base = { name: this.name, state: this.state, n, received: this.received, last: this.received > 0 ? { value: this.lastValue, time: finiteOrNull(this.lastTime) } : null, confidence: options.confidence, excluded: this.excluded };
    if (n < 2 || !(series.variance > 0)) {
      return { ...base, mean: n > 0 ? series.mean : null, standardUncertainty: n > 1 ? 0 : null, expandedUncertainty: null, coverageFactor: null, dof: null, tauInt: null, nEff: null, target: null, estimator: null, verdict: channelVerdict(this.verdictInput(null, null, n)) };
    }
    const estimate = withAnticorrelationFloor(this.reportedEstimate().estimate, n);
    const u = meanUncertainty(estimate, options.confidence);
    const mean = series.mean;
    const target = options.target ? targetStatus(options.target, { mean, n, standardUncertainty: u.standardUncertainty, dof: u.dof, confidence: options.confidence, rate: this.rate(), capacity: this.growing ? Math.max(series.maxSamples, n) : series.maxSamples }) : null;
    return { ...base, mean, standardUncertainty: u.standardUncertainty, expandedUncertainty: u.expandedUncertainty, coverageFactor: u.coverageFactor, dof: u.dof, tauInt: estimate.tauInt, nEff: n / estimate.tauInt, target, estimator: estimate.method, verdict: channelVerdict(this.verdictInput(estimate, target, n)) };
  }

  /**
   * The channel now. Cached until the next sample or event, so polling costs nothing; the
   * stationarity tests and the Allan deviation are computed here, on demand.
   */
  snapshot(): ChannelSnapshot {
    const key = `${this.series.firstIndex}:${this.series.nextIndex}:${this.eventCount}:${this.stale}`;
    if (this.snapshotCache?.key === key) return this.snapshotCache.snapshot;
    const snapshot = this.withCriteria(this.withCombined(this.computeSnapshot()));
    this.snapshotCache = { key, snapshot };
    return snapshot;
  }

  /** The rules' live state, and readiness under the policy over the snapshot's window. */
  private withCriteria(statistical: CombinedSnapshot): ChannelSnapshot {
    const criteria = this.criteria;
    if (criteria === null) return { ...statistical, criteria: [], readiness: null };
    const states = criteria.states();
    const { startTime, endTime } = statistical.window;
    const window = startTime !== null && endTime !== null ? { startTime, endTime } : null;
    const readiness = criteria.readiness({ ready: statistical.verdict.ready, reasons: statistical.verdict.pending.map((p) => p.message) }, window, states);
    return { ...statistical, criteria: states, readiness };
  }

  /** The combined uncertainty, the stopping rule and conformity (channel-combined.ts), from the Type A snapshot. */
  private withCombined(snapshot: StatisticalSnapshot): CombinedSnapshot {
    const settings = this.options.uncertainty ?? DEFAULT_UNCERTAINTY_SETTINGS;
    if (snapshot.mean === null || snapshot.standardUncertainty === null || snapshot.dof === null || !(snapshot.dof > 0) || snapshot.n < 2) return { ...snapshot, combined: null, conformity: null };
    const capacity = snapshot.window.kind === 'growing' ? Math.max(snapshot.window.capacity, snapshot.n) : snapshot.window.capacity;
    const { combined, conformity } = channelCombined({ name: this.name, mean: snapshot.mean, n: snapshot.n, standardUncertainty: snapshot.standardUncertainty, dof: snapshot.dof, confidence: snapshot.confidence, rate: snapshot.rate, capacity, lattice: snapshot.resolution, settings, typeATarget: this.options.target });
    const steady = snapshot.state === 'steady' || snapshot.state === 'precise';
    return { ...snapshot, combined, conformity, verdict: verdictWithStopping(snapshot.verdict, combined.stopping, steady) };
  }

  private computeSnapshot(): StatisticalSnapshot {
    const { options, series } = this;
    const n = series.length;
    const notes: string[] = [];
    const capacity = series.maxSamples;
    const ring = series.ring;
    const base: SnapshotBase = {
      name: this.name,
      n,
      confidence: options.confidence,
      estimator: options.estimator === 'auto' ? 'ar' : options.estimator,
      window: {
        kind: options.window.kind,
        startIndex: series.firstIndex,
        endIndex: series.nextIndex - 1,
        startTime: n > 0 ? finiteOrNull(ring.timeAt(0)) : null,
        endTime: n > 0 ? finiteOrNull(ring.timeAt(n - 1)) : null,
        capacity,
      },
      rate: this.rate(),
      received: this.received,
      last: this.received > 0 ? { value: this.lastValue, time: finiteOrNull(this.lastTime) } : null,
      state: this.state,
      excluded: this.excluded,
      events: this.recentEvents.slice(),
      eventCount: this.eventCount,
    };
    if (this.excluded > 0) notes.push(`${this.excluded} samples before steady state (or before a break) are excluded from the mean`);
    if (n < 2 || !(series.variance > 0)) return this.degenerateSnapshot(base, notes);
    const mean = series.mean;
    const sd = Math.sqrt(series.variance);
    const result = this.estimatorSet.run(series, Math.max(MIN_REPORTED_LAGS, options.maxLag), this.diagnosis);
    const gamma0 = result.gamma[0] as number;
    const lagCount = Math.min(n - 1, Math.max(MIN_REPORTED_LAGS, Math.min(options.maxLag, result.gamma.length - 1)));
    const acf: number[] = [];
    for (let k = 1; k <= lagCount; k++) acf.push((result.gamma[k] as number) / gamma0);

    let chosen: TauEstimate;
    let reason: string;
    if (n < FEW_SAMPLES) {
      chosen = result.estimates.iid;
      reason = `only ${n} samples: treated as independent observations (GUM 4.2.3)`;
    } else if (options.estimator === 'auto') {
      chosen = result.auto.estimate;
      reason = result.auto.reason;
    } else {
      chosen = result.estimates[options.estimator];
      reason = `configured estimator ${options.estimator}`;
    }
    const floored = withAnticorrelationFloor(chosen, n);
    if (floored !== chosen) notes.push(`anticorrelated samples (tau_int ${chosen.tauInt.toPrecision(3)} < 1): degrees of freedom taken as n - 1 = ${n - 1}, as for independent samples`);
    chosen = floored;
    if (!chosen.reliable && chosen.note) notes.push(`${chosen.method}: ${chosen.note}`);
    for (const line of result.disagreements) notes.push(line);
    const uncertainty = meanUncertainty(chosen, options.confidence);
    const estimators: Partial<Record<MethodEstimatorName, EstimatorReport>> = {};
    for (const [name, estimate] of Object.entries(result.estimates) as [MethodEstimatorName, TauEstimate][]) {
      estimators[name] = {
        tauInt: estimate.tauInt,
        nEff: n / estimate.tauInt,
        standardUncertainty: Math.sqrt(estimate.varianceOfMean),
        dof: estimate.dof,
        window: estimate.window,
        reliable: estimate.reliable,
        ...(estimate.note ? { note: estimate.note } : {}),
      };
    }
    const values = series.values();
    const allan = allanReport(values, base.rate);
    let target = options.target
      ? targetStatus(options.target, {
          mean,
          n,
          standardUncertainty: uncertainty.standardUncertainty,
          dof: uncertainty.dof,
          confidence: options.confidence,
          rate: base.rate,
          capacity: this.growing ? Math.max(capacity, n) : capacity,
        })
      : null;
    // No time to target, and no progress, while the channel is not steady: the mean still moves,
    // so a count of samples to go would be a promise the data cannot keep.
    if (target !== null && !target.reached && this.phase !== 'steady') {
      target = { ...target, samplesToTarget: null, secondsToTarget: null, progress: 0, note: target.note ?? `no time to target while the channel is ${this.phase}` };
    }
    if (target?.note) notes.push(`target: ${target.note}`);
    const resolution = detectLattice(values);
    if (resolution?.coarse) notes.push(`readings lie on a lattice of step ${resolution.step.toPrecision(3)} (${resolution.distinct} distinct values): the indication's resolution adds a rectangular component of half-width ${(resolution.step / 2).toPrecision(3)} (u = ${(resolution.step / Math.sqrt(12)).toPrecision(3)}) that this Type A uncertainty does not contain`);
    const spectrum = this.spectralReport(base.rate);
    for (const line of spectrum?.lines ?? []) notes.push(`periodic component: period ${line.period.toPrecision(3)} samples, amplitude ${line.amplitude.toPrecision(3)}`);
    return {
      ...base,
      estimator: chosen.method,
      estimatorReason: reason,
      mean,
      sd,
      acf,
      tauInt: chosen.tauInt,
      nEff: n / chosen.tauInt,
      standardUncertainty: uncertainty.standardUncertainty,
      dof: uncertainty.dof,
      coverageFactor: uncertainty.coverageFactor,
      expandedUncertainty: uncertainty.expandedUncertainty,
      target,
      estimators,
      disagreement: result.disagreements,
      verdict: channelVerdict(this.verdictInput(chosen, target, n)),
      stationarity: stationarityReport({
        values,
        tauInt: result.auto.estimate.tauInt,
        phase: this.phase,
        warmupEnd: this.warmupEnd,
        excluded: this.excluded,
        indicator: this.indicator.ratio(),
        monitor: this.monitor,
        lastBreak: this.lastBreak,
        warmupMethod: this.warmupMethod,
        transient: this.transient,
      }),
      spectrum,
      resolution,
      allan: allan.points,
      averagingLimit: allan.averagingLimit,
      notes,
    };
  }

  private spectralReport(rate: number | null): SpectralReport | null {
    const d = this.diagnosis;
    if (!d) return null;
    return {
      segment: d.segment,
      lines: d.lines.map((line) => ({ period: line.period, periodSeconds: rate ? line.period / rate : null, amplitude: line.amplitude, pValue: line.pValue })),
      longMemory: d.longMemory ? { hurst: d.longMemory.hurst, standardError: d.longMemory.standardError, detected: d.longMemory.detected } : null,
    };
  }
}

/**
 * Correlation length of a fitted autoregression: the lag after which the model's autocorrelation
 * stays within 0.05 for 16 lags in a row (capped at 4096). O(length p).
 */
function correlationLength(gamma: ArrayLike<number>, fit: ArFit): number {
  const p = fit.order;
  const gamma0 = gamma[0] as number;
  if (p === 0 || !(gamma0 > 0)) return 1;
  const limit = 4096;
  const model = new Float64Array(limit);
  let quiet = 0;
  for (let k = 0; k < limit; k++) {
    if (k <= p && k < gamma.length) model[k] = gamma[k] as number;
    else {
      let value = 0;
      for (let j = 1; j <= p; j++) value += (fit.coefficients[j - 1] as number) * (model[k - j] as number);
      model[k] = value;
    }
    if (Math.abs((model[k] as number) / gamma0) < 0.05) {
      if (++quiet >= 16) return Math.max(1, k - 15);
    } else quiet = 0;
  }
  return limit;
}

/**
 * Anticorrelated samples (tau_int < 1: alternating readings, a dithering controller) make a
 * lag-window's degrees of freedom n / (2M + 1) meaningless (NIST StRD NumAcc4 gave nu = 0.5 and
 * k = 163). Their mean is at least as well determined as that of independent samples, so nu is
 * never taken below the independent-sample n - 1 (GUM 4.2.3). O(1).
 */
export function withAnticorrelationFloor(estimate: TauEstimate, n: number): TauEstimate {
  if (!(estimate.tauInt < 1) || estimate.dof >= n - 1) return estimate;
  return { ...estimate, dof: Math.max(1, n - 1) };
}

export { MIN_EFFECTIVE };
