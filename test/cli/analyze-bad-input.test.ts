import { describe, expect, it } from 'vitest';
import { assertNoNonFinite, runCli, tempFile } from '../helpers/cli.js';

// Every bad input of the analyze command gets one clear line naming the file (and row and column
// where there is one), or a per-channel note; never a stack trace, never NaN in the output.

function noStackTrace(text: string) {
  expect(text).not.toMatch(/\n\s+at .+\(.+:\d+:\d+\)/);
  expect(text).not.toMatch(/node:internal/);
}

describe('plateau analyze: bad input', () => {
  it('a missing file: exit 2 and one line naming it', () => {
    const r = runCli(['analyze', '/nonexistent/bench-7.csv']);
    expect(r.status).toBe(2);
    expect(r.stderr.trim()).toBe('plateau: /nonexistent/bench-7.csv: no such file');
    noStackTrace(r.stderr);
  });

  it('no numeric column: exit 2, naming the file and its columns', () => {
    const file = tempFile('labels.csv', 'operator,remark\nkim,ok\nlee,warm\n');
    const r = runCli(['analyze', file]);
    expect(r.status).toBe(2);
    expect(r.stderr.trim()).toBe(`plateau: ${file}: no numeric column found (columns: operator, remark)`);
  });

  it('an empty file and a header without rows: exit 2 with the reason', () => {
    const empty = tempFile('empty.csv', '');
    expect(runCli(['analyze', empty]).stderr.trim()).toBe(`plateau: ${empty}: the file is empty (a header row is needed)`);
    const header = tempFile('header.csv', 'time,bath_degC\n');
    const r = runCli(['analyze', header]);
    expect(r.status).toBe(2);
    expect(r.stderr.trim()).toBe(`plateau: ${header}: no data rows after the header`);
  });

  it('empty, non-numeric, NaN and Infinity cells: skipped with a note naming file, row and column', () => {
    const rows = ['time,probe_a_degC,probe_b_degC'];
    for (let i = 0; i < 60; i++) rows.push(`${i},${(21 + 0.01 * Math.sin(i)).toFixed(4)},${(22 + 0.02 * Math.cos(i)).toFixed(4)}`);
    rows[5] = '4,,22.01';
    rows[9] = '8,21.003,n/a';
    rows[12] = '11,NaN,22.0';
    rows[20] = '19,21.0,-Infinity';
    rows[21] = '20,21.0,inf';
    const file = tempFile('probes.csv', `${rows.join('\n')}\n`);
    const r = runCli(['analyze', file, '--json']);
    expect(r.status).toBe(0);
    const report = JSON.parse(r.stdout);
    assertNoNonFinite(report);
    const [a, b] = report.channels;
    expect(a.n).toBe(58);
    expect(b.n).toBe(57);
    expect(a.notes).toContain(`${file} row 6, column "probe_a_degC": empty cell, skipped`);
    expect(a.notes).toContain(`${file} row 13, column "probe_a_degC": NaN is not a measurement, skipped`);
    expect(b.notes).toContain(`${file} row 10, column "probe_b_degC": not a number, skipped`);
    expect(b.notes).toContain(`${file} row 21, column "probe_b_degC": Infinity is not a measurement, skipped (2 cells in all, rows 21, 22)`);
  });

  it('a column with one sample: its mean, and a note instead of an uncertainty', () => {
    const file = tempFile('sparse.csv', 'time,flow_l_min,ref_flow_l_min\n0,12.1,\n1,12.2,11.98\n2,12.0,\n3,12.1,\n');
    const r = runCli(['analyze', file, '--json']);
    expect(r.status).toBe(0);
    const report = JSON.parse(r.stdout);
    assertNoNonFinite(report);
    const single = report.channels[1];
    expect(single.n).toBe(1);
    expect(single.mean).toBe(11.98);
    expect(single.standardUncertainty).toBeNull();
    expect(single.notes).toContain('one sample: no spread, so no uncertainty can be stated');
  });

  it('a constant column: u = 0 with a note, tau_int null', () => {
    const rows = ['time,setpoint_bar,line_bar'];
    for (let i = 0; i < 40; i++) rows.push(`${i},4.000,${(3.98 + 0.001 * (i % 5)).toFixed(3)}`);
    const file = tempFile('constant.csv', `${rows.join('\n')}\n`);
    const r = runCli(['analyze', file, '--json']);
    const report = JSON.parse(r.stdout);
    assertNoNonFinite(report);
    const constant = report.channels[0];
    expect(constant.sd).toBe(0);
    expect(constant.tauInt).toBeNull();
    expect(constant.notes[0]).toMatch(/^constant window: every sample is equal/);
    // The table form says the same, without NaN anywhere.
    const table = runCli(['analyze', file]);
    expect(table.status).toBe(0);
    expect(table.stdout).not.toMatch(/NaN|Infinity/);
    expect(table.stdout).toContain('setpoint_bar: constant window');
  });

  it('bad options: one line naming the option and what was expected', () => {
    const file = tempFile('ok.csv', 'x\n1\n2\n3\n');
    const cases: [string[], string][] = [
      [['--confidence', '1.5'], 'plateau: --confidence 1.5: expected a probability between 0 and 1, e.g. 0.95'],
      [['--window', '2'], 'plateau: --window 2: expected a whole number of samples, at least 4'],
      [['--estimator', 'magic'], 'plateau: --estimator magic: expected one of auto, ar, geyer, sokal, obm, lugsail, blocking, batch-means, iid'],
      [['--target=-1'], 'plateau: --target -1: expected a positive uncertainty in the channel units'],
      [['--window-seconds', '10'], `plateau: --window-seconds needs a time column, and ${file} has none (name one with --time-column)`],
    ];
    for (const [flags, message] of cases) {
      const r = runCli(['analyze', file, ...flags]);
      expect(r.status).toBe(2);
      expect(r.stderr.trim()).toBe(message);
    }
    const unknown = runCli(['analyze', file, '--colour']);
    expect(unknown.status).toBe(2);
    expect(unknown.stderr.trim()).toBe('plateau: analyze: unknown option --colour (plateau help analyze lists the options)');
    noStackTrace(unknown.stderr);
  });

  it('a time cell that is not a time: those rows keep their values, and a note says so', () => {
    const file = tempFile('clock.csv', 'time,rpm\n0,1500\n1,1502\nnoon,1499\n3,1501\n4,1500\n');
    const r = runCli(['analyze', file, '--json']);
    const report = JSON.parse(r.stdout);
    expect(report.channels[0].n).toBe(5);
    expect(report.notes).toContain(`${file} row 4, column "time": "noon" is not a time; those rows have no time`);
  });
});

