import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { renderReport, reportTrace } from '../../src/server/report.js';
import { svgChart } from '../../src/server/svg-chart.js';
import { gumStatement } from '../../src/engine/test-point-record.js';
import { makeTestDaemon, RIG_START_SECONDS, type TestDaemon } from './harness.js';

// The printable report: the GUM wording, the evidence, the charts, the cautions, and every text
// that came from the network escaped (names, units, notes, test point names).

let t: TestDaemon;

beforeAll(async () => {
  t = await makeTestDaemon();
  t.feedRig(30);
  // A unit with markup, as a SenML pack may carry one.
  t.publishRaw('rig/hx7/senml', JSON.stringify([{ bn: 'hx7.', bt: RIG_START_SECONDS + 31, bu: '<img src=x onerror=alert(1)>', n: 'probe_unit', v: 1 }, { n: 'probe_unit', t: 1, v: 2 }, { n: 'probe_unit', t: 2, v: 1.5 }]));
  t.daemon.commitNow();
});

afterAll(async () => t.close());

function reportFor(id: string): string {
  const point = t.daemon.testPoints.get(id);
  if (!point) throw new Error(`no test point ${id}`);
  const records = t.daemon.store.records(id);
  const record = (records.at(-1)?.body ?? null) as Parameters<typeof renderReport>[0]['record'];
  return renderReport({
    point: { ...point, verdict: t.daemon.testPoints.verdict(point) },
    record,
    generatedMs: RIG_START_SECONDS * 1000,
    version: '0.1.0',
    live: t.daemon.testPointWindows(id, 4000).map((w) => ({ name: w.name, unit: w.unit, snapshot: w.snapshot, trace: reportTrace(w.trace), cusum: w.cusum })),
  });
}

