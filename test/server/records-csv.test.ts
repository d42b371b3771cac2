import { describe, expect, it } from 'vitest';
import { recordsCsv, RECORDS_CSV_COLUMNS, setPointsCell } from '../../src/server/records-csv.js';
import { RECORD_CAUTION } from '../../src/engine/test-point-record.js';

// The one CSV of every record (GET /api/records.csv), from hand-made records of an invented rig
// (a water bath WB-4): the rows, their order, the cells of a provisional entry and of a derived
// result, RFC 4180 quoting, and the caution in every row. The numbers are invented, not check values.

const entry = (channel: string, mean: number, extra: Record<string, unknown> = {}) => ({
  channel,
  unit: 'degC',
  mean,
  standardUncertainty: 0.002,
  dof: 40,
  coverageFactor: 2.02,
  expandedUncertainty: 0.00404,
  confidence: 0.95,
  n: 600,
  state: 'steady',
  statement: `${channel} = ${mean} degC`,
  ...extra,
});

const derived = { name: 'wb4.difference', unit: 'K', value: 0.125, standardUncertainty: 0.003, dof: 30, coverageFactor: 2.04, expandedUncertainty: 0.0061, confidence: 0.95, rows: 590, atTarget: true, provisional: false, provisionalReasons: [], statement: 'wb4.difference = 0.125 K', budget: [], covarianceTerms: [] };

describe('recordsCsv', () => {
  it('a row per channel and derived result of each record, test points and records in order, the caution in every row', () => {
    const csv = recordsCsv([
      {
        testPoint: { id: 'tp-1', name: 'bath at 20, "first"', setPoints: { 'wb4.bath': 20 } },
        records: [
          { id: 1, createdMs: 1, body: { testPoint: { id: 'tp-1', name: 'x' }, recordNumber: 'tp-1/1', kind: 'ready', createdAt: '2026-01-01T00:00:00.000Z', entries: [entry('wb4.bath', 20.001), entry('wb4.probe', 20.004)], derived: [derived], caution: RECORD_CAUTION } },
          { id: 2, createdMs: 2, body: { testPoint: { id: 'tp-1', name: 'x' }, recordNumber: 'tp-1/2', kind: 'stopped', createdAt: '2026-01-01T00:10:00.000Z', entries: [entry('wb4.bath', 20.002)], derived: [], caution: RECORD_CAUTION } },
        ],
      },
      { testPoint: { id: 'tp-2', name: '=cmd', setPoints: {} }, records: [{ id: 3, createdMs: 3, body: { recordNumber: 'tp-2/1', kind: 'stopped', createdAt: '2026-01-01T01:00:00.000Z', entries: [entry('wb4.bath', 40.5, { provisional: true, provisionalReasons: ['steady state not confirmed yet', 'target not met'] })], derived: [], caution: RECORD_CAUTION } }] },
      // A stored body without entries (another version's record) is skipped, not a broken row.
      { testPoint: { id: 'tp-3', name: 'old' }, records: [{ id: 4, createdMs: 4, body: { kind: 'ready' } }] },
    ]);
    expect(csv.endsWith('\r\n')).toBe(true);
    const lines = csv.slice(0, -2).split('\r\n');
    expect(lines[0]).toBe(RECORDS_CSV_COLUMNS.join(','));
    expect(lines).toHaveLength(1 + 3 + 1 + 1);
    const caution = `"${RECORD_CAUTION}"`;
    for (const line of lines.slice(1)) expect(line.endsWith(`,${caution}`)).toBe(true);
    expect(lines[1]?.startsWith('tp-1,"bath at 20, ""first""",wb4.bath=20,tp-1/1,ready,2026-01-01T00:00:00.000Z,channel,wb4.bath,degC,20.001,0.002,40,2.02,0.00404,0.95,600,steady,,,')).toBe(true);
    expect(lines[2]).toContain(',channel,wb4.probe,degC,20.004,');
    expect(lines[3]).toContain(',derived,wb4.difference,K,0.125,0.003,30,2.04,0.0061,0.95,590,at target,false,,');
    expect(lines[4]?.startsWith('tp-1,"bath at 20, ""first""",wb4.bath=20,tp-1/2,stopped,')).toBe(true);
    // A name that a spreadsheet would run as a formula is prefixed; a provisional entry says why.
    expect(lines[5]?.startsWith("tp-2,'=cmd,,tp-2/1,stopped,")).toBe(true);
    expect(lines[5]).toContain(',steady,true,steady state not confirmed yet; target not met,');
  });

  it('set points as channel=value pairs', () => {
    expect(setPointsCell({ 'wb4.bath': 20, 'wb4.flow': 1.5 })).toBe('wb4.bath=20 wb4.flow=1.5');
    expect(setPointsCell(undefined)).toBe('');
  });
});
