import { WindowedSeries } from '../core/window/windowed-series.js';
import { EstimatorSet } from '../core/tau/estimator-set.js';
import { AutocovarianceFft } from '../core/acf/autocovariance-fft.js';
import type { EstimatorName, TauEstimate } from '../core/tau/tau-estimate.js';
import { meanUncertainty } from '../core/uncertainty/mean-uncertainty.js';
import { targetStatus, type TargetStatus } from '../core/uncertainty/target-precision.js';
import { type ChannelOptions, FEW_SAMPLES, MIN_REPORTED_LAGS } from './channel-options.js';
import { CaoRhinehartFilter, type CaoRhinehartState } from '../core/stationarity/cao-rhinehart.js';
import { StationarityMonitor, type MonitorState, type StationarityBreak } from './stationarity-monitor.js';
import { detectWarmup } from './warmup-detector.js';
import type { ChannelEvent, ChannelState } from './channel-events.js';
import { stationarityReport, allanReport, type StationarityReport, type AllanReport } from './stationarity-report.js';
import type { WindowedSeriesState } from '../core/window/windowed-series.js';
import { expectRecord, type StateRecord } from '../core/state/record.js';

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
  /** The estimator behind tauInt and the uncertainty. */
  estimator: EstimatorName;
  estimators: Partial<Record<EstimatorName, EstimatorReport>>;
  /** Present when the estimators differ by more than their sampling error. */
  disagreement: string[];
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
  /** Overlapping Allan deviation at octave averaging factors. */
  allan: AllanReport['points'];
  averagingLimit: AllanReport['averagingLimit'];
  /** The channel's most recent events (up to 256), oldest first. */
  events: ChannelEvent[];
  eventCount: number;
  notes: string[];
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
}

const SHARED_FFT = new AutocovarianceFft();
const NO_EVENTS: readonly ChannelEvent[] = Object.freeze([]);

type SnapshotBase = Pick<ChannelSnapshot, 'name' | 'n' | 'confidence' | 'estimator' | 'window' | 'rate' | 'received' | 'last' | 'state' | 'excluded' | 'events' | 'eventCount'>;

function finiteOrNull(value: number): number | null {
  return Number.isFinite(value) ? value : null;
}

/** Samples the window must hold before the first warm-up check. */
const FIRST_CHECK = 64;
/** Most recent events kept for snapshots (all events go to the caller as they happen). */
const RECENT_EVENTS = 256;
/** Blocks of this many tau_int feed the stationarity monitor. */
const MONITOR_BLOCK_TAUS = 8;
/** Effective samples since a break before stationarity may be regained (hysteresis). */
const REGAIN_EFFECTIVE = 200;
/** Effective samples of uninterrupted steadiness after a regain that end a streak of losses. */
const LONG_STEADY = 5000;
/** precision-reached re-arms when U climbs this far above the bound (hysteresis). */
const PRECISION_REARM = 1.1;

type Phase = 'warming' | 'steady' | 'unsteady';

/** The pipeline's checkpoint: a named record (version 1 was a positional layout, migrated by src/engine/channel-state.ts). */
export interface ChannelPipelineState extends StateRecord<'channel-pipeline', 2> {
  series: WindowedSeriesState;
  received: number;
  lastValue: number;
  lastTime: number;
  warmupEnd: number | null;
  excluded: number;
  windowOrigin: number;
  nextWarmupCheck: number;
  nextPrecisionCheck: number;
  nextAllanCheck: number;
  indicatorBlock: number;
  indicatorSum: number;
  indicatorCount: number;
  eventCount: number;
  lastBreakAt: number;
  breakNoise: number;
  lossStreak: number;
  regainedAt: number;
  phase: Phase;
  precise: boolean;
  stale: boolean;
  lostBefore: boolean;
  averagingLimitSeen: boolean;
  monitor: MonitorState | null;
  indicator: CaoRhinehartState;
  lastBreak: StationarityBreak | null;
  recentEvents: ChannelEvent[];
}

