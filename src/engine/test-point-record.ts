import type { ChannelSnapshot } from './channel-pipeline.js';
import type { BootstrapCheck } from './derived/bootstrap-cross-check.js';
import { csvText } from './csv-text.js';
import type { CriterionEvidence, ReadinessPolicy } from './criteria/readiness-policy.js';

/**
 * The stability rules in a record: the policy, whether the channel was ready under it, and per rule
 * whether it held over the whole recorded window (from the window's first sample to its last), with
 * its value, tolerance and margin when the record was made and its smallest margin since it began
 * to be met (src/engine/criteria/readiness-policy.ts).
 */
export interface RecordCriteria {
  policy: ReadinessPolicy;
  ready: boolean;
  statisticalReady: boolean;
  rulesReady: boolean;
  rules: CriterionEvidence[];
}
import type { CombinedReport, ConformityReport } from './channel-combined.js';

/**
 * The record of a test point: per channel the result as a test report or calibration certificate
 * states it, with the evidence behind it. Exported as JSON and as CSV.
 */
export interface RecordEntry {
  channel: string;
  unit: string | null;
  mean: number | null;
  standardUncertainty: number | null;
  dof: number | null;
  coverageFactor: number | null;
  expandedUncertainty: number | null;
  confidence: number;
  n: number;
  nEff: number | null;
  tauInt: number | null;
  estimator: string;
  /** Why that estimator (the rule's reason, in words). */
  estimatorReason: string;
  state: string;
  /** The channel's verdict when the record was made: "ready to record", or what it still waited for. */
  verdict: string;
  steadyStart: number | null;
  excluded: number;
  windowStartIndex: number;
  windowEndIndex: number;
  windowStartTime: string | null;
  windowEndTime: string | null;
  tests: {
    heidelbergerWelchPassed: boolean | null;
    heidelbergerWelchPValue: number | null;
    gewekeZ: number | null;
    kpssStatistic: number | null;
    kpssPassed: boolean | null;
  };
  statement: string;
  /** Stationary-bootstrap cross-check of u (and of the median and a trimmed mean), when run. */
  bootstrap?: BootstrapCheck | null;
  /** Samples missing within the window (gap-detector.ts; the daemon adds it): gaps, samples, the first 100 gaps. */
  gaps?: { count: number; missingSamples: number; list: { from: string; to: string; missing: number; source: 'time-stamps' | 'sequence' }[] };
  /** The stability rules over the recorded window; null when the channel has none. */
  criteria: RecordCriteria | null;
  /** Type A with the Type B components: u_c, nu_eff, k, U and the budget (issue 10). */
  combined?: CombinedReport | null;
  /** Conformity with the stated decision rule and the conformance probability. */
  conformity?: ConformityReport | null;
  /**
   * The channel was not ready when the record was made (never steady, a break, a target or the
   * stopping rule not met): the record calls the result provisional and says why, and the
   * statement is not styled as a GUM statement.
   */
  provisional?: boolean;
  provisionalReasons?: string[];
  /**
   * What the report shows of this entry, frozen when the record was made (issue 10: the record and
   * its report describe the same window): the window's snapshot (estimators, evidence, ACF, Allan
   * deviation; its event list left out), the CUSUM sums and a decimated trace of the window.
   */
  evidence?: RecordEvidence;
}

/** A record's trace: the recorded window's samples (with the warm-up before it, when the store still had it), decimated. */
export interface RecordTrace {
  /** Channel sample index of each point kept. */
  indices: number[];
  /** Seconds since the epoch (null when unknown). */
  times: (number | null)[];
  values: number[];
  windowStartIndex: number;
  originIndex: number;
  /** Samples the trace stood for before decimation. */
  samples: number;
  /** How it was thinned, or null when every sample is kept. */
  decimation: string | null;
}

export interface RecordEvidence {
  snapshot: ChannelSnapshot;
  cusum: { blockSize: number; decisionInterval: number; upper: number[]; lower: number[]; alarmed?: boolean } | null;
  trace: RecordTrace | null;
}

