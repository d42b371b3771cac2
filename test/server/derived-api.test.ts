import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { FastifyInstance, InjectOptions } from 'fastify';
import { buildHttpApp } from '../../src/server/http-app.js';
import { svgBarChart } from '../../src/server/svg-chart.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import { derivedRecordCsv, derivedStatement, type DerivedReportEntry } from '../../src/engine/derived/derived-record.js';
import type { DerivedSnapshot } from '../../src/engine/derived/derived-engine.js';
import { recordCsv, type TestPointRecord } from '../../src/engine/test-point-record.js';
import { makeTestDaemon, RIG_START_SECONDS, type TestDaemon } from './harness.js';
import { assertNoNonFinite } from '../helpers/cli.js';

// Derived results in the HTTP API (GET /api/derived, GET /api/derived/:name), in the record
// exports (record-derived.csv) and in the printable report, through fastify's inject. The hx7
// configuration defines one derived result, hx7.heat_duty_kW = glycol flow * 3.6 * (in - out).

const NAME = 'hx7.heat_duty_kW';
const INPUTS = ['hx7.glycol_flow_kg_s', 'hx7.glycol_in_degC', 'hx7.glycol_out_degC'];
const FLOW = ['hx7.glycol_flow_kg_s', 'hx7.water_flow_kg_s'];

let rig: TestDaemon;
let rigApp: FastifyInstance;
/** A daemon fed steady synthetic inputs, so that the derived result reaches its target and raises its event. */
let steady: TestDaemon;
let steadyApp: FastifyInstance;

async function call(app: FastifyInstance, options: InjectOptions) {
  const response = await app.inject(options);
  const json = (response.headers['content-type'] ?? '').toString().startsWith('application/json');
  return { status: response.statusCode, body: json ? (response.json() as Record<string, unknown>) : null, text: response.body, headers: response.headers };
}

function expectRefusal(result: { status: number; body: Record<string, unknown> | null }, status: number, code: string) {
  expect(result.status).toBe(status);
  expect(result.body?.error).toBe(code);
  expect(String(result.body?.message).length).toBeGreaterThan(5);
}

/**
 * Steady inputs at 10 samples per second: white noise about fixed levels, with a component common
 * to the two glycol temperatures (so their means are positively correlated and, entering the
 * model with opposite signs, give a negative covariance term).
 */
function feedSteady(target: TestDaemon, fromSeconds: number, seconds: number, random: SeededRandom): void {
  for (let i = 0; i < seconds * 10; i++) {
    const time = RIG_START_SECONDS + fromSeconds + i * 0.1;
    target.clock.nowMs = Math.round(time * 1000);
    const common = 0.05 * random.normal();
    target.publishRaw('rig/hx7/glycol_flow_kg_s', JSON.stringify({ v: 0.82 + 0.002 * random.normal(), t: time }));
    target.publishRaw('rig/hx7/glycol_in_degC', JSON.stringify({ v: 40 + common + 0.01 * random.normal(), t: time }));
    target.publishRaw('rig/hx7/glycol_out_degC', JSON.stringify({ v: 35 + common + 0.01 * random.normal(), t: time }));
    if (i % 50 === 49) target.daemon.commitNow();
  }
  target.daemon.commitNow();
}

beforeAll(async () => {
  rig = await makeTestDaemon();
  rig.feedRig(60);
  rigApp = buildHttpApp(rig.daemon, { token: null, maxBodyBytes: 4096 });
  steady = await makeTestDaemon();
  feedSteady(steady, 0, 30, new SeededRandom(3));
  steadyApp = buildHttpApp(steady.daemon, { token: null, maxBodyBytes: 4096 });
});

afterAll(async () => {
  await rigApp.close();
  await steadyApp.close();
  await rig.close();
  await steady.close();
});

