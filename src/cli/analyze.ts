import { readCommandArgs } from './command-args.js';
import { ChannelPipeline, type ChannelSnapshot } from '../engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS, DEFAULT_MAX_SAMPLES, type ChannelOptions } from '../engine/channel-options.js';
import { ESTIMATOR_NAMES, isEstimatorName } from '../core/tau/tau-estimate.js';
import type { TargetSpec } from '../core/uncertainty/target-precision.js';
import { probeCsv, forEachCsvRow, describeIssues } from '../ingest/csv-table.js';
import { UsageError } from './cli-error.js';
import { formatDuration, formatSignificant, groupDigits, roundWithUncertainty, textTable } from './format.js';
import { CAUTION } from './caution.js';
import type { ChannelEvent } from '../engine/channel-events.js';
import type { WarmupSetting } from '../engine/warmup-detector.js';
import { prepareDerived, DERIVE_HELP, parseDeriveFlags, renderDerived, type AnalyzedDerived, type DeriveOptions, type DerivedRecorder } from './analyze-derived.js';
import { SteadyHistory } from '../engine/steadiness.js';
import { criteriaLines, criteriaCell } from './analyze-criteria.js';
import { channelOptionsFromSettings, loadConfigFile, settingsFor } from '../config/load-config.js';
import type { PlateauConfig } from '../config/plateau-config.js';
import { unitLabel } from '../engine/unit-label.js';

const MAX_EVENTS = 10_000;

export const ANALYZE_HELP = `plateau analyze FILE [options]

Replays a logged CSV file (header row; every numeric column a channel; an optional time column)
through the same streaming engine the daemon runs, and reports each channel's mean with its
autocorrelation-aware uncertainty.

Options:
  --json                 print JSON ({ "channels": [...] }) instead of a table
  --window N             sliding window of the last N samples (default: the whole file)
  --window-seconds T     sliding window of the last T seconds (needs a time column)
  --confidence P         coverage probability of U, 0 < P < 1 (default 0.95)
  --target X             target precision: bound on U in the channel's units
  --target-rel R         target precision relative to |mean| (0.001 = 0.1 %)
  --target-on u|U        apply the target to u or to U (default U)
  --max-lag L            lags of the maintained autocovariance (default 64)
  --rate HZ              samples per second (default: from the time column)
  --estimator NAME       ${ESTIMATOR_NAMES.join(', ')} (default ${DEFAULT_CHANNEL_OPTIONS.estimator}:
                         the autoregressive spectral estimate, with periodic components removed
                         and Beran's law under long memory)
  --warmup auto|none|N   how the warm-up is found: auto (default) fits and cuts it; none keeps every
                         sample as given; N cuts the first N samples of each channel
  --time-column NAME     the column holding time (default: a column named time, t, timestamp, ...)
  --delimiter C          field separator (default: guessed from the header: , ; or tab)
  --unit NAME=UNIT       the unit of a column (repeatable), e.g. --unit probe_a=degC; shown in
                         the table as people write it (°C) and given in --json as "unit"
  --decimal-comma        numbers are written 21,375 (fields separated by ; or tab); found by itself
                         in the first rows when it can be, and said in the notes
  --config CFG           apply the channel settings of a plateau configuration file, as \`plateau run\`
                         does: units, window, estimator, targets, Type B components, specification
                         limits with the decision rule, combined target and stopping rule,
                         stability rules (criteria) with the readiness policy, and its derived
                         results over the file's columns; channel flags given as well
                         override the configuration for every channel
${DERIVE_HELP}`;

export interface AnalyzeReport {
  file: string;
  rows: number;
  timeColumn: string | null;
  ignoredColumns: string[];
  notes: string[];
  channels: (ChannelSnapshot & { unit?: string | null })[];
  /** Derived results (--derive), empty without any. */
  derived: AnalyzedDerived[];
}

interface Io {
  out: (text: string) => void;
}

