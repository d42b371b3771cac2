import { SeededRandom } from '../../core/random/seeded-random.js';
import { compareWithAnalytic, stationaryBootstrap, type AnalyticComparison, type BootstrapStatistic } from '../../core/bootstrap/stationary-bootstrap.js';
import type { DerivedEngine, DerivedSnapshot } from './derived-engine.js';

/**
 * The bootstrap cross-check of a record: the stationary bootstrap (D. N. Politis & J. P. Romano
 * (1994), "The stationary bootstrap", JASA 89(428), 1303-1313) with the automatic mean block
 * length of Politis & White (2004, with the 2009 correction), both in src/core/bootstrap, applied
 * to the window of a channel (mean, median and a 10 % trimmed mean: the robust estimates matter for
 * channels with spikes) or to the linearised series of a derived result (the mean only), and the
 * bootstrap standard error of the mean set against the analytic standard uncertainty by
 * compareWithAnalytic (its rule: |ln(ratio)| within 3 standard deviations of what the Monte Carlo
 * error, the bootstrap's own sampling error and the analytic degrees of freedom allow).
 *
 * Bounded work (the daemon writes records in its flush): R = 1000 replicates by default (Monte
 * Carlo relative error of the standard error about 1 / sqrt(2 (R - 1)) = 2.2 %); a window longer
 * than `maxValues` (default 8192) is first reduced to the means of s = ceil(n / maxValues)
 * consecutive samples (the complete blocks only): the mean and its standard error are unchanged in
 * expectation, while the median and the trimmed mean become those of the block means (the note
 * says so). Cost O(R min(n, maxValues)) with two selections per replicate for the robust
 * statistics: about 0.1 s at the cap on this machine.
 * Seeded: the same window gives the same numbers (the seed is a hash of the name and n).
 *
 * Linearised series of a derived result: z_t = sum_i c_i Y_ti over the engine's rows, whose mean
 * is the first-order estimate shifted by a constant and whose standard error is, to first order,
 * the result's u_c: the bootstrap then checks the batch-means covariance behind u_c with an
 * estimator that shares none of its choices.
 */
export interface BootstrapCheckOptions {
  replicates?: number;
  /** Statistics to bootstrap; default mean, median and trimmed mean. */
  statistics?: BootstrapStatistic[];
  /** Fraction trimmed at each end for the trimmed mean (default 0.1). */
  trim?: number;
  /** Longer series are reduced to block means first (default 8192). */
  maxValues?: number;
  /** Default: a hash of `name` and the series length. */
  seed?: number;
}

export interface BootstrapStatisticResult {
  estimate: number;
  standardError: number;
}

export interface BootstrapCheck {
  /** Values the bootstrap ran on (after any reduction to block means). */
  values: number;
  /** Samples per block mean (1 when the series was used as it is). */
  aggregation: number;
  replicates: number;
  blockLength: number;
  mean: BootstrapStatisticResult | null;
  median: BootstrapStatisticResult | null;
  trimmedMean: BootstrapStatisticResult | null;
  /** The analytic u it is compared with. */
  analyticStandardUncertainty: number | null;
  /** null when there is nothing to compare. */
  agrees: boolean | null;
  comparison: AnalyticComparison | null;
  reliable: boolean;
  note: string;
}

export const DEFAULT_BOOTSTRAP_REPLICATES = 1000;
export const DEFAULT_BOOTSTRAP_MAX_VALUES = 8192;