describe('plateau analyze: decimal commas', () => {
  // Invented logger export: ";" between fields, decimal commas (as loggers set to many European
  // locales write them); the values must equal the same file written with points.
  const rows = ['Zeit;Temp_degC;Druck_kPa;Bemerkung'];
  const points = ['time,Temp_degC,Druck_kPa'];
  for (let i = 0; i < 80; i++) {
    const t = (21.375 + 0.004 * Math.sin(i / 3)).toFixed(4);
    const p = (101.3 + 0.05 * Math.cos(i / 5)).toFixed(3);
    rows.push(`${i};${t.replace('.', ',')};${p.replace('.', ',')};ok`);
    points.push(`${i},${t},${p}`);
  }

  it('detected from the first rows and said in a note; the numbers equal those of the same file with points', () => {
    const file = tempFile('logger.csv', `${rows.join('\n')}\n`);
    const r = runCli(['analyze', file, '--time-column', 'Zeit', '--json']);
    expect(r.status).toBe(0);
    const report = JSON.parse(r.stdout);
    expect(report.notes).toContain(`${file}: decimal commas detected (numbers such as 21,375; fields separated by ";"): every number is read with a decimal comma`);
    const reference = JSON.parse(runCli(['analyze', tempFile('points.csv', `${points.join('\n')}\n`), '--json']).stdout);
    expect(report.channels.map((c: { name: string; n: number; mean: number }) => [c.name, c.n, c.mean])).toEqual(reference.channels.map((c: { name: string; n: number; mean: number }) => [c.name, c.n, c.mean]));
  });

  it('--decimal-comma asks for it; with "," between fields it is one clear line', () => {
    const file = tempFile('logger.csv', `${rows.join('\n')}\n`);
    const r = runCli(['analyze', file, '--decimal-comma', '--json']);
    expect(JSON.parse(r.stdout).notes).toContain(`${file}: numbers read with a decimal comma (--decimal-comma; fields separated by ";")`);
    const commas = tempFile('commas.csv', `${points.join('\n')}\n`);
    const bad = runCli(['analyze', commas, '--decimal-comma']);
    expect(bad.status).toBe(2);
    expect(bad.stderr.trim()).toBe(`plateau: ${commas}: --decimal-comma needs fields separated by ";" or tab, and this file's header is separated by ","`);
  });
});

describe('plateau analyze --unit', () => {
  it('a unit per column: in the table as people write it, in --json as given; an unknown column is one line', () => {
    const rows = ['time,probe_a,line_p'];
    for (let i = 0; i < 40; i++) rows.push(`${i},${(21 + 0.01 * Math.sin(i)).toFixed(4)},${(101.3 + 0.02 * Math.cos(i)).toFixed(3)}`);
    const file = tempFile('units.csv', `${rows.join('\n')}\n`);
    const table = runCli(['analyze', file, '--unit', 'probe_a=Cel', '--unit', 'line_p=kPa']).stdout;
    const lines = table.split('\n');
    expect(lines[2]).toMatch(/\bunit\b/);
    expect(lines.find((l) => l.startsWith('probe_a'))).toMatch(/\s°C\s/);
    expect(lines.find((l) => l.startsWith('line_p'))).toMatch(/\skPa\s/);
    const json = JSON.parse(runCli(['analyze', file, '--json', '--unit', 'probe_a=Cel']).stdout);
    expect(json.channels.map((c: { unit: string | null }) => c.unit)).toEqual(['Cel', null]);
    const bad = runCli(['analyze', file, '--unit', 'probe_b=K']);
    expect(bad.status).toBe(2);
    expect(bad.stderr.trim()).toBe('plateau: --unit probe_b=K: no channel column named "probe_b" (channels: probe_a, line_p)');
    expect(runCli(['analyze', file, '--unit', 'probe_a']).stderr.trim()).toBe('plateau: --unit "probe_a": expected NAME=UNIT, e.g. --unit probe_a=degC');
  });
});