export async function runAnalyze(argv: string[], io: Io): Promise<number> {
  const { values: parsed, positionals } = readCommandArgs('analyze', argv, {
      json: { type: 'boolean' },
      window: { type: 'string' },
      'window-seconds': { type: 'string' },
      confidence: { type: 'string' },
      target: { type: 'string' },
      'target-rel': { type: 'string' },
      'target-on': { type: 'string' },
      'max-lag': { type: 'string' },
      rate: { type: 'string' },
      estimator: { type: 'string' },
      warmup: { type: 'string' },
      'time-column': { type: 'string' },
      delimiter: { type: 'string' },
      config: { type: 'string' },
      'decimal-comma': { type: 'boolean' },
      unit: { type: 'string', multiple: true },
      derive: { type: 'string', multiple: true },
      'monte-carlo-trials': { type: 'string' },
      help: { type: 'boolean', short: 'h' },
  }, true);
  const values = parsed as Flags & { json?: boolean; help?: boolean; derive?: string[]; 'time-column'?: string; delimiter?: string; config?: string; 'decimal-comma'?: boolean; unit?: string[] };
  if (values.help) {
    io.out(ANALYZE_HELP);
    return 0;
  }
  if (positionals.length !== 1) throw new UsageError(positionals.length === 0 ? 'analyze needs a CSV file: plateau analyze FILE' : `analyze takes one file, got ${positionals.length}`);
  const file = positionals[0] as string;
  const { derive: deriveFlags, config: configPath, 'decimal-comma': decimalComma, unit: unitFlags, ...flags } = values;
  const units = new Map<string, string>();
  for (const raw of unitFlags ?? []) {
    const at = raw.indexOf('=');
    const name = at < 0 ? '' : raw.slice(0, at).trim();
    const unit = at < 0 ? '' : raw.slice(at + 1).trim();
    if (name === '' || unit === '') throw new UsageError(`--unit ${JSON.stringify(raw)}: expected NAME=UNIT, e.g. --unit probe_a=degC`);
    units.set(name, unit);
  }
  const options = channelOptionsFromFlags(flags);
  const derive = parseDeriveFlags(deriveFlags ?? [], numberFlag(flags, 'monte-carlo-trials', (v) => Number.isInteger(v) && (v === 0 || (v >= 20_000 && v <= 5_000_000)), 'a whole number of trials, 0 (no Monte Carlo check) or 20000 to 5000000'));
  const config = configPath === undefined ? null : loadConfigFile(configPath, { requireSubscriptions: false });
  const settings = config === null ? undefined : configuredChannels(config, flags, options);
  if (config !== null) derive.configured = { derived: config.derived, typeBOf: (name) => settingsFor(config, name).typeB };
  const report = await analyzeFile(file, options, { timeColumn: values['time-column'], delimiter: values.delimiter, decimalComma: decimalComma === true }, derive, settings, units);
  for (const name of units.keys()) {
    if (!report.channels.some((c) => c.name === name)) throw new UsageError(`--unit ${name}=${units.get(name)}: no channel column named "${name}" (channels: ${report.channels.map((c) => c.name).join(', ')})`);
  }
  for (const channel of report.channels) {
    const given = units.get(channel.name);
    if (given !== undefined || (channel as ChannelSnapshot & { unit?: string | null }).unit === undefined) (channel as ChannelSnapshot & { unit?: string | null }).unit = given ?? null;
  }
  io.out(values.json ? `${JSON.stringify(report, finiteOrNull, 2)}\n` : renderReport(report));
  return 0;
}

type Flags = Record<string, string | boolean | undefined>;

function numberFlag(flags: Flags, name: string, check: (v: number) => boolean, expected: string): number | undefined {
  const raw = flags[name];
  if (raw === undefined) return undefined;
  const value = Number(raw);
  if (typeof raw !== 'string' || raw.trim() === '' || !Number.isFinite(value) || !check(value)) {
    throw new UsageError(`--${name} ${String(raw)}: expected ${expected}`);
  }
  return value;
}