describe('GET /api/derived', () => {
  it('every derived result, with the field names of the derived entries of plateau analyze --json (less the record-only checks)', async () => {
    const r = await call(rigApp, { method: 'GET', url: '/api/derived' });
    expect(r.status).toBe(200);
    expect(r.headers['cache-control']).toBe('no-store');
    const list = r.body?.derived as Record<string, unknown>[];
    expect(list.map((d) => d.name)).toEqual([NAME]);
    const view = list[0] as Record<string, unknown>;
    // The record entry is built by derivedReportEntry, as analyze's entries are (analyze-derived.ts).
    const entry = rig.daemon.derived.recordEntries([NAME])[0] as DerivedReportEntry;
    const expectedKeys = Object.keys(entry).filter((k) => k !== 'monteCarlo' && k !== 'bootstrap').sort();
    expect(Object.keys(view).sort()).toEqual(expectedKeys);
    // Nothing is lost or altered by the response schema: the daemon's own view, with the GUM statement of the live
    // value and the provisional flag a record made now would carry (a record of a result not at target says
    // PROVISIONAL instead of the GUM statement: issue 10, honest records).
    const own = rig.daemon.derived.snapshots()[0] as DerivedSnapshot;
    expect(view).toEqual(JSON.parse(JSON.stringify({ ...own, statement: derivedStatement(own), provisional: entry.provisional, provisionalReasons: entry.provisionalReasons })));
    expect(entry.statement).toBe(entry.provisional ? `${NAME}: PROVISIONAL, not a measurement result to report (${entry.provisionalReasons.join('; ')}); value ${entry.value} kW` : view.statement);
    expect(view.inputs).toEqual(INPUTS);
    expect((view.budget as { channel: string }[]).map((b) => b.channel)).toEqual(INPUTS);
    assertNoNonFinite(r.body);
  });

  it('a query string is refused', async () => {
    expectRefusal(await call(rigApp, { method: 'GET', url: '/api/derived?view=summary' }), 400, 'ERR_REQUEST_INVALID');
  });
});

describe('GET /api/derived/:name', () => {
  it('one result with its budget, covariance terms and its stored events', async () => {
    const r = await call(steadyApp, { method: 'GET', url: `/api/derived/${NAME}` });
    expect(r.status).toBe(200);
    expect(r.body?.name).toBe(NAME);
    expect(r.body?.unit).toBe('kW');
    expect(r.body?.atTarget).toBe(true);
    const budget = r.body?.budget as { channel: string; share: number; varianceShare: number }[];
    expect(budget.map((b) => b.channel)).toEqual(INPUTS);
    const terms = r.body?.covarianceTerms as { channels: string[]; term: number }[];
    expect(terms).toHaveLength(3);
    // The common component of the two temperatures: their covariance term is negative (it reduces u_c).
    const temperatures = terms.find((c) => c.channels.includes('hx7.glycol_in_degC') && c.channels.includes('hx7.glycol_out_degC'));
    expect(temperatures?.term).toBeLessThan(0);
    // The budget as served adds up (derived-engine.ts: the shares with covariance add to 1, the
    // variance shares and covariance share too); 1e-9 allows for rounding in the sums.
    expect(Math.abs(budget.reduce((s, b) => s + b.share, 0) - 1)).toBeLessThan(1e-9);
    expect(Math.abs(budget.reduce((s, b) => s + b.varianceShare, 0) + (r.body?.covarianceShare as number) - 1)).toBeLessThan(1e-9);
    const events = r.body?.storedEvents as { source: string; kind: string }[];
    expect(events.map((e) => `${e.source} ${e.kind}`)).toEqual([`${NAME} precision-reached`]);
    expect(events).toEqual(JSON.parse(JSON.stringify(steady.daemon.store.eventsFor(NAME, 200))));
    assertNoNonFinite(r.body);
  });

  it('events=N bounds the stored events', async () => {
    const none = await call(steadyApp, { method: 'GET', url: `/api/derived/${NAME}?events=0` });
    expect(none.status).toBe(200);
    expect(none.body?.storedEvents).toEqual([]);
  });

  it('an unknown name is a 404 naming the known ones; a bad name, query or length a 400 or 414, never a 500', async () => {
    const unknown = await call(rigApp, { method: 'GET', url: '/api/derived/hx7.glycol_in_degC' });
    expectRefusal(unknown, 404, 'ERR_DERIVED_UNKNOWN');
    expect(unknown.body?.message).toContain(NAME);
    expectRefusal(await call(rigApp, { method: 'GET', url: `/api/derived/${encodeURIComponent('<b>q</b>')}` }), 400, 'ERR_REQUEST_INVALID');
    for (const query of ['events=-1', 'events=5000', 'events=many', 'trace=5']) expectRefusal(await call(rigApp, { method: 'GET', url: `/api/derived/${NAME}?${query}` }), 400, 'ERR_REQUEST_INVALID');
    expectRefusal(await call(rigApp, { method: 'GET', url: '/api/derived/%E0%A4%A' }), 400, 'ERR_REQUEST_URL');
    expectRefusal(await call(rigApp, { method: 'GET', url: `/api/derived/${'q'.repeat(3000)}` }), 414, 'ERR_REQUEST_URL_TOO_LONG');
    expectRefusal(await call(rigApp, { method: 'POST', url: `/api/derived/${NAME}` }), 404, 'ERR_NOT_FOUND');
  });
});

