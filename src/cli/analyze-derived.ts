import type { ChannelPipeline, ChannelSnapshot } from '../engine/channel-pipeline.js';
import type { ChannelOptions } from '../engine/channel-options.js';
import { referencedChannels } from '../engine/derived/derived-definitions.js';
import { compileWithConstants } from '../engine/derived/derived-constants.js';
import type { DerivedEstimator, DerivedResultSpec } from '../engine/derived/derived-engine.js';
import type { DerivedConfig } from '../config/plateau-config.js';
import type { TypeBSpec } from '../core/uncertainty/type-b-component.js';
import { ConfigError } from '../config/config-reader.js';
import { derivedReportEntry, derivedVerdict, type DerivedReportEntry } from '../engine/derived/derived-record.js';
import { DerivedTracker, type ChannelWindowView, type DerivedWindowSource } from '../engine/derived/derived-tracker.js';
import { DerivedMonitor, type DerivedEvent } from '../engine/derived/derived-monitor.js';
import type { SteadyHistory } from '../engine/steadiness.js';
import { DEFAULT_MONTE_CARLO_TRIALS } from '../engine/derived/derived-monte-carlo.js';
import { UsageError } from './cli-error.js';
import { formatSignificant, roundWithUncertainty, textTable } from './format.js';

export type { DerivedReportEntry } from '../engine/derived/derived-record.js';

/**
 * `plateau analyze --derive NAME=EXPR`: derived results over the CSV's channel columns, through
 * the daemon's engine (src/engine/derived): each input sample keeps its time (the time column,
 * else the row index), and when the file is read, the derived results are computed from the
 * samples in every input's final window (as the daemon does from its channel windows: warm-up cut
 * by the channels is cut from the derived results too). JSON: a top-level `derived` array.
 * `--estimator iid` takes the rows as independent for the derived results too; the other
 * estimator names choose the channels' tau estimator, and the derived results use multivariate
 * batch means (falling back to independent rows, with a note, when there are too few). A
 * relative target (--target-rel) applies to the derived results as well; --target, in the
 * channels' units, does not. With a target, each result's `events` are those the daemon raises on
 * the same samples (src/engine/derived/derived-monitor.ts: the results are brought up to date after
 * every row, and their checks fall on the same rows as the daemon's).
 */
export const DERIVE_HELP = `  --derive NAME=EXPR     a derived result over the channel columns (repeatable), e.g.
                         --derive "Q=flow * 4.18 * (t_out - t_in)"; u from the covariance of
                         the channel means (multivariate batch means over common time buckets),
                         cross-checked by Monte Carlo (JCGM 101) and a stationary bootstrap
  --monte-carlo-trials M cap on the Monte Carlo trials per derived result (default 1000000;
                         0 skips the check)
`;

export interface DeriveRequest {
  name: string;
  expression: string;
  /** The flag's text, for messages. */
  raw: string;
}

export interface DeriveOptions {
  requests: DeriveRequest[];
  /**
   * `--config`: the configuration's derived results (with their targets, limits, combined targets
   * and named constants) and the channels' Type B components, which every derived result
   * propagates. Results over a channel that is not a column are left out, with a note.
   */
  configured?: { derived: DerivedConfig[]; typeBOf: (channel: string) => TypeBSpec[] } | undefined;
  /** Cap on the Monte Carlo trials per result (default DEFAULT_MONTE_CARLO_TRIALS; 0 skips). */
  monteCarloTrials?: number | undefined;
}

export function parseDeriveFlags(values: string[], monteCarloTrials?: number): DeriveOptions {
  const requests = values.map((raw) => {
    const at = raw.indexOf('=');
    const name = at < 0 ? '' : raw.slice(0, at).trim();
    const expression = at < 0 ? '' : raw.slice(at + 1).trim();
    if (name === '' || expression === '') throw new UsageError(`--derive ${JSON.stringify(raw)}: expected NAME=EXPRESSION, e.g. --derive "Q=flow * 4.18 * (t_out - t_in)"`);
    return { name, expression, raw };
  });
  return { requests, monteCarloTrials };
}

/** A derived result of `plateau analyze`: the record entry, and the events raised while the rows were read. */
export type AnalyzedDerived = DerivedReportEntry & { events: { kind: string; at: number | null; [field: string]: unknown }[] };

export interface DerivedRecorder {
  /** Called for every accepted cell, before it is pushed into its channel's pipeline. */
  record(column: number, timeSeconds: number, rowIndex: number): void;
  /** Called after each row: the results are brought up to date (their checks may raise events). */
  afterRow(): void;
  /** The derived results from the final channel windows. */
  finish(snapshots: ChannelSnapshot[]): AnalyzedDerived[];
  /** Configured derived results left out (a channel that is not a column). */
  notes: string[];
}

/**
 * Compiles the --derive requests against the columns.
 * @throws UsageError (one line, exit status 2) for the first rejected request.
 */