export function channelOptionsFromFlags(flags: Flags): ChannelOptions {
  const windowSamples = numberFlag(flags, 'window', (v) => Number.isInteger(v) && v >= 4, 'a whole number of samples, at least 4');
  const windowSeconds = numberFlag(flags, 'window-seconds', (v) => v > 0, 'a positive number of seconds');
  const confidence = numberFlag(flags, 'confidence', (v) => v > 0 && v < 1, 'a probability between 0 and 1, e.g. 0.95');
  const target = numberFlag(flags, 'target', (v) => v > 0, 'a positive uncertainty in the channel units');
  const targetRel = numberFlag(flags, 'target-rel', (v) => v > 0, 'a positive fraction of the mean, e.g. 0.001');
  const maxLag = numberFlag(flags, 'max-lag', (v) => Number.isInteger(v) && v >= 1 && v <= 4096, 'a whole number of lags from 1 to 4096');
  const rate = numberFlag(flags, 'rate', (v) => v > 0, 'a positive number of samples per second');
  const estimator = flags.estimator;
  if (estimator !== undefined && (typeof estimator !== 'string' || !isEstimatorName(estimator))) {
    throw new UsageError(`--estimator ${String(estimator)}: expected one of ${ESTIMATOR_NAMES.join(', ')}`);
  }
  const warmupFlag = flags.warmup;
  let warmup: WarmupSetting = { mode: 'auto' };
  if (warmupFlag !== undefined) {
    const text = String(warmupFlag);
    if (text === 'auto' || text === 'none') warmup = { mode: text };
    else if (/^\d+$/.test(text)) warmup = { mode: 'fixed', samples: Number(text) };
    else throw new UsageError(`--warmup ${text}: expected auto, none or a whole number of samples`);
  }
  const on = flags['target-on'];
  if (on !== undefined && on !== 'u' && on !== 'U') throw new UsageError(`--target-on ${String(on)}: expected u or U`);
  if (target !== undefined && targetRel !== undefined) throw new UsageError('--target and --target-rel: give one or the other');
  if (windowSamples !== undefined && windowSeconds !== undefined) throw new UsageError('--window and --window-seconds: give one or the other');
  let targetSpec: TargetSpec | null = null;
  if (target !== undefined) targetSpec = { value: target, relative: false, on: (on as 'u' | 'U' | undefined) ?? 'U' };
  if (targetRel !== undefined) targetSpec = { value: targetRel, relative: true, on: (on as 'u' | 'U' | undefined) ?? 'U' };
  const sliding = windowSamples !== undefined || windowSeconds !== undefined;
  return {
    ...DEFAULT_CHANNEL_OPTIONS,
    window: sliding
      ? { kind: 'sliding', maxSamples: windowSamples ?? DEFAULT_MAX_SAMPLES, ...(windowSamples !== undefined ? { samples: windowSamples } : {}), ...(windowSeconds !== undefined ? { seconds: windowSeconds } : {}) }
      : { kind: 'growing', maxSamples: DEFAULT_MAX_SAMPLES },
    confidence: confidence ?? DEFAULT_CHANNEL_OPTIONS.confidence,
    target: targetSpec,
    maxLag: maxLag ?? DEFAULT_CHANNEL_OPTIONS.maxLag,
    rate: rate ?? null,
    estimator: (estimator as ChannelOptions['estimator'] | undefined) ?? DEFAULT_CHANNEL_OPTIONS.estimator,
    warmup,
  };
}

/** Per-channel settings from a configuration (`--config`): the engine options and the unit of each channel. */
export interface ChannelSettingsSource {
  optionsFor(channel: string): ChannelOptions;
  unitOf(channel: string): string | null;
}

/** Channel flags that, given with --config, override the configuration for every channel. */
const CHANNEL_FLAG_KEYS: Record<string, (keyof ChannelOptions)[]> = {
  window: ['window'],
  'window-seconds': ['window'],
  confidence: ['confidence'],
  target: ['target'],
  'target-rel': ['target'],
  'max-lag': ['maxLag'],
  rate: ['rate'],
  estimator: ['estimator'],
  warmup: ['warmup'],
};

