import type { Daemon } from '../daemon/daemon.js';
import type { DerivedView } from '../daemon/derived-results.js';
import type { DerivedReportEntry } from '../engine/derived/derived-record.js';
import { gumStatement } from '../engine/test-point-record.js';

/**
 * Derived results as the HTTP API and the WebSocket send them: the daemon's view of each (the
 * engine's snapshot and the verdict, src/daemon/derived-results.ts) with its statement in the
 * wording of JCGM 100:2008 7.2.4 (gumStatement, as records and `plateau analyze` state it). The
 * field names are those of the `derived` entries of `plateau analyze --json` (DerivedReportEntry);
 * the two cross-checks of a record, `monteCarlo` and `bootstrap`, are left out: they cost about
 * 0.1-0.4 s per result (src/daemon/derived-results.ts, RECORD_MONTE_CARLO_TRIALS) and are computed
 * when a test point writes its record, which the report and the record exports show.
 * Cost: one snapshot per result (about 0.3 ms each when its inputs have new rows, else cached).
 */
export type LiveDerived = DerivedView & { statement: string };

/** The live fields: the entry of analyze --json without the record-only checks. */
export type LiveDerivedKey = Exclude<keyof DerivedReportEntry, 'monteCarlo' | 'bootstrap'>;

export function liveDerived(daemon: Daemon): LiveDerived[] {
  return daemon.derived.snapshots().map(withStatement);
}

/** One derived result by name; null when no derived result has that name. */
export function liveDerivedByName(daemon: Daemon, name: string): LiveDerived | null {
  if (!daemon.derived.names().includes(name)) return null;
  const view = daemon.derived.snapshots().find((v) => v.name === name);
  return view === undefined ? null : withStatement(view);
}

function withStatement(view: DerivedView): LiveDerived {
  return { ...view, statement: gumStatement(view.name, view.value, view.standardUncertainty, view.expandedUncertainty, view.coverageFactor, view.dof, view.confidence, view.unit) };
}

/**
 * The derived entries of a stored record, checked for the fields the CSV and the report read (a
 * record written by another version may lack some): the others are skipped.
 */
export function recordDerivedEntries(derived: unknown): DerivedReportEntry[] {
  if (!Array.isArray(derived)) return [];
  return derived.filter((entry): entry is DerivedReportEntry => {
    if (entry === null || typeof entry !== 'object') return false;
    const e = entry as Record<string, unknown>;
    return typeof e.name === 'string' && Array.isArray(e.budget) && Array.isArray(e.covarianceTerms) && typeof e.confidence === 'number';
  });
}
