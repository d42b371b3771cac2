import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pino from 'pino';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { parseConfig } from '../../src/config/load-config.js';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import { startServer, type RunningServer } from '../../src/server/server.js';
import { lcgAr1 } from '../helpers/lcg-series.js';
import { ROOT } from '../helpers/reference.js';
import { SHEET_CHECK } from './sheet-checks.js';

// The views a practitioner misses in the first hour (issue 14), in Debian's Chromium through
// playwright-core, against a daemon fed known samples: the invented climate cell CC-2 with two
// channels at one sample per second, a gap of known length and refusals of known reasons, and two
// test points at two set points. Screenshots go to test-output/ (not committed).

const CHROMIUM = '/usr/bin/chromium';
const available = existsSync(CHROMIUM);
const OUTPUT = join(ROOT, 'test-output');
const T0 = 1_790_000_000;
const AIR = 'cc2.air_degC';
const RH = 'cc2.rh_pct';
/** Samples of the air channel left out on purpose: one gap of this many. */
const GAP_MISSING = 7;

let daemon: Daemon;
let source: MemorySampleSource;
let clock: ManualClock;
let server: RunningServer;
let context: BrowserContext;
let page: Page;
let userDir = '';
let t = T0;
let k = 0;
const errors: string[] = [];
const air = lcgAr1(11, 0.6, 4000);
const rh = lcgAr1(23, 0.3, 4000);

/** `count` seconds of both channels around their levels; the air channel skips `skip` (indices into this call). */
function publishSeconds(count: number, airLevel: number, rhLevel: number, skip: Set<number> = new Set()): void {
  for (let i = 0; i < count; i++) {
    t += 1;
    k++;
    if (!skip.has(i)) source.publish('rig/cc2/air_degC', JSON.stringify({ v: airLevel + 0.02 * (air[k % air.length] as number), t }));
    source.publish('rig/cc2/rh_pct', JSON.stringify({ v: rhLevel + 0.1 * (rh[k % rh.length] as number), t }));
  }
  clock.advance(count * 1000);
  daemon.commitNow();
}

async function api<T>(path: string): Promise<{ status: number; body: T; text: string; type: string | null }> {
  const response = await fetch(new URL(path, server.url));
  const text = await response.text();
  let body: unknown = null;
  try {
    body = JSON.parse(text);
  } catch {
    body = null;
  }
  return { status: response.status, body: body as T, text, type: response.headers.get('content-type') };
}

async function checkSheet(view: string, ready: string, name: string): Promise<void> {
  for (const theme of ['light', 'dark'] as const) {
    for (const width of [1280, 1440]) {
      const sheet = await context.newPage();
      sheet.on('pageerror', (error) => errors.push(error.message));
      await sheet.emulateMedia({ colorScheme: theme });
      await sheet.setViewportSize({ width, height: 900 });
      await sheet.goto(`${server.url}${view}`);
      await sheet.locator(ready).first().waitFor({ timeout: 10_000 });
      await sheet.waitForTimeout(1200);
      const found = await sheet.evaluate<{ bad: string[]; words: string[] }>(SHEET_CHECK);
      expect(found.bad, `${theme} ${width} ${view}`).toEqual([]);
      expect(found.words, `${theme} ${width} ${view}`).toEqual([]);
      if (width === 1440) await sheet.screenshot({ path: join(OUTPUT, `${name}-${theme}.png`), fullPage: true });
      await sheet.close();
    }
  }
}