/** The configuration's settings for each channel, as `plateau run` applies them, with the channel flags given on top. */
export function configuredChannels(config: PlateauConfig, flags: Flags, fromFlags: ChannelOptions): ChannelSettingsSource {
  const overridden = new Set(Object.entries(CHANNEL_FLAG_KEYS).filter(([flag]) => flags[flag] !== undefined).flatMap(([, keys]) => keys));
  return {
    optionsFor(channel) {
      const options = channelOptionsFromSettings(settingsFor(config, channel));
      for (const key of overridden) (options as unknown as Record<string, unknown>)[key] = fromFlags[key];
      return options;
    },
    unitOf: (channel) => settingsFor(config, channel).unit,
  };
}

/** Replays a CSV file through one pipeline per channel: the streaming code path, row by row. */
export async function analyzeFile(file: string, options: ChannelOptions, csv: { timeColumn?: string | undefined; delimiter?: string | undefined; decimalComma?: boolean } = {}, derive: DeriveOptions = { requests: [] }, settings?: ChannelSettingsSource, units: ReadonlyMap<string, string> = new Map()): Promise<AnalyzeReport> {
  const layout = await probeCsv(file, {
    ...(csv.timeColumn !== undefined ? { timeColumn: csv.timeColumn } : {}),
    ...(csv.delimiter !== undefined ? { delimiter: csv.delimiter } : {}),
    ...(csv.decimalComma ? { decimalComma: true } : {}),
  });
  const channelOptions = layout.channels.map((column) => settings?.optionsFor(column.name) ?? options);
  if (channelOptions.some((o) => o.window.seconds !== undefined) && !layout.timeColumn) {
    throw new UsageError(`${options.window.seconds !== undefined ? '--window-seconds' : 'a window in seconds (from --config)'} needs a time column, and ${file} has none (name one with --time-column)`);
  }
  const pipelines = layout.channels.map((column, c) => new ChannelPipeline(column.name, channelOptions[c] as ChannelOptions));
  // The unit as people write it in the verdict's words (--unit first, then the configuration).
  pipelines.forEach((pipeline) => pipeline.setUnitLabel(unitLabel(units.get(pipeline.name) ?? settings?.unitOf(pipeline.name) ?? null)));
  // When each channel was steady (derived results judge their inputs by it).
  const steadiness = pipelines.map(() => new SteadyHistory());
  // Derived results: compiled against the columns before the rows are read (a bad --derive stops
  // here); the recorder keeps each input sample's time (the time column, else the row index).
  const recorder: DerivedRecorder | null = derive.requests.length > 0 || (derive.configured?.derived.length ?? 0) > 0 ? prepareDerived(derive, layout.channels.map((c) => c.name), options, layout.timeColumn !== null && layout.timeColumn !== undefined, pipelines, steadiness) : null;
  let rowIndex = 0;
  // Every event in order (a snapshot keeps only the most recent); capped so a pathological file
  // cannot exhaust memory, with a note when the cap is reached.
  const events: ChannelEvent[][] = pipelines.map(() => []);
  const notes: string[] = [];
  let timeIssues = 0;
  let firstTimeIssue = '';
  let previousTime = Number.NEGATIVE_INFINITY;
  let backwards = 0;
  const rows = await forEachCsvRow(
    layout,
    (_line, time, values) => {
      if (time < previousTime) backwards++;
      if (!Number.isNaN(time)) previousTime = time;
      for (let c = 0; c < pipelines.length; c++) {
        const value = values[c] as number;
        if (value !== value) continue; // NaN marks a rejected cell
        recorder?.record(c, time, rowIndex);
        const raised = (pipelines[c] as ChannelPipeline).push(value, time);
        if (raised.length > 0) {
          (steadiness[c] as SteadyHistory).noteEvents(raised);
          const list = events[c] as ChannelEvent[];
          for (const event of raised) if (list.length < MAX_EVENTS) list.push(event);
        }
      }
      recorder?.afterRow();
      rowIndex++;
    },
    (line, text) => {
      timeIssues++;
      if (!firstTimeIssue) firstTimeIssue = `${file} row ${line}, column "${layout.timeColumn?.name}": "${text}" is not a time`;
    },
  );
  const separator = layout.delimiter === '\t' ? 'tab' : `"${layout.delimiter}"`;
  if (layout.decimalComma === 'detected') notes.push(`${file}: decimal commas detected (numbers such as 21,375; fields separated by ${separator}): every number is read with a decimal comma`);
  else if (layout.decimalComma === 'asked') notes.push(`${file}: numbers read with a decimal comma (--decimal-comma; fields separated by ${separator})`);
  if (layout.ignored.length > 0) notes.push(`${file}: columns not numeric, ignored: ${layout.ignored.map((n) => `"${n}"`).join(', ')}`);
  if (timeIssues > 0) notes.push(`${firstTimeIssue}${timeIssues > 1 ? ` (${timeIssues} rows in all)` : ''}; those rows have no time`);
  if (backwards > 0) notes.push(`${file}: time goes backwards at ${backwards} ${backwards === 1 ? 'row' : 'rows'}; rate estimates may be off`);
  if (!layout.timeColumn && pipelines.some((p) => p.criteria !== null && p.criteria.ruleCount > 0)) notes.push(`${file}: stability rules need the time of each sample, and the file has no time column (name one with --time-column): no rule can hold`);
  const channels = pipelines.map((pipeline, c) => {
    const snapshot = { ...pipeline.snapshot(), events: events[c] as ChannelEvent[] };
    const column = layout.channels[c];
    snapshot.notes = [...(column ? describeIssues(file, column) : []), ...snapshot.notes];
    if (snapshot.eventCount > MAX_EVENTS) snapshot.notes.push(`${snapshot.eventCount} events: only the first ${MAX_EVENTS} are listed`);
    return settings === undefined ? snapshot : { ...snapshot, unit: settings.unitOf(snapshot.name) };
  });
  if (recorder !== null) notes.push(...recorder.notes);
  return {
    file,
    rows,
    timeColumn: layout.timeColumn?.name ?? null,
    ignoredColumns: layout.ignored,
    notes,
    channels,
    derived: recorder === null ? [] : recorder.finish(channels),
  };
}

