import { combinedCells, COMBINED_CSV_COLUMNS, RECORD_CAUTION, type RecordEntry, type TestPointRecord } from '../engine/test-point-record.js';
import { csvText } from '../engine/csv-text.js';
import { recordDerivedEntries } from './record-derived.js';

/**
 * Every record of every test point in one CSV (RFC 4180; GET /api/records.csv): one row per
 * channel and per derived result of each record, test points in the order they were created and
 * their records oldest first, so that the results across set points read down one table. Each row
 * names its test point, its set points, the record (number, kind, time), the quantity, then the
 * statement's numbers (mean or value, u, nu_eff, k, U, coverage probability, n or rows), whether
 * the result is provisional and why, the combined uncertainty and conformity cells of the record
 * CSVs, the statement, and the caution (in every row, as in the record CSVs: no extract loses it).
 */
export interface RecordsOfTestPoint {
  testPoint: { id: string; name: string; setPoints?: Record<string, number> };
  records: { id: number; createdMs: number; body: unknown }[];
}

export const RECORDS_CSV_COLUMNS = [
  'testPoint',
  'testPointName',
  'setPoints',
  'record',
  'recordKind',
  'recordedAt',
  'quantityKind',
  'quantity',
  'unit',
  'value',
  'standardUncertainty',
  'dof',
  'coverageFactor',
  'expandedUncertainty',
  'confidence',
  'samples',
  'state',
  'provisional',
  'provisionalReasons',
  ...COMBINED_CSV_COLUMNS,
  'statement',
  'caution',
];

/** Set points as "channel=value" pairs separated by spaces ('' without any). */
export function setPointsCell(setPoints: Record<string, number> | undefined): string {
  return Object.entries(setPoints ?? {})
    .map(([channel, value]) => `${channel}=${value}`)
    .join(' ');
}

/** A stored record body, when it has the fields read here (a record of another version may lack some: skipped). */
function asRecord(body: unknown): TestPointRecord | null {
  if (body === null || typeof body !== 'object') return null;
  const record = body as Partial<TestPointRecord>;
  return Array.isArray(record.entries) && typeof record.createdAt === 'string' && typeof record.kind === 'string' ? (record as TestPointRecord) : null;
}

export function recordsCsv(points: RecordsOfTestPoint[]): string {
  const rows: unknown[][] = [];
  for (const { testPoint, records } of points) {
    const setPoints = setPointsCell(testPoint.setPoints);
    records.forEach((stored, index) => {
      const record = asRecord(stored.body);
      if (record === null) return;
      const head = [testPoint.id, testPoint.name, setPoints, record.recordNumber ?? `${testPoint.id}/${index + 1}`, record.kind, record.createdAt];
      for (const entry of record.entries as RecordEntry[]) {
        rows.push([
          ...head,
          'channel',
          entry.channel,
          entry.unit,
          entry.mean,
          entry.standardUncertainty,
          entry.dof,
          entry.coverageFactor,
          entry.expandedUncertainty,
          entry.confidence,
          entry.n,
          entry.state,
          entry.provisional ?? null,
          (entry.provisionalReasons ?? []).join('; '),
          ...combinedCells(entry),
          entry.statement,
          record.caution ?? RECORD_CAUTION,
        ]);
      }
      for (const entry of recordDerivedEntries(record.derived)) {
        rows.push([
          ...head,
          'derived',
          entry.name,
          entry.unit,
          entry.value,
          entry.standardUncertainty,
          entry.dof,
          entry.coverageFactor,
          entry.expandedUncertainty,
          entry.confidence,
          entry.rows,
          entry.atTarget === true ? 'at target' : null,
          entry.provisional ?? null,
          (entry.provisionalReasons ?? []).join('; '),
          ...combinedCells(entry),
          entry.statement,
          record.caution ?? RECORD_CAUTION,
        ]);
      }
    });
  }
  return csvText(RECORDS_CSV_COLUMNS, rows);
}