/** Most points a record's trace keeps (pairs of the lowest and highest sample of equal runs). */
export const RECORD_TRACE_POINTS = 1200;

/**
 * Thins a trace of consecutive samples to at most `maxPoints`: the samples are cut into equal runs
 * and each run keeps its lowest and its highest sample, in their order, so the drawn envelope keeps
 * every spike and step (a mean per run would hide them). Runs never straddle the window's start.
 */
export function decimateTrace(trace: { firstIndex: number; times: (number | null)[]; values: number[]; windowStartIndex: number; originIndex: number }, maxPoints = RECORD_TRACE_POINTS): RecordTrace {
  const n = trace.values.length;
  const base = { windowStartIndex: trace.windowStartIndex, originIndex: trace.originIndex, samples: n };
  if (n <= maxPoints) return { ...base, indices: trace.values.map((_, i) => trace.firstIndex + i), times: [...trace.times], values: [...trace.values], decimation: null };
  const run = Math.ceil((2 * n) / maxPoints);
  const indices: number[] = [];
  const times: (number | null)[] = [];
  const values: number[] = [];
  const keep = (i: number) => {
    indices.push(trace.firstIndex + i);
    times.push(trace.times[i] ?? null);
    values.push(trace.values[i] as number);
  };
  const split = Math.min(n, Math.max(0, trace.windowStartIndex - trace.firstIndex));
  for (const [from, to] of [[0, split], [split, n]] as const) {
    for (let start = from; start < to; start += run) {
      const end = Math.min(to, start + run);
      let lo = start;
      let hi = start;
      for (let i = start + 1; i < end; i++) {
        if ((trace.values[i] as number) < (trace.values[lo] as number)) lo = i;
        if ((trace.values[i] as number) > (trace.values[hi] as number)) hi = i;
      }
      keep(Math.min(lo, hi));
      if (hi !== lo) keep(Math.max(lo, hi));
    }
  }
  return { ...base, indices, times, values, decimation: `the lowest and highest sample of each run of ${run}` };
}

export interface TestPointRecord {
  /** The test point, with its times in ISO 8601 (UTC, zone Z). */
  testPoint: { id: string; name: string; startedAt?: string; readyAt?: string | null; stoppedAt?: string | null; setPoints?: Record<string, number> };
  /** The rig as the configuration names it (null parts when it does not). */
  rig?: { id: string | null; name: string | null };
  /** "<test point id>/<n>": 1 for the first record of the test point, 2 for a stop record after a ready one. */
  recordNumber?: string;
  /** Some entry was not ready when the record was made (each entry says why). */
  provisional?: boolean;
  kind: 'ready' | 'stopped';
  createdAt: string;
  entries: RecordEntry[];
  derived: unknown[];
  caution: string;
}

export const RECORD_CAUTION =
  'plateau informs measurement decisions; it is not a safety system and not a substitute for an accredited calibration procedure. Do not use its alerts as interlocks; follow the rig\'s own safety procedures and defer to local codes, accredited calibration procedures and licensed practice.';

function isoOrNull(seconds: number | null): string | null {
  return seconds === null || !Number.isFinite(seconds) ? null : new Date(seconds * 1000).toISOString();
}

export function recordEntry(snapshot: ChannelSnapshot, unit: string | null): RecordEntry {
  const tests = snapshot.stationarity?.tests;
  return {
    channel: snapshot.name,
    unit,
    mean: snapshot.mean,
    standardUncertainty: snapshot.standardUncertainty,
    dof: snapshot.dof,
    coverageFactor: snapshot.coverageFactor,
    expandedUncertainty: snapshot.expandedUncertainty,
    confidence: snapshot.confidence,
    n: snapshot.n,
    nEff: snapshot.nEff,
    tauInt: snapshot.tauInt,
    estimator: snapshot.estimator,
    estimatorReason: snapshot.estimatorReason,
    state: snapshot.state,
    verdict: snapshot.verdict.summary,
    steadyStart: snapshot.stationarity?.warmupEnd ?? null,
    excluded: snapshot.excluded,
    windowStartIndex: snapshot.window.startIndex,
    windowEndIndex: snapshot.window.endIndex,
    windowStartTime: isoOrNull(snapshot.window.startTime),
    windowEndTime: isoOrNull(snapshot.window.endTime),
    tests: {
      heidelbergerWelchPassed: tests?.heidelbergerWelch?.passed ?? null,
      heidelbergerWelchPValue: tests?.heidelbergerWelch?.pValue ?? null,
      gewekeZ: tests?.geweke?.statistic ?? null,
      kpssStatistic: tests?.kpss?.statistic ?? null,
      kpssPassed: tests?.kpss?.passed ?? null,
    },
    statement: entryStatement(snapshot, unit),
    criteria: recordCriteria(snapshot),
    combined: snapshot.combined,
    conformity: snapshot.conformity,
    provisional: !snapshot.verdict.ready,
    provisionalReasons: snapshot.verdict.pending.map((p) => p.message),
  };
}