function conformityText(c: ChannelSnapshot['conformity']): string {
  if (c === null) return '-';
  if (c.verdict === null) return 'no verdict';
  return `${c.verdict}${c.probability === null ? '' : `, p_c ${c.probability >= 0.9995 ? '>0.999' : c.probability.toFixed(3)}`}`;
}

/** JSON replacer: no NaN or Infinity ever reaches the output. */
export function finiteOrNull(_key: string, value: unknown): unknown {
  return typeof value === 'number' && !Number.isFinite(value) ? null : value;
}

function renderReport(report: AnalyzeReport): string {
  const withRules = report.channels.some((c) => c.readiness !== null);
  const withUnits = report.channels.some((c) => (c as ChannelSnapshot & { unit?: string | null }).unit);
  const header = ['channel', 'verdict', 'state', 'n', 'mean', 'U', ...(withUnits ? ['unit'] : []), 'k', 'u', 'nu_eff', 'tau_int', 'n_eff', 'estimator', 'target', ...(withRules ? ['rules'] : [])];
  const rows = report.channels.map((c) => {
    const rounded = c.mean === null ? { value: '-', uncertainty: null } : roundWithUncertainty(c.mean, c.expandedUncertainty ?? c.standardUncertainty);
    const steady = c.state === 'steady' || c.state === 'precise';
    // The target is judged only on a steady channel: the U of a mean that still moves says
    // nothing about the quantity, so an unsteady or warming channel is never shown as "met".
    let target = '-';
    if (c.target) {
      if (!steady) target = `not judged (${c.state})`;
      else if (c.target.reached) target = 'met';
      else if (c.target.samplesToTarget !== null) target = `${groupDigits(c.target.samplesToTarget)} more${c.target.secondsToTarget !== null ? ` (${formatDuration(c.target.secondsToTarget)})` : ''}`;
      else target = 'out of reach';
    }
    return [
      c.name,
      c.verdict.ready ? 'ready' : `waiting: ${c.verdict.pending[0]?.condition ?? '-'}`,
      c.state,
      groupDigits(c.n),
      rounded.value,
      rounded.uncertainty ?? '-',
      ...(withUnits ? [unitLabel((c as ChannelSnapshot & { unit?: string | null }).unit) || '-'] : []),
      formatSignificant(c.coverageFactor, 3),
      formatSignificant(c.standardUncertainty, 2),
      formatSignificant(c.dof, 3),
      formatSignificant(c.tauInt, 3),
      formatSignificant(c.nEff, 3),
      c.estimator,
      target,
      ...(withRules ? [criteriaCell(c)] : []),
    ];
  });
  const confidence = report.channels[0]?.confidence ?? 0.95;
  // issue 10: the combined uncertainty and conformity, when a channel has more than its Type A part or limits
  const budgets = report.channels.some((c) => (c.combined?.budget.length ?? 0) > 1 || c.conformity !== null);
  if (budgets) {
    header.push('u_c', 'U_c', 'conformity');
    report.channels.forEach((c, i) => (rows[i] as string[]).push(formatSignificant(c.combined?.standardUncertainty ?? null, 2), formatSignificant(c.combined?.expandedUncertainty ?? null, 2), conformityText(c.conformity)));
  }
  const lines = [
    `${report.file}: ${report.rows} rows, ${report.channels.length} channel${report.channels.length === 1 ? '' : 's'}${report.timeColumn ? `, time from "${report.timeColumn}"` : ''}`,
    '',
    textTable(header, rows),
    '',
    `U = k * u at ${(confidence * 100).toPrecision(4).replace(/\.?0+$/, '')} % coverage; k from Student's t at nu_eff; u from the estimator named in each row.`,
  ];
  if (budgets) {
    lines.push(`u_c: the Type A u combined with the Type B components (GUM 5.1.2); U_c = k u_c with k at the Welch-Satterthwaite nu_eff; conformity: the decision rule's outcome with the conformance probability p_c (JCGM 106).`, '', 'Uncertainty budgets (contribution c u, share of u_c^2):');
    for (const c of report.channels) {
      if (!c.combined) continue;
      lines.push(`  ${c.name}: ${c.combined.budget.map((b) => `${b.component}${b.proposed ? ' (proposed)' : ''} ${formatSignificant(b.contribution, 2)}${b.share === null ? '' : ` (${(100 * b.share).toFixed(1)} %)`}`).join('; ')}`);
      const stop = c.combined.stopping;
      if (stop && !stop.stop) lines.push(`    stopping rule: ${c.verdict.pending.find((p) => p.condition === 'stopping')?.message ?? 'not met'}`);
      if (stop?.stop) lines.push(`    stopping rule met: ${stop.reason === 'dominance' ? `u_A <= ${stop.fraction} u_c` : stop.target?.basis === 'type-a' ? 'Type A target' : 'combined target'}`);
    }
  }
  const waiting = report.channels.filter((c) => !c.verdict.ready);
  if (waiting.length > 0) {
    lines.push('', 'Not ready yet:');
    for (const c of waiting) for (const p of c.verdict.pending) lines.push(`  - ${c.name}: ${p.condition}: ${p.message}`);
  }
  lines.push(...criteriaLines(report.channels));
  const reasons = report.channels.filter((c) => c.mean !== null && c.n >= 2).map((c) => `  - ${c.name}: ${c.estimator}, ${c.estimatorReason}`);
  if (reasons.length > 0) lines.push('', 'Estimators:', ...reasons);
  if (report.derived.length > 0) lines.push('', ...renderDerived(report.derived));
  const notes = [...report.notes, ...report.channels.flatMap((c) => c.notes.map((note) => `${c.name}: ${note}`)), ...report.derived.flatMap((d) => d.notes.map((note) => `${d.name}: ${note}`))];
  if (notes.length > 0) lines.push('', 'Notes:', ...notes.map((note) => `  - ${note}`));
  lines.push('', CAUTION);
  return `${lines.join('\n')}\n`;
}