/**
 * A channel's pipeline: the window, its estimators, the detectors that decide when averaging is
 * valid, the channel's state and its events. Deterministic given the samples: the daemon and
 * `plateau analyze` both feed samples here, one at a time, in arrival order, and get the same
 * events at the same sample indices.
 *
 * Phases: warming (no steady state yet: the warm-up detector runs on a geometric schedule),
 * steady (the stationarity monitor watches every sample; the precision check runs on a schedule),
 * unsteady (after a break: a growing window restarts at the change point and the warm-up detector
 * looks for steady state again). The displayed state adds precise (steady and at the target) and
 * stale (no data by the daemon's clock).
 */
export class ChannelPipeline {
  readonly name: string;
  readonly options: ChannelOptions;
  readonly series: WindowedSeries;
  private readonly estimatorSet: EstimatorSet;
  private received = 0;
  private lastValue = Number.NaN;
  private lastTime = Number.NaN;
  private phase: Phase = 'warming';
  private precise = false;
  private stale = false;
  private lostBefore = false;
  private averagingLimitSeen = false;
  private monitor: StationarityMonitor | null = null;
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
  private indicator = new CaoRhinehartFilter();
  private indicatorBlock = 16;
  private indicatorSum = 0;
  private indicatorCount = 0;
  private recentEvents: ChannelEvent[] = [];
  private eventCount = 0;
  private snapshotCache: { key: string; snapshot: ChannelSnapshot } | null = null;

  /**
   * @param fft transform workspace shared by the channels of one process (a snapshot's FFT fallback
   *   then allocates its tables once, not once per channel); the engine is single-threaded.
   */
  constructor(name: string, options: ChannelOptions, fft: AutocovarianceFft = SHARED_FFT) {
    this.name = name;
    this.options = options;
    this.estimatorSet = new EstimatorSet(fft);
    const { window } = options;
    const capacity = window.kind === 'sliding' && window.samples ? Math.min(window.samples, window.maxSamples) : window.maxSamples;
    this.series = new WindowedSeries({
      maxSamples: Math.max(4, capacity),
      maxLag: options.maxLag,
      preallocate: window.kind === 'sliding' && window.samples !== undefined,
    });
  }

  /**
   * Feeds one sample (time in seconds; NaN when unknown). Values must be finite: the decoders and
   * the CSV reader reject the rest. Returns the events this sample raised (usually none).
   */
  push(value: number, timeSeconds: number): readonly ChannelEvent[] {
    const index = this.series.nextIndex;
    this.series.push(value, timeSeconds);
    this.received++;
    this.lastValue = value;
    this.lastTime = timeSeconds;
    const { window } = this.options;
    if (window.seconds !== undefined && window.kind === 'sliding') {
      const ring = this.series.ring;
      const oldest = timeSeconds - window.seconds;
      while (ring.length > 1 && ring.timeAt(0) < oldest) this.series.shift();
    }
    let events: ChannelEvent[] | null = null;
    const raise = (event: ChannelEvent) => {
      (events ??= []).push(event);
      this.remember(event);
    };
    if (this.stale) {
      this.stale = false;
      raise({ kind: 'fresh', at: index });
    }
    if (this.options.detectors === false) {
      if (this.phase !== 'steady' && this.series.length >= 2) {
        this.phase = 'steady';
        this.warmupEnd = this.series.firstIndex;
      }
      if (this.phase === 'steady' && index >= this.nextPrecisionCheck) this.checkPrecision(index, raise);
      return events ?? NO_EVENTS;
    }
    this.feedIndicator(value);
    if (this.phase === 'steady' && this.monitor) {
      const found = this.monitor.push(value, index);
      if (found) this.breakFound(found, index, raise);
    }
    if (this.phase !== 'steady' && index >= this.nextWarmupCheck) this.checkWarmup(index, raise);
    if (this.phase === 'steady' && index >= this.nextPrecisionCheck) this.checkPrecision(index, raise);
    if (index >= this.nextAllanCheck) this.checkAveragingLimit(index, raise);
    return events ?? NO_EVENTS;
  }

  /**
   * The daemon's clock: a channel that has had no sample for staleSeconds of wall-clock time (the
   * daemon measures the silence from arrival times, not from the samples' own time stamps, which may
   * come from a replayed log) turns stale: one event, at the index of its last sample. `plateau
   * analyze` has no clock and never calls this.
   */
  checkStale(silentSeconds: number): ChannelEvent | null {
    if (this.stale || this.received === 0) return null;
    const silent = silentSeconds;
    if (silent < this.options.staleSeconds) return null;
    this.stale = true;
    const event: ChannelEvent = { kind: 'stale', at: this.received - 1, silentSeconds: silent };
    this.remember(event);
    return event;
  }