function recordCriteria(snapshot: ChannelSnapshot): RecordCriteria | null {
  const r = snapshot.readiness;
  return r === null ? null : { policy: r.policy, ready: r.ready, statisticalReady: r.statistical.ready, rulesReady: r.rules.ready, rules: r.rules.evidence };
}

/** The rules of a record entry in one cell: "name: held over the window|not over the whole window|does not hold, value v, tolerance t, margin m". */
export function criteriaCell(criteria: RecordCriteria | null): string | null {
  if (criteria === null) return null;
  const number = (x: number | null) => (x === null ? 'n/a' : String(+x.toPrecision(4)));
  return criteria.rules
    .map((e) => `${e.name}: ${e.heldOverWindow ? 'held over the window' : e.holds ? 'holds, not over the whole window' : 'does not hold'}, value ${number(e.value)}, tolerance ${number(e.tolerance)}, margin ${number(e.margin)}`)
    .join('; ');
}

/**
 * The statement of a record entry: the GUM 7.2.4 wording for a ready channel, of the combined
 * result when Type B components are configured (the Type A one otherwise); for a channel that was
 * not ready, a provisional line that says why and is not styled as a statement of a result.
 */
function entryStatement(snapshot: ChannelSnapshot, unit: string | null): string {
  const c = snapshot.combined;
  const withTypeB = c !== null && c.budget.some((b) => b.evaluation === 'B');
  if (!snapshot.verdict.ready) {
    const units = unit ? ` ${unit}` : '';
    const value = withTypeB ? c.value : snapshot.mean;
    const u = withTypeB ? c.standardUncertainty : snapshot.standardUncertainty;
    const figures = value === null ? 'no value' : `value ${value}${units}${u === null ? '' : `, standard uncertainty ${u.toPrecision(2)}${units}`}`;
    return `${snapshot.name}: PROVISIONAL, not a measurement result to report (${snapshot.verdict.pending.map((p) => p.message).join('; ')}); ${figures}`;
  }
  if (withTypeB) return gumStatement(snapshot.name, c.value, c.standardUncertainty, c.expandedUncertainty, c.coverageFactor, c.dof ?? Number.POSITIVE_INFINITY, c.confidence, unit);
  return gumStatement(snapshot.name, snapshot.mean, snapshot.standardUncertainty, snapshot.expandedUncertainty, snapshot.coverageFactor, snapshot.dof, snapshot.confidence, unit);
}

/**
 * The result in the wording of JCGM 100:2008, 7.2.4: the estimate, the expanded uncertainty, the
 * coverage factor with the effective degrees of freedom it came from, and the coverage probability.
 */
export function gumStatement(name: string, mean: number | null, u: number | null, expanded: number | null, k: number | null, dof: number | null, confidence: number, unit: string | null): string {
  const units = unit ? ` ${unit}` : '';
  if (mean === null) return `${name}: no samples`;
  if (u === null || expanded === null || k === null || dof === null) return `${name} = ${mean}${units}: no uncertainty can be stated (too few samples, or no spread)`;
  const rounded = roundPair(mean, expanded);
  const level = `${(confidence * 100).toPrecision(4).replace(/\.?0+$/, '')} %`;
  return `${name} = (${rounded.value} ± ${rounded.uncertainty})${units}, where the number following ± is the expanded uncertainty U = k·u with u = ${u.toPrecision(2)}${units} and coverage factor k = ${k.toFixed(2)}, based on the t-distribution for ν_eff = ${dof >= 1e6 ? '∞' : dof.toPrecision(3)} effective degrees of freedom, which defines an interval estimated to have a coverage probability of ${level}`;
}