export function bootstrapCrossCheck(
  name: string,
  series: ArrayLike<number>,
  analytic: { standardUncertainty: number | null; dof: number | null } | null,
  options: BootstrapCheckOptions = {},
): BootstrapCheck | null {
  const n = series.length;
  if (n < 8) return null;
  const maxValues = options.maxValues ?? DEFAULT_BOOTSTRAP_MAX_VALUES;
  const aggregation = Math.max(1, Math.ceil(n / maxValues));
  const values = aggregation === 1 ? Float64Array.from(series) : blockMeans(series, aggregation);
  if (values.length < 8) return null;
  const replicates = options.replicates ?? DEFAULT_BOOTSTRAP_REPLICATES;
  const random = new SeededRandom(options.seed ?? seedFrom(`${name}:${n}`));
  const result = stationaryBootstrap(values, { replicates, random, statistics: options.statistics ?? ['mean', 'median', 'trimmed-mean'], trim: options.trim ?? 0.1 });
  const pick = (e: { estimate: number; standardError: number } | undefined): BootstrapStatisticResult | null => (e === undefined ? null : { estimate: e.estimate, standardError: e.standardError });
  const notes: string[] = [];
  if (aggregation > 1) notes.push(`run on ${values.length} means of ${aggregation} consecutive samples (the median and trimmed mean are those of the block means)`);
  if (result.note) notes.push(result.note);
  let comparison: AnalyticComparison | null = null;
  const u = analytic?.standardUncertainty ?? null;
  if (result.mean !== undefined && u !== null) {
    // The standard error of a mean of block means is the standard error of the mean: compare as is.
    const dof = analytic?.dof ?? undefined;
    comparison = compareWithAnalytic(result.mean.standardError, u, replicates, { sampleCount: values.length, blockLength: result.blockLength, ...(dof !== undefined && dof !== null ? { analyticDof: dof } : {}) });
    notes.unshift(comparison.agrees ? `bootstrap and analytic uncertainty of the mean ${comparison.note}` : `the bootstrap and the analytic uncertainty of the mean DISAGREE: ${comparison.note}`);
  }
  return {
    values: values.length,
    aggregation,
    replicates,
    blockLength: result.blockLength,
    mean: pick(result.mean),
    median: pick(result.median),
    trimmedMean: pick(result.trimmedMean),
    analyticStandardUncertainty: u,
    agrees: comparison === null ? null : comparison.agrees,
    comparison,
    reliable: result.reliable,
    note: notes.join('; '),
  };
}

/**
 * The check for a channel of a test-point record: its window and its analytic u and nu. For the
 * lead: in TestPoints.record, `bootstrap: channelBootstrapCheck(channel.pipeline.series.values(), snapshot)`.
 */
export function channelBootstrapCheck(windowValues: ArrayLike<number>, snapshot: { name: string; standardUncertainty: number | null; dof: number | null }, options: BootstrapCheckOptions = {}): BootstrapCheck | null {
  return bootstrapCrossCheck(snapshot.name, windowValues, { standardUncertainty: snapshot.standardUncertainty, dof: snapshot.dof }, options);
}

/** The check for a derived result: the mean of its linearised series over the engine's rows. */
export function derivedBootstrapCheck(engine: DerivedEngine, snapshot: DerivedSnapshot, options: BootstrapCheckOptions = {}): BootstrapCheck | null {
  if (snapshot.standardUncertainty === null || snapshot.budget.length === 0) return null;
  const { values, count } = engine.rowData();
  const p = engine.channels.length;
  const columns = snapshot.budget.map((entry) => ({ column: engine.indexOf(entry.channel), sensitivity: entry.sensitivity }));
  const linearised = new Float64Array(count);
  for (let r = 0; r < count; r++) {
    let z = 0;
    for (const { column, sensitivity } of columns) z += sensitivity * (values[r * p + column] as number);
    linearised[r] = z;
  }
  return bootstrapCrossCheck(snapshot.name, linearised, { standardUncertainty: snapshot.standardUncertainty, dof: snapshot.dof }, { ...options, statistics: ['mean'] });
}

function blockMeans(series: ArrayLike<number>, size: number): Float64Array {
  const blocks = Math.floor(series.length / size);
  const out = new Float64Array(blocks);
  const shift = series[0] as number;
  for (let k = 0; k < blocks; k++) {
    let sum = 0;
    for (let i = k * size; i < (k + 1) * size; i++) sum += (series[i] as number) - shift;
    out[k] = shift + sum / size;
  }
  return out;
}

/** FNV-1a hash of a text: a stable seed. */
export function seedFrom(text: string): number {
  let hash = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) {
    hash ^= text.charCodeAt(i);
    hash = Math.imul(hash, 0x01000193) >>> 0;
  }
  return hash >>> 0;
}