describe('GET /api/test-points/:id/record-derived.csv and the report', () => {
  it('before a record: 404 ERR_RECORD_NONE; the report shows the current values and says they are not a record', async () => {
    rig.daemon.startTestPoint({ id: 'tp-derived', name: 'duty <check>', channels: FLOW, derived: [NAME] });
    rig.feedRig(5);
    expectRefusal(await call(rigApp, { method: 'GET', url: '/api/test-points/tp-derived/record-derived.csv' }), 404, 'ERR_RECORD_NONE');
    const report = await call(rigApp, { method: 'GET', url: '/api/test-points/tp-derived/report' });
    expect(report.status).toBe(200);
    expect(report.text).toContain('Current value (no record of this derived result yet).');
    const live = (await call(rigApp, { method: 'GET', url: `/api/derived/${NAME}` })).body as { statement: string };
    expect(report.text).toContain(live.statement.replace(/&/g, '&amp;'));
    expect(report.text).toContain(`aria-label="Uncertainty budget of ${NAME}"`);
    expect(report.text).toContain('computed when the record is written');
  });

  it('after the record: one row per derived result, the record\'s entries as derivedRecordCsv writes them; record.csv stays one row per channel', async () => {
    rig.daemon.stopTestPoint('tp-derived');
    const record = (await call(rigApp, { method: 'GET', url: '/api/test-points/tp-derived/record.json' })).body as unknown as TestPointRecord;
    const entries = record.derived as DerivedReportEntry[];
    expect(entries.map((e) => e.name)).toEqual([NAME]);
    const csv = await call(rigApp, { method: 'GET', url: '/api/test-points/tp-derived/record-derived.csv' });
    expect(csv.status).toBe(200);
    expect(csv.headers['content-type']).toBe('text/csv; charset=utf-8');
    expect(csv.headers['content-disposition']).toBe('attachment; filename="tp-derived-derived.csv"');
    expect(csv.text).toBe(derivedRecordCsv(entries));
    // One header and one row, with the recorded numbers at full precision.
    const lines = csv.text.trimEnd().split('\r\n');
    expect(lines).toHaveLength(2);
    const header = (lines[0] as string).split(',');
    const row = (lines[1] as string).split(',');
    expect(row[header.indexOf('name')]).toBe(NAME);
    expect(Number(row[header.indexOf('value')])).toBe(entries[0]?.value);
    expect(Number(row[header.indexOf('expandedUncertainty')])).toBe(entries[0]?.expandedUncertainty);
    const channels = await call(rigApp, { method: 'GET', url: '/api/test-points/tp-derived/record.csv' });
    expect(channels.text).toBe(recordCsv(record));
    expect(channels.text.trimEnd().split('\r\n')).toHaveLength(1 + FLOW.length);
  });

  it('the report states the recorded result, draws the budget and shows the Monte Carlo and bootstrap checks', async () => {
    const r = await call(rigApp, { method: 'GET', url: '/api/test-points/tp-derived/report' });
    expect(r.status).toBe(200);
    expect(r.text).not.toMatch(/<script/i);
    const record = (await call(rigApp, { method: 'GET', url: '/api/test-points/tp-derived/record.json' })).body as unknown as TestPointRecord;
    const entry = record.derived[0] as DerivedReportEntry;
    expect(r.text).toContain(entry.statement.replace(/&/g, '&amp;'));
    expect(r.text).toContain(`Recorded ${record.createdAt}.`);
    expect(r.text).toContain(`aria-label="Uncertainty budget of ${NAME}"`);
    // A bar and a table row for each input and each pair of inputs, and the total.
    for (const input of INPUTS) expect(r.text).toContain(`<tr><td>${input}</td>`);
    expect(r.text).toContain('hx7.glycol_in_degC × hx7.glycol_out_degC');
    expect(r.text).toContain('u_c² (the sum)');
    expect(r.text).toContain('Monte Carlo check (JCGM 101:2008)');
    const mc = entry.monteCarlo as { trials: number };
    expect(r.text).toContain(`<tr><th>trials</th><td>${mc.trials}`);
    expect(r.text).toContain('Bootstrap check');
    expect(r.text).toContain(`${entry.bootstrap?.replicates} replicates`);
    // The verdict table lists the derived result beside the channels.
    expect(r.text).toContain(`<td>${NAME} (derived)</td>`);
    // The test point's name is escaped.
    expect(r.text).toContain('duty &lt;check&gt;');
  });

  it('a record without derived results: 404 ERR_RECORD_NO_DERIVED; unknown or malformed ids 404 and 400', async () => {
    rig.daemon.startTestPoint({ id: 'tp-channels-only', channels: FLOW });
    rig.daemon.stopTestPoint('tp-channels-only');
    expectRefusal(await call(rigApp, { method: 'GET', url: '/api/test-points/tp-channels-only/record-derived.csv' }), 404, 'ERR_RECORD_NO_DERIVED');
    expectRefusal(await call(rigApp, { method: 'GET', url: '/api/test-points/tp-404/record-derived.csv' }), 404, 'ERR_TEST_POINT_UNKNOWN');
    expectRefusal(await call(rigApp, { method: 'GET', url: `/api/test-points/${encodeURIComponent('bad id')}/record-derived.csv` }), 400, 'ERR_REQUEST_INVALID');
  });
});

