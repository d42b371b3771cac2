import type { DerivedReportEntry } from '../engine/derived/derived-record.js';

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