  /** Starts a new growing window at the next sample (a test point starts): warming again. */
  restartWindow(): void {
    this.series.clear();
    this.windowOrigin = this.series.nextIndex;
    this.resetDetectors();
    this.lostBefore = false;
    this.lastBreak = null;
    this.breakNoise = 0;
    this.lossStreak = 0;
    this.regainedAt = -1;
    this.excluded = 0;
    this.averagingLimitSeen = false;
    this.nextAllanCheck = this.windowOrigin + 256;
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

  /** The stationarity monitor's recent CUSUM sums (empty while warming or unsteady). */
  cusumTrace(): { blockSize: number; decisionInterval: number; upper: number[]; lower: number[] } | null {
    return this.monitor ? this.monitor.cusumTrace() : null;
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
      version: 2,
      series: this.series.saveState(),
      received: this.received,
      lastValue: this.lastValue,
      lastTime: this.lastTime,
      warmupEnd: this.warmupEnd,
      excluded: this.excluded,
      windowOrigin: this.windowOrigin,
      nextWarmupCheck: this.nextWarmupCheck,
      nextPrecisionCheck: this.nextPrecisionCheck,
      nextAllanCheck: this.nextAllanCheck,
      indicatorBlock: this.indicatorBlock,
      indicatorSum: this.indicatorSum,
      indicatorCount: this.indicatorCount,
      eventCount: this.eventCount,
      lastBreakAt: this.lastBreakAt,
      breakNoise: this.breakNoise,
      lossStreak: this.lossStreak,
      regainedAt: this.regainedAt,
      phase: this.phase,
      precise: this.precise,
      stale: this.stale,
      lostBefore: this.lostBefore,
      averagingLimitSeen: this.averagingLimitSeen,
      monitor: this.monitor ? this.monitor.saveState() : null,
      indicator: this.indicator.state(),
      lastBreak: this.lastBreak ? { ...this.lastBreak } : null,
      recentEvents: this.recentEvents.map((event) => ({ ...event })),
    };
  }