export function prepareDerived(derive: DeriveOptions, columns: string[], options: ChannelOptions, hasTimeColumn: boolean, pipelines: ChannelPipeline[], steadiness: SteadyHistory[]): DerivedRecorder {
  const requests = derive.requests;
  const monteCarloTrials = derive.monteCarloTrials ?? DEFAULT_MONTE_CARLO_TRIALS;
  const configuredSpecs = configuredDerived(derive, columns);
  const compiled = compileWithConstants(
    requests.map((r) => ({ name: r.name, expression: r.expression })),
    columns.map((name) => ({ name })),
    '--derive',
    requests.map(() => []),
  );
  if (!compiled.ok) {
    const first = compiled.problems[0] as string;
    const match = /^--derive\[(\d+)\]\.\w+: (.*)$/s.exec(first);
    const request = match ? requests[Number(match[1])] : undefined;
    const more = compiled.problems.length > 1 ? ` (and ${compiled.problems.length - 1} more problem${compiled.problems.length > 2 ? 's' : ''})` : '';
    throw new UsageError(`${request ? `--derive ${JSON.stringify(request.raw)}` : '--derive'}: ${(match ? (match[2] as string) : first).replace(/\s*\n\s*/g, ' ')}${more}`);
  }
  const target = options.target !== null && options.target.relative ? options.target : null;
  const typeBOf = derive.configured?.typeBOf ?? (() => []);
  const channelTypeB = (inputs: string[]) => Object.fromEntries(inputs.map((name) => [name, typeBOf(name)]));
  const specs: DerivedResultSpec[] = [
    ...configuredSpecs.specs,
    ...compiled.compiled.map((c) => ({ compiled: c, target, confidence: options.confidence, uncertainty: { channelTypeB: channelTypeB(c.inputs), conformity: null, combinedTarget: null } })),
  ];
  const withTarget = new Set(specs.filter((spec) => spec.target !== null).map((spec) => spec.compiled.name));
  const estimator: DerivedEstimator = options.estimator === 'iid' ? 'iid' : 'batch-means';
  const tracker = new DerivedTracker(specs, { estimator });
  // One monitor per result, as the daemon keeps them (each on its own inputs' windows).
  const monitors = specs.map((spec) => new DerivedMonitor(spec, { estimator }));
  const events = new Map<string, DerivedEvent[]>(specs.map((spec) => [spec.compiled.name, []]));
  const columnOf = new Map(columns.map((name, i) => [name, i]));
  // Times of the input columns' samples, by absolute sample index.
  const times = new Map<number, { values: Float64Array; length: number }>();
  for (const name of tracker.channels) times.set(columnOf.get(name) as number, { values: new Float64Array(1024), length: 0 });
  const source: DerivedWindowSource = {
    window(name): ChannelWindowView | null {
      const column = columnOf.get(name);
      const pipeline = column === undefined ? undefined : pipelines[column];
      const store = column === undefined ? undefined : times.get(column);
      if (column === undefined || pipeline === undefined || store === undefined || pipeline.count === 0) return null;
      const series = pipeline.series;
      const first = series.firstIndex;
      const history = steadiness[column] as SteadyHistory;
      return {
        firstIndex: first,
        nextIndex: first + series.length,
        valueAt: (index) => series.ring.at(index - first),
        timeAt: (index) => store.values[index] as number,
        sliding: pipeline.options.window.kind === 'sliding' || series.length >= series.maxSamples,
        steadyAt: (index) => history.steadyAt(index),
      };
    },
  };
  return {
    record(column, timeSeconds, rowIndex) {
      const store = times.get(column);
      if (store === undefined) return;
      if (store.length === store.values.length) {
        const grown = new Float64Array(2 * store.values.length);
        grown.set(store.values);
        store.values = grown;
      }
      store.values[store.length++] = hasTimeColumn ? timeSeconds : rowIndex;
    },
    afterRow() {
      if (withTarget.size === 0) return;
      for (const monitor of monitors) {
        monitor.sync(source);
        for (const event of monitor.takeEvents()) events.get(event.source)?.push(event);
      }
    },
    finish(snapshots) {
      tracker.sync(source);
      const states = new Map(snapshots.map((s) => [s.name, s.state as string]));
      return tracker.evaluate(source).map((evaluated) => {
        // Without a time column the times are row indices: no rate, no seconds to target.
        const snapshot = hasTimeColumn ? evaluated : { ...evaluated, rowRate: null, target: evaluated.target === null ? null : { ...evaluated.target, secondsToTarget: null } };
        const inputStates: Record<string, string> = {};
        for (const input of snapshot.inputs) inputStates[input] = states.get(input) ?? 'no data';
        const verdict = derivedVerdict(snapshot, withTarget.has(snapshot.name), inputStates, snapshot.target?.reached === true);
        const raised = (events.get(snapshot.name) ?? []).map(({ kind, at, body }) => {
          const { derived: _name, ...fields } = body;
          return { kind, at, ...fields };
        });
        return { ...derivedReportEntry(tracker.current, snapshot, verdict, { monteCarloTrials }), events: raised };
      });
    },
    notes: configuredSpecs.skipped,
  };
}