function roundPair(value: number, uncertainty: number): { value: string; uncertainty: string } {
  if (!(uncertainty > 0)) return { value: String(value), uncertainty: '0' };
  const exponent = Math.floor(Math.log10(uncertainty)) - 1;
  const decimals = Math.max(0, Math.min(20, -exponent));
  const scale = 10 ** exponent;
  return { value: (Math.round(value / scale) * scale).toFixed(decimals), uncertainty: (Math.round(uncertainty / scale) * scale).toFixed(decimals) };
}

const CSV_COLUMNS: (keyof RecordEntry)[] = ['channel', 'unit', 'mean', 'standardUncertainty', 'dof', 'coverageFactor', 'expandedUncertainty', 'confidence', 'n', 'nEff', 'tauInt', 'estimator', 'state', 'verdict', 'steadyStart', 'excluded', 'windowStartIndex', 'windowEndIndex', 'windowStartTime', 'windowEndTime'];

/** The CSV columns of the combined uncertainty and conformity, in records of channels and of derived results. */
export const COMBINED_CSV_COLUMNS = ['combinedStandardUncertainty', 'combinedDof', 'combinedCoverageFactor', 'combinedExpandedUncertainty', 'decisionRule', 'lowerLimit', 'upperLimit', 'guardBand', 'conformity', 'conformanceProbability'];

/** The cells of COMBINED_CSV_COLUMNS for one record entry (null where not configured). */
export function combinedCells(entry: { combined?: CombinedReport | null; conformity?: ConformityReport | null }): unknown[] {
  const { combined, conformity } = entry;
  return [
    combined?.standardUncertainty ?? null,
    combined?.dof ?? null,
    combined?.coverageFactor ?? null,
    combined?.expandedUncertainty ?? null,
    conformity?.rule ?? null,
    conformity?.lower ?? null,
    conformity?.upper ?? null,
    conformity?.guardBand ?? null,
    conformity?.verdict ?? null,
    conformity?.probability ?? null,
  ];
}

/** The rig in one cell: "id (name)", either alone, or null when the configuration names none. */
export function rigText(rig: TestPointRecord['rig']): string | null {
  if (!rig || (rig.id === null && rig.name === null)) return null;
  if (rig.id !== null && rig.name !== null) return `${rig.id} (${rig.name})`;
  return rig.id ?? rig.name;
}

/**
 * CSV (RFC 4180) of a record's entries; full-precision numbers, one row per channel; then the
 * combined uncertainty, the conformity outcome with its decision rule, whether the entry is
 * provisional and why, and the caution (in every row, so that no extract of the file loses it).
 */
export function recordCsv(record: TestPointRecord): string {
  const header = [...CSV_COLUMNS, 'heidelbergerWelchPassed', 'gewekeZ', 'kpssStatistic', 'statement', 'criteria', ...COMBINED_CSV_COLUMNS, 'provisional', 'provisionalReasons', 'rig', 'testPoint', 'recordNumber', 'recordKind', 'recordCreatedAt', 'caution'];
  const rows = record.entries.map((entry) => [
    ...CSV_COLUMNS.map((key) => entry[key] as unknown),
    entry.tests.heidelbergerWelchPassed,
    entry.tests.gewekeZ,
    entry.tests.kpssStatistic,
    entry.statement,
    criteriaCell(entry.criteria ?? null),
    ...combinedCells(entry),
    entry.provisional ?? null,
    (entry.provisionalReasons ?? []).join('; '),
    rigText(record.rig),
    `${record.testPoint.id} (${record.testPoint.name})`,
    record.recordNumber ?? null,
    record.kind,
    record.createdAt,
    record.caution,
  ]);
  return csvText(header, rows);
}