  /** @throws RangeError for a record of another name or version (the caller migrates or replays). */
  loadState(state: ChannelPipelineState): void {
    expectRecord(state, 'channel-pipeline', 2);
    this.series.loadState(state.series);
    ({
      received: this.received,
      lastValue: this.lastValue,
      lastTime: this.lastTime,
      warmupEnd: this.warmupEnd,
      excluded: this.excluded,
      windowOrigin: this.windowOrigin,
      nextWarmupCheck: this.nextWarmupCheck,
      nextPrecisionCheck: this.nextPrecisionCheck,
      nextAllanCheck: this.nextAllanCheck,
      indicatorBlock: this.indicatorBlock,
      indicatorSum: this.indicatorSum,
      indicatorCount: this.indicatorCount,
      eventCount: this.eventCount,
      lastBreakAt: this.lastBreakAt,
      breakNoise: this.breakNoise,
      lossStreak: this.lossStreak,
      regainedAt: this.regainedAt,
      phase: this.phase,
      precise: this.precise,
      stale: this.stale,
      lostBefore: this.lostBefore,
      averagingLimitSeen: this.averagingLimitSeen,
    } = state);
    this.monitor = state.monitor ? StationarityMonitor.fromState(state.monitor) : null;
    this.indicator = CaoRhinehartFilter.fromState(state.indicator);
    this.lastBreak = state.lastBreak;
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

  private tauNow(): number {
    if (this.series.length < 8 || !(this.series.variance > 0)) return 1;
    return Math.max(1, this.estimatorSet.estimate(this.series, this.options.estimator).tauInt);
  }

  private checkWarmup(index: number, raise: (event: ChannelEvent) => void): void {
    const n = this.series.length;
    this.nextWarmupCheck = index + Math.max(FIRST_CHECK, Math.floor(n / 8));
    // After a break a sliding window waits until the change point has slid out.
    if (this.lastBreak && this.series.firstIndex <= this.lastBreak.changePoint && this.options.window.kind === 'sliding') return;
    if (n < FIRST_CHECK || !(this.series.variance > 0)) return;
    const tau = this.tauNow();
    this.indicatorBlock = Math.max(8, Math.ceil(4 * tau));
    const values = this.series.values();
    const verdict = detectWarmup(values, tau);
    if (!verdict.steady) return;
    if (this.lostBefore && !this.regainConfirmed(values.subarray(verdict.truncation), tau)) return;
    const end = this.series.firstIndex + verdict.truncation;
    if (this.options.window.kind === 'growing' && verdict.truncation > 0) {
      this.excluded += verdict.truncation;
      this.series.dropBefore(end);
    }
    this.warmupEnd = end;
    this.phase = 'steady';
    this.startMonitor(index);
    const excluded = this.excluded;
    if (this.lostBefore) this.regainedAt = index;
    raise(this.lostBefore ? { kind: 'stationarity-regained', at: index, warmupEnd: end, excluded } : { kind: 'steady', at: index, warmupEnd: end, excluded });
    this.nextPrecisionCheck = index;
  }

  /**
   * Hysteresis after a break: stationarity is regained only on twice the evidence that declared it
   * first (REGAIN_EFFECTIVE effective samples since the cut) and with no trend left in the block
   * means (|z| < 2 against the pre-break long-run variance), so an ongoing drift cannot flap between lost
   * and regained.
   */
  private regainConfirmed(kept: Float64Array, tau: number): boolean {
    // Each loss in a streak doubles the evidence the next regain needs (a slow drift looks steady
    // over short stretches), so lost/regained cannot alternate quickly.
    if (kept.length / tau < REGAIN_EFFECTIVE * 2 ** Math.min(10, this.lossStreak - 1)) return false;
    // A stretch shorter than twice the time the last break took to show cannot rule it out.
    const delay = this.lastBreak ? this.lastBreakAt - this.lastBreak.changePoint : 0;
    if (kept.length < 2 * delay) return false;
    const blockSize = Math.max(4, Math.ceil(MONITOR_BLOCK_TAUS * tau));
    const blocks = Math.floor(kept.length / blockSize);
    if (blocks < 8) return false;
    const means = new Float64Array(blocks);
    for (let b = 0; b < blocks; b++) {
      let sum = 0;
      for (let i = b * blockSize; i < (b + 1) * blockSize; i++) sum += kept[i] as number;
      means[b] = sum / blockSize;
    }
    // The noise level from before the break: a drift would inflate an estimate from the drifting
    // data itself and hide its own trend.
    const estimate = this.estimatorSet.estimate(this.series, this.options.estimator);
    const longRunVariance = this.breakNoise > 0 ? this.breakNoise : estimate.varianceOfMean * this.series.length;
    const sigmaBlock = Math.sqrt(longRunVariance / blockSize);
    const centre = (blocks - 1) / 2;
    let sxy = 0;
    let sxx = 0;
    for (let b = 0; b < blocks; b++) {
      sxy += (b - centre) * (means[b] as number);
      sxx += (b - centre) ** 2;
    }
    const z = sxy / sxx / (sigmaBlock / Math.sqrt(sxx));
    return Math.abs(z) < 2;
  }

  private startMonitor(index: number): void {
    const tau = this.tauNow();
    const estimate = this.estimatorSet.estimate(this.series, this.options.estimator);
    const blockSize = Math.max(16, Math.ceil(MONITOR_BLOCK_TAUS * tau));
    let longRunVariance = Math.max(estimate.varianceOfMean * this.series.length, Number.MIN_VALUE);
    // After a shift or a trend the noise is the channel's own: keep the pre-break level, since a
    // drift still in the data would inflate a fresh estimate. After a variance change, the new one.
    if (this.lastBreak && this.lastBreak.cause !== 'variance' && this.breakNoise > 0) longRunVariance = Math.min(longRunVariance, this.breakNoise);
    this.monitor = new StationarityMonitor(
      {
        blockSize,
        longRunVariance,
        longRunDof: Math.max(1, estimate.dof),
        falseAlarmSamples: this.options.falseAlarmSamples,
      },
      index + 1,
      this.series.mean,
    );
  }

  private breakFound(found: StationarityBreak, index: number, raise: (event: ChannelEvent) => void): void {
    // A break within LONG_STEADY effective samples of the last regain continues the streak.
    if (this.lossStreak > 0 && this.regainedAt >= 0 && (index - this.regainedAt) / this.tauNow() > LONG_STEADY) this.lossStreak = 0;
    this.lossStreak++;
    this.lastBreak = found;
    this.lastBreakAt = index;
    this.breakNoise = this.monitor?.settings.longRunVariance ?? this.breakNoise;
    this.lostBefore = true;
    raise({ kind: 'stationarity-lost', at: index, cause: found.cause, changePoint: found.changePoint, detail: found.detail });
    const kind = this.options.window.kind;
    this.phase = 'unsteady';
    this.precise = false;
    this.monitor = null;
    this.warmupEnd = null;
    if (kind === 'growing' && found.changePoint > this.series.firstIndex) {
      // The level before the break is not the level now: the window restarts at the change point.
      this.excluded += found.changePoint - this.series.firstIndex;
      this.series.dropBefore(found.changePoint);
    }
    this.nextWarmupCheck = index + FIRST_CHECK;
  }

  private checkPrecision(index: number, raise: (event: ChannelEvent) => void): void {
    const n = this.series.length;
    // Every 1/16 of the window (or a monitor block): an estimate costs O(maxLag) plus the pending
    // chunk of lagged products, so checking more often would dominate the per-sample cost.
    this.nextPrecisionCheck = index + Math.max(this.monitor?.settings.blockSize ?? 16, Math.floor(n / 16));
    if (n < 2 || !(this.series.variance > 0)) return;
    const estimate = this.estimatorSet.estimate(this.series, this.options.estimator);
    this.monitor?.refresh(estimate.varianceOfMean * n, estimate.dof);
    const target = this.options.target;
    if (!target) return;
    const u = meanUncertainty(estimate, this.options.confidence);
    const status = targetStatus(target, { mean: this.series.mean, n, standardUncertainty: u.standardUncertainty, dof: u.dof, confidence: this.options.confidence, rate: null, capacity: Number.POSITIVE_INFINITY });
    if (!this.precise && status.reached && status.bound !== null) {
      this.precise = true;
      raise({ kind: 'precision-reached', at: index, standardUncertainty: u.standardUncertainty, expandedUncertainty: u.expandedUncertainty, bound: status.bound });
    } else if (this.precise && status.bound !== null) {
      const achieved = target.on === 'u' ? u.standardUncertainty : (u.expandedUncertainty ?? Number.POSITIVE_INFINITY);
      if (achieved > PRECISION_REARM * status.bound) this.precise = false;
    }
  }

  private checkAveragingLimit(index: number, raise: (event: ChannelEvent) => void): void {
    const n = this.series.length;
    this.nextAllanCheck = index + Math.max(256, n);
    if (this.averagingLimitSeen || this.phase === 'warming' || n < 4096) return;
    const report = allanReport(this.series.values(), this.rate(), this.tauNow());
    if (!report.averagingLimit) return;
    this.averagingLimitSeen = true;
    raise({ kind: 'averaging-limit', at: index, m: report.averagingLimit.m, tauSeconds: report.averagingLimit.tauSeconds, adev: report.averagingLimit.adev });
  }

  /** Snapshot of an empty, one-sample or constant window: the mean where there is one, and why no uncertainty. */
  private degenerateSnapshot(base: SnapshotBase, notes: string[]): ChannelSnapshot {
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
      estimators: {},
      disagreement: [],
      stationarity: null,
      allan: [],
      averagingLimit: null,
    };
    if (n === 0) return { ...base, ...none, mean: null, notes: ['no samples in the window'] };
    const mean = this.series.mean;
    if (n === 1) return { ...base, ...none, mean, notes: ['one sample: no spread, so no uncertainty can be stated'] };
    notes.push('constant window: every sample is equal, so its spread gives no uncertainty (check the sensor or the resolution)');
    return { ...base, ...none, mean, sd: 0, standardUncertainty: 0, dof: n - 1, notes };
  }