describe.skipIf(!available)('the first-hour views in Chromium', () => {
  beforeAll(async () => {
    const config = parseConfig({
      subscriptions: [{ topic: 'rig/cc2/+', format: 'json', channel: 'cc2.{3}' }],
      channels: { groups: [{ match: AIR, unit: 'degC' }, { match: RH, unit: '%RH' }] },
      store: { path: ':memory:' },
      log: { level: 'silent' },
    });
    source = new MemorySampleSource(daemonSubscriptions(config));
    clock = new ManualClock(T0 * 1000);
    daemon = new Daemon(config, { logger: pino({ level: 'silent' }), clock, store: new MemoryStore(), source });
    await daemon.start();
    // Before the first test point: 200 s, with one gap of GAP_MISSING air samples at 100 s.
    publishSeconds(200, 23, 45, new Set(Array.from({ length: GAP_MISSING }, (_, i) => 100 + i)));
    // Refusals for the air channel: two values that are text, not numbers (wrong-type), one time already accepted, one older than any remembered.
    source.publish('rig/cc2/air_degC', JSON.stringify({ v: 'n/a', t: t + 0.5 }));
    source.publish('rig/cc2/air_degC', JSON.stringify({ v: 'overrange', t: t + 0.6 }));
    source.publish('rig/cc2/air_degC', JSON.stringify({ v: 23, t }));
    source.publish('rig/cc2/air_degC', JSON.stringify({ v: 23, t: T0 - 100_000 }));
    daemon.commitNow();
    // Set point 1 (23 °C), then set point 2 (30 °C): each test point stopped, so each has a record.
    const first = daemon.startTestPoint({ name: 'set point 1, 23 °C', channels: [AIR, RH] });
    publishSeconds(400, 23, 45);
    daemon.stopTestPoint(first.id);
    const second = daemon.startTestPoint({ name: 'set point 2, 30 °C', channels: [AIR, RH] });
    publishSeconds(400, 30, 40);
    daemon.stopTestPoint(second.id);
    daemon.commitNow();
    server = await startServer(daemon, { host: '127.0.0.1', port: 0, token: null, maxBodyBytes: 65536 });
    mkdirSync(OUTPUT, { recursive: true });
    userDir = mkdtempSync(join(tmpdir(), 'plateau-chromium-'));
    context = await chromium.launchPersistentContext(userDir, { executablePath: CHROMIUM, headless: true, args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking'], viewport: { width: 1440, height: 900 } });
    page = context.pages()[0] ?? (await context.newPage());
    page.on('pageerror', (error) => errors.push(error.message));
  });

  afterAll(async () => {
    await context?.close();
    await server?.close();
    await daemon?.stop();
    if (userDir) rmSync(userDir, { recursive: true, force: true });
  });

  it('the API gives each channel its refusals by reason and its gaps', async () => {
    const detail = await api<{ intake: { refused: { total: number; byReason: Record<string, number> }; gaps: { count: number; missingSamples: number; intervalMs: number; learned: boolean; recent: { from: string; to: string; missing: number }[] } }; trace: { gaps: { from: number; to: number; missing: number }[] } }>(`api/channels/${AIR}?trace=2000`);
    expect(detail.status).toBe(200);
    const { refused, gaps } = detail.body.intake;
    expect(refused.byReason).toEqual({ 'wrong-type': 2, duplicate: 1, 'out-of-order': 1 });
    expect(refused.total).toBe(4);
    expect(gaps.count).toBe(1);
    expect(gaps.missingSamples).toBe(GAP_MISSING);
    expect(gaps.intervalMs).toBeCloseTo(1000, 6);
    // The gap runs from the last sample before it (t0 + 100 s) to the first after it (t0 + 108 s).
    expect(gaps.recent).toEqual([{ from: new Date((T0 + 100) * 1000).toISOString(), to: new Date((T0 + 101 + GAP_MISSING) * 1000).toISOString(), missing: GAP_MISSING, source: 'time-stamps' }]);
    expect(detail.body.trace.gaps).toEqual([{ from: T0 + 100, to: T0 + 101 + GAP_MISSING, missing: GAP_MISSING, source: 'time-stamps' }]);
    // The other channel: nothing refused, no gap.
    const other = await api<{ intake: { refused: { total: number }; gaps: { count: number } } }>(`api/channels/${RH}`);
    expect(other.body.intake.refused.total).toBe(0);
    expect(other.body.intake.gaps.count).toBe(0);
  });

  it('the channel view lists its refused samples and gaps and hatches the gap on its trace', async () => {
    await page.goto(`${server.url}#/channel/${encodeURIComponent(AIR)}`);
    const refused = page.locator('#channel-refused');
    await expect.poll(() => refused.locator('tbody tr').count(), { timeout: 10_000 }).toBe(3);
    expect(await refused.locator('[data-field="refused"]').textContent()).toBe('4 samples refused since the daemon started; none of them is in the mean.');
    expect(await refused.locator('tbody tr').evaluateAll((rows) => rows.map((r) => [...r.children].map((c) => c.textContent)))).toEqual([['wrong-type', '2'], ['duplicate', '1'], ['out-of-order', '1']]);
    const gaps = page.locator('#channel-gaps');
    expect(await gaps.locator('[data-field="gaps"]').textContent()).toMatch(/^1 gap, 7 samples missing since the daemon started; expected interval 1 s \(learned from the time stamps\)\. Gaps in the trace above are hatched\.$/);
    expect(await gaps.locator('tbody tr td').evaluateAll((cells) => cells.slice(2).map((c) => c.textContent))).toEqual(['8 s', '7 samples', 'time stamps']);
    await expect.poll(() => page.locator('.view-channel .chart-note').first().textContent()).toMatch(/1 gap in this trace \(hatched\)/);
    // The gap is drawn on the trace: one marked interval in the visible range.
    await page.locator('#chart-trace canvas').first().waitFor();
    await expect.poll(() => page.locator('#chart-trace .sheet-chart').getAttribute('data-marked-intervals'), { timeout: 5000 }).toBe('1');
    await page.waitForTimeout(500);
    const box = await page.locator('#chart-trace').boundingBox();
    if (box) await page.screenshot({ path: join(OUTPUT, 'first-hour-trace-gap.png'), clip: box });
    await page.screenshot({ path: join(OUTPUT, 'first-hour-channel-intake.png'), fullPage: true });
    expect(errors).toEqual([]);
  });
});