describe('svgBarChart', () => {
  const chart = svgBarChart({
    width: 400,
    title: 'budget <x>',
    xLabel: 'share (%)',
    bars: [
      { label: 'a <b>', value: 150, fill: '#111' },
      { label: 'a × b', value: -60, fill: '#222' },
      { label: 'total', value: 100, fill: '#333' },
    ],
  });
  const rects = [...chart.matchAll(/<rect x="([\d.]+)" y="[\d.]+" width="([\d.]+)" height="12" fill="(#\d{3})"/g)].map((m) => ({ x: Number(m[1]), width: Number(m[2]), fill: m[3] }));
  const zero = Number(/<line x1="([\d.]+)" x2="[\d.]+" y1="[\d.]+" y2="[\d.]+" stroke="#1d2430" stroke-width="1"\/>/.exec(chart)?.[1]);

  it('draws positive bars right of the zero line and negative ones left of it, in proportion', () => {
    expect(rects.map((r) => r.fill)).toEqual(['#111', '#222', '#333']);
    const [positive, negative, total] = rects as unknown as [{ x: number; width: number }, { x: number; width: number }, { x: number; width: number }];
    // Coordinates are written to 0.1 px: a sum of two is within 0.1 px (plus float error).
    expect(Math.abs(positive.x - zero)).toBeLessThanOrEqual(0.101);
    expect(Math.abs(negative.x + negative.width - zero)).toBeLessThanOrEqual(0.101);
    expect(negative.x).toBeLessThan(zero);
    expect(positive.width / total.width).toBeCloseTo(1.5, 2);
    expect(negative.width / total.width).toBeCloseTo(0.6, 2);
  });

  it('escapes every label and draws nothing without a finite value', () => {
    expect(chart).toContain('budget &lt;x&gt;');
    expect(chart).toContain('a &lt;b&gt;');
    expect(chart).not.toMatch(/<b>|NaN|Infinity/);
    expect(svgBarChart({ width: 300, title: 't', xLabel: 'x', bars: [{ label: 'n', value: Number.NaN, fill: '#000' }] })).toBe('');
  });
});