  /**
   * The light view for live displays and status messages: no stationarity tests, no Allan
   * deviation, only the configured estimator. Cost: one estimator run (tens of microseconds).
   */
  summary(): ChannelSummary {
    const { series, options } = this;
    const n = series.length;
    const base = { name: this.name, state: this.state, n, received: this.received, last: this.received > 0 ? { value: this.lastValue, time: finiteOrNull(this.lastTime) } : null, confidence: options.confidence, excluded: this.excluded };
    if (n < 2 || !(series.variance > 0)) {
      return { ...base, mean: n > 0 ? series.mean : null, standardUncertainty: n > 1 ? 0 : null, expandedUncertainty: null, coverageFactor: null, dof: null, tauInt: null, nEff: null, target: null };
    }
    const estimate = n < FEW_SAMPLES ? this.estimatorSet.estimate(series, 'iid') : this.estimatorSet.estimate(series, options.estimator);
    const u = meanUncertainty(estimate, options.confidence);
    const mean = series.mean;
    const target = options.target ? targetStatus(options.target, { mean, n, standardUncertainty: u.standardUncertainty, dof: u.dof, confidence: options.confidence, rate: this.rate(), capacity: options.window.kind === 'sliding' ? series.maxSamples : Math.max(series.maxSamples, n) }) : null;
    return { ...base, mean, standardUncertainty: u.standardUncertainty, expandedUncertainty: u.expandedUncertainty, coverageFactor: u.coverageFactor, dof: u.dof, tauInt: estimate.tauInt, nEff: n / estimate.tauInt, target };
  }

