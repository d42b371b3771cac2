import { WindowedSeries } from '../core/window/windowed-series.js';
import { EstimatorSet } from '../core/tau/estimator-set.js';
import { AutocovarianceFft } from '../core/acf/autocovariance-fft.js';
import type { EstimatorName, TauEstimate } from '../core/tau/tau-estimate.js';
import { meanUncertainty } from '../core/uncertainty/mean-uncertainty.js';
import { targetStatus, type TargetStatus } from '../core/uncertainty/target-precision.js';
import { type ChannelOptions, FEW_SAMPLES, MIN_REPORTED_LAGS } from './channel-options.js';

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
  notes: string[];
}

const SHARED_FFT = new AutocovarianceFft();

type SnapshotBase = Pick<ChannelSnapshot, 'name' | 'n' | 'confidence' | 'estimator' | 'window' | 'rate' | 'received' | 'last'>;

function finiteOrNull(value: number): number | null {
  return Number.isFinite(value) ? value : null;
}

/**
 * A channel's pipeline: the window, its estimators and the snapshot that answers "how precise is
 * the mean now". Deterministic given the samples: the daemon and `plateau analyze` both feed
 * samples here, one at a time, in arrival order.
 */
export class ChannelPipeline {
  readonly name: string;
  readonly options: ChannelOptions;
  readonly series: WindowedSeries;
  private readonly estimatorSet: EstimatorSet;
  private received = 0;
  private lastValue = Number.NaN;
  private lastTime = Number.NaN;

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

  /** Feeds one sample (time in seconds). Values must be finite: the decoders reject the rest. */
  push(value: number, timeSeconds: number): void {
    this.series.push(value, timeSeconds);
    this.received++;
    this.lastValue = value;
    this.lastTime = timeSeconds;
    const seconds = this.options.window.seconds;
    if (seconds !== undefined && this.options.window.kind === 'sliding') {
      const ring = this.series.ring;
      const oldest = timeSeconds - seconds;
      while (ring.length > 1 && ring.timeAt(0) < oldest) this.series.shift();
    }
  }

  /** Starts a new growing window at the next sample (a test point starts). */
  restartWindow(): void {
    this.series.clear();
  }

  get count(): number {
    return this.series.length;
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
    };
    if (n === 0) return { ...base, ...none, mean: null, notes: ['no samples in the window'] };
    const mean = this.series.mean;
    if (n === 1) return { ...base, ...none, mean, notes: ['one sample: no spread, so no uncertainty can be stated'] };
    notes.push('constant window: every sample is equal, so its spread gives no uncertainty (check the sensor or the resolution)');
    return { ...base, ...none, mean, sd: 0, standardUncertainty: 0, dof: n - 1, notes };
  }

  snapshot(): ChannelSnapshot {
    const { options, series } = this;
    const n = series.length;
    const notes: string[] = [];
    const capacity = series.maxSamples;
    const ring = series.ring;
    const base = {
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
    };
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
      notes,
    };
  }
}
