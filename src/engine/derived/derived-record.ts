import { SeededRandom } from '../../core/random/seeded-random.js';
import { combinedCells, COMBINED_CSV_COLUMNS, gumStatement, RECORD_CAUTION } from '../test-point-record.js';
import { derivedBootstrapCheck, seedFrom, type BootstrapCheck } from './bootstrap-cross-check.js';
import type { DerivedEngine, DerivedSnapshot } from './derived-engine.js';
import { derivedMonteCarlo, type DerivedMonteCarloResult } from './derived-monte-carlo.js';
import { csvText } from '../csv-text.js';

/**
 * A derived result as it is reported: the engine's snapshot, the verdict (at target only when the
 * uncertainty meets the target and every input channel is steady), and, for records and
 * `plateau analyze`, the GUM statement (JCGM 100:2008, 7.2.4 wording of test-point-record.ts), the
 * Monte Carlo check (JCGM 101) and the bootstrap check. One builder for the daemon's records and
 * for analyze, so that both say the same thing about the same samples.
 */
export const STEADY_STATES: ReadonlySet<string> = new Set(['steady', 'precise']);

export interface DerivedVerdict {
  /** null without a target. */
  atTarget: boolean | null;
  /** State of each input channel (warming, steady, precise, unsteady, stale, no data). */
  inputStates: Record<string, string>;
  /** Why a result with a target is not at target (empty when it is, or has none). */
  waitingFor: string[];
}

export interface DerivedReportEntry extends DerivedSnapshot, DerivedVerdict {
  statement: string;
  /**
   * No value yet, or a target not met (its inputs not steady, or U above it) when the entry was
   * made: the statement says PROVISIONAL and why instead of taking the GUM form (issue 10).
   */
  provisional: boolean;
  provisionalReasons: string[];
  monteCarlo: DerivedMonteCarloResult | { error: string } | null;
  bootstrap: BootstrapCheck | null;
}

/** `reached`: the uncertainty meets the target (the daemon passes its flag with hysteresis). */
export function derivedVerdict(snapshot: DerivedSnapshot, hasTarget: boolean, inputStates: Record<string, string>, reached: boolean): DerivedVerdict {
  const waitingFor: string[] = [];
  let atTarget: boolean | null = null;
  if (hasTarget) {
    for (const [channel, state] of Object.entries(inputStates)) if (!STEADY_STATES.has(state)) waitingFor.push(`${channel} is ${state}`);
    if (!reached) waitingFor.push(snapshot.target === null ? 'no uncertainty yet' : 'uncertainty above the target');
    atTarget = waitingFor.length === 0;
  }
  return { atTarget, inputStates, waitingFor };
}

/** The GUM 7.2.4 statement of a derived result: of the combined result when Type B components or constants enter it. */
export function derivedStatement(snapshot: DerivedSnapshot): string {
  const c = snapshot.combined;
  if (c !== null && c.budget.some((b) => b.evaluation === 'B')) return gumStatement(snapshot.name, c.value, c.standardUncertainty, c.expandedUncertainty, c.coverageFactor, c.dof ?? Number.POSITIVE_INFINITY, c.confidence, snapshot.unit);
  return gumStatement(snapshot.name, snapshot.value, snapshot.standardUncertainty, snapshot.expandedUncertainty, snapshot.coverageFactor, snapshot.dof, snapshot.confidence, snapshot.unit);
}

/** The statement of an entry with its verdict: PROVISIONAL with the reasons, or the GUM statement (records, analyze, the live views). */
export function derivedEntryStatement(snapshot: DerivedSnapshot, verdict: Pick<DerivedVerdict, 'atTarget' | 'waitingFor'>): { statement: string; provisional: boolean; provisionalReasons: string[] } {
  const reasons = !snapshot.ready ? ['no value with an uncertainty yet (too few common rows of its inputs)'] : verdict.atTarget === false ? verdict.waitingFor : [];
  if (reasons.length === 0) return { statement: derivedStatement(snapshot), provisional: false, provisionalReasons: [] };
  return { statement: `${snapshot.name}: PROVISIONAL, not a measurement result to report (${reasons.join('; ')}); ${snapshot.value === null ? 'no value' : `value ${snapshot.value}${snapshot.unit ? ` ${snapshot.unit}` : ''}`}`, provisional: true, provisionalReasons: reasons };
}

export interface DerivedReportOptions {
  /** Cap on the Monte Carlo trials; 0 skips the Monte Carlo check. */
  monteCarloTrials: number;
  /** Run the bootstrap check (default true). */
  bootstrap?: boolean;
}

export function derivedReportEntry(engine: DerivedEngine | null, snapshot: DerivedSnapshot, verdict: DerivedVerdict, options: DerivedReportOptions): DerivedReportEntry {
  const distribution = engine?.inputDistribution(snapshot.name) ?? null;
  const monteCarlo =
    distribution !== null && snapshot.ready && options.monteCarloTrials > 0
      ? derivedMonteCarlo(distribution, snapshot, { random: new SeededRandom(seedFrom(`${snapshot.name}:${snapshot.rows}`)), maxTrials: options.monteCarloTrials })
      : null;
  const bootstrap = engine !== null && snapshot.ready && options.bootstrap !== false ? derivedBootstrapCheck(engine, snapshot) : null;
  const notes = [...snapshot.notes];
  if (monteCarlo !== null && 'validated' in monteCarlo && monteCarlo.validated === false) notes.push(monteCarlo.note);
  if (monteCarlo !== null && 'error' in monteCarlo) notes.push(monteCarlo.error);
  if (bootstrap !== null && bootstrap.agrees === false) notes.push(bootstrap.note);
  const { statement, provisional, provisionalReasons } = derivedEntryStatement(snapshot, verdict);
  return {
    ...snapshot,
    ...verdict,
    notes,
    provisional,
    provisionalReasons,
    statement,
    monteCarlo,
    bootstrap,
  };
}

const CSV_COLUMNS = ['name', 'unit', 'value', 'standardUncertainty', 'dof', 'coverageFactor', 'expandedUncertainty', 'confidence', 'estimator', 'rows', 'multivariateEss', 'atTarget'] as const;

/**
 * CSV (RFC 4180) of derived record entries, one row per result, for the exports beside the
 * channels' recordCsv: the columns above, then the Monte Carlo interval and validation, whether the
 * bootstrap agrees, the budget as "channel:share" pairs, and the statement.
 */
export function derivedRecordCsv(entries: DerivedReportEntry[]): string {
  const header = [...CSV_COLUMNS, 'monteCarloLow', 'monteCarloHigh', 'monteCarloValidated', 'bootstrapAgrees', 'budget', 'statement', ...COMBINED_CSV_COLUMNS, 'provisional', 'caution'];
  const rows = entries.map((entry) => {
    const mc = entry.monteCarlo !== null && 'validated' in entry.monteCarlo ? entry.monteCarlo : null;
    return [
      ...CSV_COLUMNS.map((key) => entry[key] as unknown),
      mc?.low ?? null,
      mc?.high ?? null,
      mc?.validated ?? null,
      entry.bootstrap?.agrees ?? null,
      entry.budget.map((b) => `${b.channel}:${b.share === null ? '' : b.share.toPrecision(4)}`).join(' '),
      entry.statement,
      ...combinedCells(entry),
      entry.provisional ?? null,
      RECORD_CAUTION,
    ];
  });
  return csvText(header, rows);
}