  /**
   * The channel now. Cached until the next sample or event, so polling costs nothing; the
   * stationarity tests and the Allan deviation are computed here, on demand.
   */
  snapshot(): ChannelSnapshot {
    const key = `${this.series.firstIndex}:${this.series.nextIndex}:${this.eventCount}`;
    if (this.snapshotCache?.key === key) return this.snapshotCache.snapshot;
    const snapshot = this.computeSnapshot();
    this.snapshotCache = { key, snapshot };
    return snapshot;
  }

  private computeSnapshot(): ChannelSnapshot {
    const { options, series } = this;
    const n = series.length;
    const notes: string[] = [];
    const capacity = series.maxSamples;
    const ring = series.ring;
    const base: SnapshotBase = {
      name: this.name,
      n,
      confidence: options.confidence,
      estimator: options.estimator,
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
    const result = this.estimatorSet.run(series, Math.max(MIN_REPORTED_LAGS, options.maxLag));
    const gamma0 = result.gamma[0] as number;
    const lagCount = Math.min(n - 1, Math.max(MIN_REPORTED_LAGS, Math.min(options.maxLag, result.gamma.length - 1)));
    const acf: number[] = [];
    for (let k = 1; k <= lagCount; k++) acf.push((result.gamma[k] as number) / gamma0);

    let chosen: TauEstimate = result.estimates[options.estimator];
    if (n < FEW_SAMPLES && options.estimator !== 'iid') {
      chosen = result.estimates.iid;
      notes.push(`only ${n} samples: treated as independent observations (GUM 4.2.3) instead of ${options.estimator}`);
    }
    if (!chosen.reliable && chosen.note) notes.push(`${chosen.method}: ${chosen.note}`);
    for (const line of result.disagreements) notes.push(line);
    const uncertainty = meanUncertainty(chosen, options.confidence);
    const estimators: Partial<Record<EstimatorName, EstimatorReport>> = {};
    for (const [name, estimate] of Object.entries(result.estimates) as [EstimatorName, TauEstimate][]) {
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
    const allan = allanReport(series.values(), base.rate, result.estimates[options.estimator].tauInt);
    const target = options.target
      ? targetStatus(options.target, {
          mean,
          n,
          standardUncertainty: uncertainty.standardUncertainty,
          dof: uncertainty.dof,
          confidence: options.confidence,
          rate: base.rate,
          capacity: options.window.kind === 'sliding' ? capacity : Math.max(capacity, n),
        })
      : null;
    if (target?.note) notes.push(`target: ${target.note}`);
    return {
      ...base,
      estimator: chosen.method,
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
      stationarity: stationarityReport({
        values: series.values(),
        tauInt: chosen.tauInt,
        phase: this.phase,
        warmupEnd: this.warmupEnd,
        excluded: this.excluded,
        indicator: this.indicator.ratio(),
        monitor: this.monitor,
        lastBreak: this.lastBreak,
      }),
      allan: allan.points,
      averagingLimit: allan.averagingLimit,
      notes,
    };
  }
}