describe('renderReport', () => {
  it('before a record: says so, states the current values in GUM wording, and escapes every text', () => {
    t.daemon.startTestPoint({ id: 'rep-1', name: 'Bench <b>HX-7</b> "A" & B', channels: ['hx7.probe_unit', 'hx7.shell_dp_kPa'] });
    t.daemon.annotateTestPoint('rep-1', '<script>alert(2)</script>');
    t.feedRig(5);
    const html = reportFor('rep-1');
    expect(html).toContain('none yet: the values below are the current ones, not a record');
    expect(html).toContain('Bench &lt;b&gt;HX-7&lt;/b&gt; &quot;A&quot; &amp; B');
    expect(html).toContain('&lt;script&gt;alert(2)&lt;/script&gt;');
    expect(html).toContain('&lt;img src=x onerror=alert(1)&gt;');
    expect(html).not.toMatch(/<script|<img|<b>/i);
    const shell = t.daemon.registry.get('hx7.shell_dp_kPa')?.pipeline.snapshot();
    const expected = gumStatement('hx7.shell_dp_kPa', shell?.mean ?? null, shell?.standardUncertainty ?? null, shell?.expandedUncertainty ?? null, shell?.coverageFactor ?? null, shell?.dof ?? null, 0.95, 'kPa');
    expect(html).toContain(expected.replace(/&/g, '&amp;'));
    expect(html).toContain('Not ready yet');
  });

  it('with a record: the recorded statement, the estimator, the evidence, four charts per channel, the cautions', () => {
    t.daemon.startTestPoint({ id: 'rep-2', name: 'flows', channels: ['hx7.glycol_flow_kg_s', 'hx7.water_flow_kg_s'] });
    // Long enough after readiness for the CUSUM to have blocks on both channels.
    t.feedRig(90);
    expect(t.daemon.testPoints.get('rep-2')?.state).toBe('ready');
    const html = reportFor('rep-2');
    const record = t.daemon.store.records('rep-2').at(-1)?.body as { entries: { statement: string }[]; createdAt: string };
    for (const entry of record.entries) expect(html).toContain(entry.statement.replace(/&/g, '&amp;'));
    expect(html).toContain(`written ${record.createdAt} when the test point became ready`);
    expect(html).toContain('the spectral density at zero frequency of an autoregressive fit');
    expect(html).toContain('Heidelberger-Welch stationarity test');
    expect(html).toContain('KPSS level test on block means');
    // Trace, ACF, Allan deviation and CUSUM for each of the two channels.
    expect((html.match(/aria-label="Samples, mean and expanded uncertainty U"/g) ?? []).length).toBe(2);
    expect((html.match(/aria-label="Autocorrelation/g) ?? []).length).toBe(2);
    expect((html.match(/aria-label="Allan deviation"/g) ?? []).length).toBe(2);
    expect((html.match(/aria-label="CUSUM on block means"/g) ?? []).length).toBe(2);
    // The warm-up/before-the-test-point samples are shaded and the cut marked.
    expect(html).toContain('warm-up cut');
    expect(html).toContain('not a safety system');
    expect(html).toContain('Type A (statistical) standard uncertainty');
    expect(html).toContain('reviewed and approved by a competent person');
    expect(html).toContain('Ready: every channel reached steady state and its target precision.');
  });

  it('a test point stopped before its channels were steady: the record and the report call each entry provisional, say why, and give no GUM statement (issue 10)', () => {
    t.daemon.startTestPoint({ id: 'rep-3', name: 'stopped early', channels: ['hx7.glycol_flow_kg_s', 'hx7.shell_dp_kPa'] });
    t.feedRig(2); // about 20 samples: far from steady
    t.daemon.stopTestPoint('rep-3');
    const record = t.daemon.store.records('rep-3').at(-1)?.body as { recordNumber: string; provisional: boolean; kind: string; entries: { channel: string; statement: string; provisional: boolean; provisionalReasons: string[] }[] };
    expect(record.kind).toBe('stopped');
    expect(record.recordNumber).toBe('rep-3/1');
    expect(record.provisional).toBe(true);
    for (const entry of record.entries) {
      expect(entry.provisional).toBe(true);
      expect(entry.provisionalReasons.length).toBeGreaterThan(0);
      expect(entry.statement).toMatch(new RegExp(`^${entry.channel.replace(/\./g, '\\.')}: PROVISIONAL, not a measurement result to report \\(`));
      expect(entry.statement).not.toMatch(/expanded uncertainty U = k·u/);
    }
    const html = reportFor('rep-3');
    expect((html.match(/<p class="provisional"><strong>Provisional\.<\/strong>/g) ?? []).length).toBe(2);
    expect(html).toContain(escapeForHtml(record.entries[0]?.provisionalReasons[0] ?? ''));
    expect(html).toContain('Record number</td><td>rep-3/1 (provisional');
    expect(html).not.toMatch(/expanded uncertainty U = k·u with u/);
  });

  it('the ready record is not provisional and is record number 1; the stop record after it is number 2', () => {
    t.daemon.stopTestPoint('rep-2');
    const records = t.daemon.store.records('rep-2').map((r) => r.body as { recordNumber: string; provisional: boolean; kind: string });
    expect(records.map((r) => [r.kind, r.recordNumber])).toEqual([
      ['ready', 'rep-2/1'],
      ['stopped', 'rep-2/2'],
    ]);
    expect(records[0]?.provisional).toBe(false);
  });
});

function escapeForHtml(text: string): string {
  return text.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
}

describe('svgChart', () => {
  it('draws nothing for fewer than two points and survives constant, zero and non-finite values', () => {
    expect(svgChart({ width: 100, height: 80, title: 't', xLabel: 'x', yLabel: 'y', series: [{ x: [1], y: [1], stroke: '#000' }] })).toBe('');
    const flat = svgChart({ width: 200, height: 120, title: 'flat', xLabel: 'x', yLabel: 'y', series: [{ x: [1, 2, 3], y: [5, 5, 5], stroke: '#000' }] });
    expect(flat).toMatch(/^<svg /);
    expect(flat).not.toMatch(/NaN|Infinity/);
    const log = svgChart({ width: 200, height: 120, title: 'log', xLabel: 'x', yLabel: 'y', xLog: true, yLog: true, series: [{ x: [1, 2, 4, 8], y: [0, 1, Number.NaN, 0.5], stroke: '#000' }] });
    expect(log).not.toMatch(/NaN|Infinity/);
  });

  it('thins long series to a bounded number of points', () => {
    const x = Array.from({ length: 100_000 }, (_, i) => i);
    const y = x.map((i) => Math.sin(i / 100));
    const svg = svgChart({ width: 600, height: 200, title: 'long', xLabel: 'x', yLabel: 'y', series: [{ x, y, stroke: '#000' }] });
    const segments = (svg.match(/[ML]\d/g) ?? []).length;
    expect(segments).toBeLessThanOrEqual(1600);
    expect(svg.length).toBeLessThan(60_000);
  });
});