/**
 * The configuration's derived results over the file's columns (`--config`): each compiled with its
 * named constants; a result over a channel that is not a column (or over such a result) is left
 * out with a note. Compile problems are configuration errors, one line each.
 */
function configuredDerived(derive: DeriveOptions, columns: string[]): { specs: DerivedResultSpec[]; skipped: string[] } {
  const configured = derive.configured;
  if (configured === undefined || configured.derived.length === 0) return { specs: [], skipped: [] };
  const constants = new Set(configured.derived.flatMap((d) => d.constants.map((c) => c.name)));
  let kept = configured.derived.map((d, i) => ({ d, i }));
  const skipped: string[] = [];
  for (let changed = true; changed; ) {
    changed = false;
    const names = new Set(kept.map(({ d }) => d.name));
    const definitions = kept.map(({ d }) => ({ name: d.name, expression: d.expression }));
    for (const { name, definitions: users } of referencedChannels(definitions)) {
      if (constants.has(name) || columns.includes(name) || names.has(name)) continue;
      for (const u of users) {
        const item = kept[u];
        if (item === undefined) continue;
        skipped.push(`derived[${item.i}] ${item.d.name}: left out, its input ${name} is not a column of the file`);
      }
      const drop = new Set(users);
      kept = kept.filter((_, k) => !drop.has(k));
      changed = true;
      break;
    }
  }
  if (kept.length === 0) return { specs: [], skipped };
  const compiled = compileWithConstants(
    kept.map(({ d }) => ({ name: d.name, expression: d.expression, ...(d.unit !== null ? { unit: d.unit } : {}) })),
    columns.map((name) => ({ name })),
    'derived',
    kept.map(({ d }) => d.constants),
  );
  if (!compiled.ok) throw new ConfigError(compiled.problems);
  const specs = compiled.compiled.map((c, k) => {
    const d = (kept[k] as { d: DerivedConfig }).d;
    return { compiled: c, target: d.target, confidence: d.confidence, uncertainty: { channelTypeB: Object.fromEntries(c.inputs.map((name) => [name, configured.typeBOf(name)])), conformity: d.conformity, combinedTarget: d.combinedTarget } };
  });
  return { specs, skipped };
}

/** The derived results as a table, for the text report. */
export function renderDerived(entries: DerivedReportEntry[]): string[] {
  const header = ['derived', 'rows', 'value', 'U', 'k', 'u', 'nu', 'u if uncorrelated', 'estimator', 'Monte Carlo', 'target'];
  const rows = entries.map((d) => {
    const rounded = d.value === null ? { value: '-', uncertainty: null } : roundWithUncertainty(d.value, d.expandedUncertainty ?? d.standardUncertainty);
    const mc = d.monteCarlo === null ? '-' : 'error' in d.monteCarlo ? 'failed' : d.monteCarlo.validated === null ? '-' : d.monteCarlo.validated ? 'validates' : 'disagrees';
    let target = '-';
    if (d.target) target = d.atTarget ? 'reached' : d.target.reached ? 'inputs not steady' : d.target.samplesToTarget !== null ? `${d.target.samplesToTarget} more rows` : 'out of reach';
    return [
      d.unit ? `${d.name} [${d.unit}]` : d.name,
      String(d.rows),
      rounded.value,
      rounded.uncertainty ?? '-',
      formatSignificant(d.coverageFactor, 3),
      formatSignificant(d.standardUncertainty, 2),
      formatSignificant(d.dof, 3),
      formatSignificant(d.independent?.standardUncertainty ?? null, 2),
      d.estimator,
      mc,
      target,
    ];
  });
  if (entries.some((d) => d.combined !== null && (d.combined.budget.some((b) => b.evaluation === 'B') || d.conformity !== null))) {
    header.push('u_c', 'U_c', 'conformity');
    entries.forEach((d, i) => (rows[i] as string[]).push(formatSignificant(d.combined?.standardUncertainty ?? null, 2), formatSignificant(d.combined?.expandedUncertainty ?? null, 2), d.conformity === null ? '-' : d.conformity.verdict === null ? 'no verdict' : `${d.conformity.verdict}${d.conformity.probability === null ? '' : `, p_c ${d.conformity.probability.toFixed(3)}`}`));
  }
  const lines = [textTable(header, rows), '', 'Uncertainty budgets (share of u_c^2, covariance terms included):'];
  for (const d of entries) {
    if (d.budget.length === 0) continue;
    lines.push(`  ${d.name}: ${d.budget.map((b) => `${b.channel} ${b.share === null ? '-' : `${(100 * b.share).toFixed(1)} %`}`).join(', ')}`);
    for (const [other, r] of Object.entries(d.correlation)) lines.push(`    r(${d.name}, ${other}) = ${r.toFixed(3)}`);
    if (d.combined !== null && d.combined.budget.some((b) => b.evaluation === 'B')) lines.push(`    with Type B and constants: ${d.combined.budget.map((b) => `${b.quantity}: ${b.component} ${b.share === null ? '-' : `${(100 * b.share).toFixed(1)} %`}`).join('; ')}`);
  }
  return lines;
}
