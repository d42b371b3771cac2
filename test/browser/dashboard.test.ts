import { SHEET_CHECK } from './sheet-checks.js';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import mqtt, { type MqttClient } from 'mqtt';
import { chromium, type BrowserContext, type Locator, type Page } from 'playwright-core';
import { startDemo, type DemoHandle } from '../../src/cli/demo.js';
import { startServer, type RunningServer } from '../../src/server/server.js';
import { ROOT } from '../helpers/reference.js';

// The dashboard in a real browser (Debian's Chromium through playwright-core, never a downloaded
// browser) against the demo: the embedded broker, the simulated bench HX-7 at 40 times real time,
// the daemon and the page. Screenshots and figures go to test-output/ (not committed).

const CHROMIUM = '/usr/bin/chromium';
const available = existsSync(CHROMIUM);
if (!available) console.warn(`browser tests skipped: no Chromium at ${CHROMIUM} (.ci/run installs Debian's chromium package)`);

const OUTPUT = join(ROOT, 'test-output');
const SPEED = 40;
const TOKEN = 'browser-test-token-4f7c2a9e';
const FLOW = ['hx7.glycol_flow_kg_s', 'hx7.water_flow_kg_s'];
const DEMO_CHANNELS = ['hx7.ambient_degC', 'hx7.glycol_flow_kg_s', 'hx7.glycol_in_degC', 'hx7.glycol_out_degC', 'hx7.shell_dp_kPa', 'hx7.water_flow_kg_s'];

let demo: DemoHandle;
let context: BrowserContext;
let page: Page;
let base = '';
let userDir = '';
let probe: MqttClient;
const figures: Record<string, unknown> = {};
/** Anything a payload could make the page do: dialogs, page errors. */
const alarms: string[] = [];
const extraServers: RunningServer[] = [];

function quantile(sorted: number[], q: number): number {
  if (sorted.length === 0) return Number.NaN;
  const position = (sorted.length - 1) * q;
  const low = Math.floor(position);
  const high = Math.ceil(position);
  return (sorted[low] as number) + ((sorted[high] as number) - (sorted[low] as number)) * (position - low);
}

async function api<T>(path: string, init?: RequestInit): Promise<{ status: number; body: T; text: string }> {
  const response = await fetch(new URL(path, base), init);
  const text = await response.text();
  let body: unknown = null;
  try {
    body = JSON.parse(text);
  } catch {
    body = null;
  }
  return { status: response.status, body: body as T, text };
}

function publish(topic: string, payload: string): Promise<void> {
  return new Promise((resolve, reject) => probe.publish(topic, payload, { qos: 1 }, (error) => (error ? reject(error) : resolve())));
}

/** A locator's text now (null when it is not there): for polling, never waits long. */
async function text(locator: Locator): Promise<string | null> {
  return locator.first().textContent({ timeout: 250 }).catch(() => null);
}

/** Waits until a locator's text equals (string) or matches (RegExp) what is expected. */
async function untilText(locator: Locator, expected: string | RegExp, timeout = 10_000): Promise<void> {
  if (typeof expected === 'string') await expect.poll(() => text(locator), { timeout, interval: 50 }).toBe(expected);
  else await expect.poll(() => text(locator), { timeout, interval: 50 }).toMatch(expected);
}

async function untilVisible(locator: Locator, visible = true, timeout = 10_000): Promise<void> {
  await expect.poll(() => locator.first().isVisible(), { timeout, interval: 50 }).toBe(visible);
}

interface LoadFigures {
  bytesTransferred: number;
  bytesDecoded: number;
  requests: number;
  domContentLoadedMs: number;
  loadMs: number;
  firstChannelDataMs: number | null;
  allTilesVisibleMs: number;
}

/** Loads the page and waits for every demo tile; sizes and times from the browser's own timing entries. */
async function measureLoad(target: Page): Promise<LoadFigures> {
  const started = Date.now();
  await target.goto(base);
  await target.locator('.entry[data-channel]').nth(DEMO_CHANNELS.length - 1).waitFor();
  const wallMs = Date.now() - started;
  // Browser-side code as text: this project's type check has no DOM library.
  const timing = await target.evaluate<{ documentBytes: number; resourceBytes: number; decodedBytes: number; requests: number; domContentLoadedMs: number; loadMs: number; firstDataMs: number | null }>(`(() => {
    const navigation = performance.getEntriesByType('navigation')[0];
    const resources = performance.getEntriesByType('resource');
    const firstData = performance.getEntriesByName('plateau:first-data')[0];
    return {
      documentBytes: navigation.transferSize,
      resourceBytes: resources.reduce((sum, r) => sum + r.transferSize, 0),
      decodedBytes: navigation.decodedBodySize + resources.reduce((sum, r) => sum + r.decodedBodySize, 0),
      requests: resources.length + 1,
      domContentLoadedMs: navigation.domContentLoadedEventEnd,
      loadMs: navigation.loadEventEnd,
      firstDataMs: firstData ? firstData.startTime : null,
    };
  })()`);
  return {
    bytesTransferred: timing.documentBytes + timing.resourceBytes,
    bytesDecoded: timing.decodedBytes,
    requests: timing.requests,
    domContentLoadedMs: Math.round(timing.domContentLoadedMs),
    loadMs: Math.round(timing.loadMs),
    firstChannelDataMs: timing.firstDataMs === null ? null : Math.round(timing.firstDataMs),
    allTilesVisibleMs: wallMs,
  };
}

function watchPage(target: Page): void {
  target.on('dialog', (dialog) => {
    alarms.push(`dialog: ${dialog.message()}`);
    void dialog.dismiss();
  });
  target.on('pageerror', (error) => alarms.push(`page error: ${error.message}`));
}

describe.skipIf(!available)('dashboard in Chromium', () => {
  beforeAll(async () => {
    mkdirSync(OUTPUT, { recursive: true });
    demo = await startDemo({ speed: SPEED, brokerPort: 0, httpPort: 0, logLevel: 'silent' });
    base = demo.server.url;
    probe = mqtt.connect(demo.broker.url, { clientId: `browser-test-probe-${process.pid}` });
    await new Promise<void>((resolve, reject) => {
      probe.once('connect', () => resolve());
      probe.once('error', reject);
    });
    userDir = mkdtempSync(join(tmpdir(), 'plateau-chromium-'));
    context = await chromium.launchPersistentContext(userDir, {
      executablePath: CHROMIUM,
      headless: true,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking'],
      viewport: { width: 1440, height: 960 },
      acceptDownloads: true,
    });
    page = context.pages()[0] ?? (await context.newPage());
    watchPage(page);
  });

  afterAll(async () => {
    writeFileSync(join(OUTPUT, 'dashboard-figures.json'), `${JSON.stringify(figures, null, 2)}\n`);
    console.log(`dashboard figures: ${JSON.stringify(figures)}`);
    await context?.close();
    await new Promise<void>((resolve) => (probe ? probe.end(false, {}, () => resolve()) : resolve()));
    for (const server of extraServers) await server.close().catch(() => undefined);
    await demo?.stop().catch(() => undefined);
    if (userDir) rmSync(userDir, { recursive: true, force: true });
  });

  it('first load over loopback: every asset from the daemon, size and time measured', async () => {
    const requested: string[] = [];
    page.on('request', (request) => requested.push(request.url()));
    const cold = await measureLoad(page);
    const origin = new URL(base).origin;
    const foreign = requested.filter((url) => !url.startsWith(origin) && !url.startsWith('data:'));
    expect(foreign).toEqual([]);
    expect(requested.some((url) => url.includes('/vendor/uPlot.iife.min.js'))).toBe(true);
    // Again in a new tab of the running browser with the cache disabled: the page's own cost
    // without the browser's first start.
    const again = await context.newPage();
    const cdp = await context.newCDPSession(again);
    await cdp.send('Network.enable');
    await cdp.send('Network.setCacheDisabled', { cacheDisabled: true });
    const repeat = await measureLoad(again);
    await again.close();
    figures.firstLoad = { coldProfile: cold, repeatCacheDisabled: repeat, during: `demo at ${SPEED}x real time (about 2300 MQTT messages/s into the same process)` };
    expect(cold.bytesTransferred).toBeGreaterThan(10_000);
    expect(repeat.bytesTransferred).toBeGreaterThan(10_000);
  });

  it("the demo's channels appear and their numbers change live", async () => {
    await expect.poll(async () => (await page.locator('.entry[data-channel] .channel-name').allTextContents()).sort(), { timeout: 10_000 }).toEqual(DEMO_CHANNELS);
    const n = page.locator('.entry[data-channel="hx7.water_flow_kg_s"] [data-field="n"]');
    const last = page.locator('.entry[data-channel="hx7.glycol_in_degC"] [data-field="last"]');
    const firstN = await n.textContent();
    const firstLast = await last.textContent();
    await expect.poll(() => text(n), { timeout: 5000 }).not.toBe(firstN);
    await expect.poll(() => text(last), { timeout: 5000 }).not.toBe(firstLast);
    // Every entry states its state in the API's word, with its glyph.
    for (const word of await page.locator('.entry[data-channel] [data-field="state"]').allTextContents()) expect(word).toMatch(/^(↗ WARMING|≈ STEADY|✓ PRECISE|≠ UNSTEADY|∅ STALE)$/);
    await untilText(page.locator('#connection'), 'link: receiving');
    // Let the flow channels reach their target so the screenshot shows every state of a run.
    await expect.poll(async () => page.locator('.entry[data-channel].st-precise').count(), { timeout: 15_000 }).toBeGreaterThanOrEqual(1);
    await page.screenshot({ path: join(OUTPUT, 'dashboard-overview.png') });
  });

  it('the sheet reads without colour: each entry leads with its verdict and its statement; the ruler only while steady', async () => {
    await page.goto(base);
    const entries = page.locator('.entry[data-channel]');
    await entries.nth(DEMO_CHANNELS.length - 1).waitFor();
    await expect.poll(async () => page.locator('.entry[data-channel] [data-field="mean"]').evaluateAll((spans) => spans.every((s) => /^-?[\d.]+ ± [\d.]+ /.test(s.textContent ?? ''))), { timeout: 10_000 }).toBe(true);
    // Browser-side code as text: this project's type check has no DOM library.
    const rows = await page.evaluate<{ state: string; glyph: string; rule: string; verdict: string; coverage: string; ruler: boolean; progress: string }[]>(`[...document.querySelectorAll('.entry[data-channel]')].map((entry) => ({
      state: entry.querySelector('[data-field="state"]')?.textContent ?? '',
      glyph: entry.querySelector('.entry-glyph')?.textContent ?? '',
      rule: getComputedStyle(entry.querySelector('.entry-rule')).borderLeftStyle,
      verdict: entry.querySelector('[data-field="verdict"]')?.textContent ?? '',
      coverage: entry.querySelector('[data-field="coverage"]')?.textContent ?? '',
      ruler: !entry.querySelector('.ruler').hidden,
      progress: entry.querySelector('[data-field="progress"]')?.textContent ?? '',
    }))`);
    expect(rows).toHaveLength(await entries.count());
    // The glyph and the rule's style tell the state without colour, one of each per state.
    const byState = new Map<string, { glyph: string; rule: string }>();
    for (const row of rows) {
      const word = row.state.split(' ')[1] as string;
      expect(row.state.startsWith(row.glyph)).toBe(true);
      const known = byState.get(word);
      if (known) expect(known).toEqual({ glyph: row.glyph, rule: row.rule });
      byState.set(word, { glyph: row.glyph, rule: row.rule });
      expect(row.verdict).toMatch(/^(Ready to record|Waiting: .+)$/);
      expect(row.coverage).toMatch(/^\(k = [\d.]+, ≈95 %\)$|^no uncertainty yet$/);
      // Not steady: no ruler and no time to target, only when the target will be judged.
      if (/WARMING|UNSTEADY/.test(row.state)) {
        expect(row.ruler).toBe(false);
        expect(row.progress).not.toMatch(/more|samples needed/);
      }
      if (row.ruler && !/target met/.test(row.progress)) expect(row.progress).toMatch(/^[\d\u2009]+ of [\d\u2009]+ samples needed/);
    }
    const glyphs = [...byState.values()].map((v) => v.glyph);
    expect(new Set(glyphs).size).toBe(glyphs.length);
    const styles = [...byState.values()].map((v) => v.rule);
    expect(new Set(styles).size).toBe(styles.length);
    // Units as people write them: the demo's degC channels show °C.
    await untilText(page.locator('.entry[data-channel="hx7.glycol_in_degC"] [data-field="unit"]'), '°C');
  });

  it('light and dark sheets, at 1280 and 1440 px: no text overflows its box, no NaN, null or undefined on any view', async () => {
    const views = ['#/', `#/channel/${encodeURIComponent('hx7.glycol_in_degC')}`, `#/derived/${encodeURIComponent('hx7.heat_duty_kW')}`, '#/test-points'];
    // The shared sheet check (test/browser/sheet-checks.ts): overflow out of its box, NaN/null/undefined text.
    const check = SHEET_CHECK;
    // The check can fail: a word too long for its entry is found.
    await page.goto(base);
    await page.locator('.entry[data-channel]').first().waitFor();
    // Probe and check in one evaluation (a re-render in between would drop the probe).
    const probed = await page.evaluate<{ bad: string[] }>(`(() => { const s = document.createElement('span'); s.id = 'overflow-probe'; s.style.whiteSpace = 'nowrap'; s.textContent = 'x'.repeat(400); document.querySelector('.entry .entry-figures').appendChild(s); const result = ${check}; s.remove(); return result; })()`);
    expect(probed.bad.length).toBeGreaterThan(0);
    for (const theme of ['light', 'dark'] as const) {
      for (const width of [1280, 1440]) {
        const sheet = await context.newPage();
        watchPage(sheet);
        await sheet.emulateMedia({ colorScheme: theme });
        await sheet.setViewportSize({ width, height: 900 });
        for (const view of views) {
          await sheet.goto(`${base}${view}`);
          await sheet.locator(view === '#/' ? '.entry[data-channel]' : view === '#/test-points' ? '#tp-channels input' : '.view:not([hidden]) [data-field="result"]').first().waitFor({ timeout: 10_000 });
          await sheet.waitForTimeout(view.startsWith('#/channel') || view.startsWith('#/derived') ? 2500 : 800);
          expect(await sheet.evaluate('document.documentElement.dataset.theme')).toBe(theme);
          const found = await sheet.evaluate<{ bad: string[]; words: string[] }>(check);
          expect(found.bad, `${theme} ${width} ${view}`).toEqual([]);
          expect(found.words, `${theme} ${width} ${view}`).toEqual([]);
          if (width === 1440) await sheet.screenshot({ path: join(OUTPUT, `sheet-${theme}-${view.replace(/[^a-z]+/gi, '-').replace(/^-|-$/g, '') || 'overview'}.png`), fullPage: true });
        }
        await sheet.close();
      }
    }
    // The two sheets differ in paper and ink, and the choice is the reader's: the toggle switches it.
    await page.goto(base);
    const paper = () => page.evaluate<string>('getComputedStyle(document.body).backgroundColor');
    const before = await paper();
    await page.locator('#theme-toggle').focus();
    await page.keyboard.press('Enter');
    await expect.poll(paper).not.toBe(before);
    await page.keyboard.press('Enter');
    await expect.poll(paper).toBe(before);
    expect(alarms).toEqual([]);
  }, 120_000);

  it('keyboard only: open a channel from the sheet, come back, acknowledge an alert with a note (or cancel)', async () => {
    await page.goto(base);
    await page.locator('.entry[data-channel]').first().waitFor();
    // Tab from the top of the page until an entry has the focus, then Enter opens it.
    let focused = '';
    for (let i = 0; i < 40 && !focused.startsWith('entry'); i++) {
      await page.keyboard.press('Tab');
      focused = await page.evaluate<string>('document.activeElement?.className ?? ""');
    }
    expect(focused).toMatch(/^entry/);
    const name = await page.evaluate<string>('document.activeElement.dataset.channel ?? document.activeElement.dataset.derived');
    await page.keyboard.press('Enter');
    await expect.poll(() => page.url()).toMatch(/#\/(channel|derived)\//);
    await page.locator('.view:not([hidden]) .back').focus();
    await page.keyboard.press('Enter');
    await expect.poll(() => page.url()).toMatch(/#\/$/);
    expect(name.length).toBeGreaterThan(0);
    // An alert to acknowledge: a refused command on the MQTT command topic.
    await publish('plateau/hx7/command/test-point/start', 'start please');
    const item = page.locator('.feed-item[data-kind="command-refused"]').first();
    await item.waitFor({ timeout: 10_000 });
    await untilText(item.locator('.feed-detail'), /payload is not a JSON object/);
    await item.locator('button.ack').focus();
    await page.keyboard.press('Enter');
    await page.keyboard.press('Escape'); // cancel: the alert stays open
    await untilVisible(item.locator('button.ack'));
    await item.locator('button.ack').focus();
    await page.keyboard.press('Enter');
    await page.keyboard.type('sequencer sent text, fixed');
    await page.keyboard.press('Enter');
    await untilText(item.locator('.ack-done'), /acknowledged .*: sequencer sent text, fixed$/);
    // The source of an event is a link only when it has a view.
    expect(await page.locator('.feed-item[data-kind="command-refused"] .feed-source').first().evaluate((e) => e.tagName)).toBe('SPAN');
    expect(alarms).toEqual([]);
  });

  it('the derived result: its tile shows value ± U, k, the uncorrelated U and its state; its view draws the uncertainty budget', async () => {
    const name = 'hx7.heat_duty_kW';
    await page.goto(base);
    const tile = page.locator(`.derived-entry[data-derived="${name}"]`);
    await untilText(tile.locator('[data-field="value"]'), /^-?\d+(\.\d+)?$/);
    await untilText(tile.locator('[data-field="uncertainty"]'), /^± [\d.]+ kW$/);
    await untilText(tile.locator('[data-field="coverage"]'), /^\(k = [\d.]+, ≈95 %\)$/);
    await untilText(tile.locator('[data-field="independent"]'), /^± [\d.]+ kW$/);
    await untilText(tile.locator('[data-field="inputs"]'), /^[0-3] of 3$/);
    expect(await tile.locator('[data-field="state"]').textContent()).toMatch(/^(↗ WAITING FOR INPUTS|≈ STEADY|✓ PRECISE)$/);
    await tile.click();
    await expect.poll(() => page.url()).toMatch(/#\/derived\/hx7\.heat_duty_kW$/);
    const detail = await api<{ inputs: string[]; covarianceTerms: unknown[] }>(`api/derived/${name}`);
    // A bar per input, one per pair of inputs, and their sum.
    const bars = page.locator('#derived-budget .budget-bar');
    await expect.poll(() => bars.count(), { timeout: 10_000 }).toBe(detail.body.inputs.length + detail.body.covarianceTerms.length + 1);
    expect(await page.locator('#derived-budget .budget-row[data-kind="variance"]').evaluateAll((rows) => rows.map((r) => r.getAttribute('data-label')))).toEqual(detail.body.inputs);
    // The bars are drawn to scale from one zero line: length proportional to the share, a negative
    // share to the left (a covariance term that reduces u_c). Positions are in SVG user units;
    // 0.5 allows for the 1-unit minimum width of a bar near zero.
    const geometry = await bars.evaluateAll((rects) => rects.map((r) => ({ x: Number(r.getAttribute('x')), width: Number(r.getAttribute('width')), percent: Number(r.getAttribute('data-percent')) })));
    const total = geometry.at(-1) as { x: number; width: number; percent: number };
    expect(total.percent).toBe(100);
    const zero = total.x;
    const scale = total.width / 100;
    for (const bar of geometry) {
      if (Math.abs(bar.percent) * scale < 1) continue;
      expect(Math.abs(bar.width - Math.abs(bar.percent) * scale)).toBeLessThan(0.5);
      expect(Math.abs((bar.percent < 0 ? bar.x + bar.width : bar.x) - zero)).toBeLessThan(0.5);
    }
    await expect.poll(() => page.locator('#derived-inputs tr').count()).toBe(detail.body.inputs.length);
    await expect.poll(() => page.locator('#derived-covariance tr').count()).toBe(detail.body.covarianceTerms.length);
    await untilText(page.locator('.view-derived [data-field="statement"]'), /^hx7\.heat_duty_kW = \(.+\) kW, where the number following ± is the expanded uncertainty/);
    await untilVisible(page.locator('#derived-events li'));
    await page.screenshot({ path: join(OUTPUT, 'dashboard-derived.png'), fullPage: true });
    expect(alarms).toEqual([]);
  });

  it('a test point started from the page reaches ready faster than real time; its CSV export matches the API', async () => {
    await page.goto(`${base}#/test-points`);
    await page.locator('#tp-channels input').first().waitFor();
    for (const name of FLOW) await page.check(`#tp-channels input[value="${name}"]`);
    await page.fill('#tp-name', 'HX-7 flow check');
    const started = Date.now();
    await page.click('#tp-start');
    await untilText(page.locator('#tp-message'), /Started HX-7 flow check/);
    const card = page.locator('.tp-card', { has: page.locator('.tp-title', { hasText: 'HX-7 flow check' }) });
    await expect.poll(() => card.getAttribute('data-state', { timeout: 250 }).catch(() => null), { timeout: 30_000, interval: 50 }).toBe('ready');
    const readyAfterMs = Date.now() - started;
    const id = (await card.getAttribute('data-test-point')) as string;
    await expect.poll(() => card.locator('.record-table tbody tr').count(), { timeout: 5000 }).toBe(FLOW.length);
    const point = await api<{ testPoint: { state: string; createdMs: number; readyMs: number }; records: unknown[] }>(`api/test-points/${id}`);
    expect(point.body.testPoint.state).toBe('ready');
    figures.testPointReady = { speed: SPEED, wallSeconds: readyAfterMs / 1000, channels: FLOW };

    const csvLink = card.locator('a[data-export="csv"]');
    const [download] = await Promise.all([page.waitForEvent('download'), csvLink.click()]);
    const csvFromPage = readFileSync((await download.path()) as string, 'utf8');
    const csvFromApi = await api<null>(`api/test-points/${id}/record.csv`);
    expect(csvFromApi.status).toBe(200);
    expect(csvFromPage).toBe(csvFromApi.text);
    expect(download.suggestedFilename()).toBe(`${id}.csv`);
    // The numbers in the CSV are the record's.
    const record = await api<{ entries: { channel: string; mean: number; expandedUncertainty: number }[] }>(`api/test-points/${id}/record.json`);
    const rows = csvFromPage.trim().split('\r\n').slice(1).map((line) => line.split(','));
    for (const entry of record.body.entries) {
      const row = rows.find((r) => r[0] === entry.channel) as string[];
      expect(Number(row[2])).toBe(entry.mean);
      expect(Number(row[6])).toBe(entry.expandedUncertainty);
    }
    const [jsonDownload] = await Promise.all([page.waitForEvent('download'), card.locator('a[data-export="json"]').click()]);
    expect(JSON.parse(readFileSync((await jsonDownload.path()) as string, 'utf8'))).toEqual(record.body);
    await page.screenshot({ path: join(OUTPUT, 'dashboard-test-points.png'), fullPage: true });
  });

  it('the channel view: trace with the mean, band and cut, ACF with tau_int and window, Allan deviation, CUSUM, events', async () => {
    await page.goto(`${base}#/channel/${encodeURIComponent('hx7.glycol_flow_kg_s')}`);
    for (const id of ['chart-trace', 'chart-acf', 'chart-allan', 'chart-cusum']) await page.locator(`#${id} canvas`).first().waitFor({ timeout: 10_000 });
    await untilText(page.locator('.view-channel .chart-note'), /samples/);
    await untilText(page.locator(".view-channel"), /τ_int = [\d.]+ samples by ar, an autoregression of order \d+/);
    await untilText(page.locator(".verdict-panel"), /Ready to record|waiting|warm-up|effective-samples|target/);
    await untilText(page.locator('.view-channel [data-field="result"]'), /^[\d.]+ ± [\d.]+ kg\/s$/);
    await untilVisible(page.locator('.view-channel .channel-events li'));
    // The test point restarted this channel's window: the trace shows the samples before it, shaded.
    await untilText(page.locator('.view-channel'), /are outside the averaging window/);
    // The uncertainty budget (issue 10): the Type A line, and u_c, nu_eff, k and U above it.
    await untilText(page.locator('.view-channel .budget-panel'), /u_c = [\d.e-]+ kg\/s, ν_eff = [\d.∞]+, k = [\d.]+, U = [\d.e-]+ kg\/s/);
    // Units in the headings of the tables' numbers.
    await untilText(page.locator('.view-channel .budget-panel thead'), /contribution \(kg\/s\)/);
    await untilText(page.locator('.view-channel .budget-panel tbody'), /Type A: scatter of the readings/);
    // The demo's time stamps are simulated, and the page says so under the trace.
    await untilText(page.locator('.view-channel'), /Times: simulated time of the demo's rig \(40x real time\), time of day, 24 h/);
    await page.waitForTimeout(500);
    await page.screenshot({ path: join(OUTPUT, 'dashboard-channel.png'), fullPage: true });
  });

  it('text from the network is shown as text and runs nothing', async () => {
    const payload = '<img src=x onerror="window.__pwned=1;alert(1)">';
    await page.goto(base);
    await page.locator('.entry').first().waitFor();
    // A channel named with markup: the decoder refuses the name (letters, digits, _ . : - / only).
    const before = (await api<{ samples: { rejected: Record<string, number> } }>('api/counters')).body.samples.rejected['bad-channel'] ?? 0;
    await publish(`rig/hx7/${payload}`, JSON.stringify({ v: 1, t: Date.now() / 1000 }));
    await publish('rig/hx7/<svg onload=window.__pwned=4>', JSON.stringify({ v: 1, t: Date.now() / 1000 }));
    await expect.poll(async () => (await api<{ samples: { rejected: Record<string, number> } }>('api/counters')).body.samples.rejected['bad-channel'], { timeout: 5000 }).toBe(before + 2);
    // A unit carrying markup (SenML base unit, accepted as text) on a valid channel name.
    await publish('rig/hx7/senml', JSON.stringify([{ bn: 'hx7.', bt: Date.now() / 1000, bu: payload, n: 'probe_markup', v: 3.25 }, { n: 'probe_markup', t: 0.1, v: 3.5 }]));
    const tile = page.locator('.entry[data-channel="hx7.probe_markup"]');
    await untilText(tile.locator('[data-field="unit"]'), payload);
    // A test point name and a note carrying markup.
    const name = '<script>window.__pwned=2</script>Set point <b>2</b>';
    const note = '<img src=x onerror="window.__pwned=3"> & "quoted"';
    const created = await api<{ testPoint: { id: string } }>('api/test-points', { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ name, channels: ['hx7.probe_markup'] }) });
    expect(created.status).toBe(201);
    const id = created.body.testPoint.id;
    expect((await api(`api/test-points/${id}/annotations`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ text: note }) })).status).toBe(201);
    await page.goto(`${base}#/test-points`);
    const card = page.locator(`.tp-card[data-test-point="${id}"]`);
    await untilText(card.locator('.tp-title'), name);
    await untilText(card.locator('.note-text'), note);
    await untilText(page.locator('.feed-item[data-kind="test-point-annotated"] .feed-detail'), note);
    await page.goto(`${base}#/channel/${encodeURIComponent('hx7.probe_markup')}`);
    await untilText(page.locator('.view-channel [data-field="unit"]'), ` ${payload}`);
    // Nothing was interpreted: no element from a payload, no script ran, no dialog, no page error.
    const state = await page.evaluate(`({ images: document.querySelectorAll('img').length, bold: document.querySelectorAll('b').length, scripts: [...document.querySelectorAll('script')].map((s) => s.getAttribute('src')), pwned: window.__pwned ?? null })`);
    expect(state).toEqual({ images: 0, bold: 0, scripts: ['/vendor/uPlot.iife.min.js', '/dashboard/app.js'], pwned: null });
    // The printable report too.
    const report = await context.newPage();
    watchPage(report);
    await report.goto(`${base}api/test-points/${id}/report`);
    await untilText(report.locator('h1'), `Test point report: ${name}`);
    expect(await report.evaluate(`({ images: document.querySelectorAll('img').length, scripts: document.querySelectorAll('script').length, pwned: window.__pwned ?? null })`)).toEqual({ images: 0, scripts: 0, pwned: null });
    await report.screenshot({ path: join(OUTPUT, 'report.png'), fullPage: false });
    await report.close();
    expect(alarms).toEqual([]);
  });

  it('a write without the token is refused when the daemon listens beyond 127.0.0.1 (with a token)', async () => {
    const guarded = await startServer(demo.daemon, { host: '127.0.0.2', port: 0, token: TOKEN, maxBodyBytes: 65_536 });
    extraServers.push(guarded);
    const countBefore = demo.daemon.testPoints.list().length;
    // Without the token, from outside the page.
    const direct = await fetch(`${guarded.url}api/test-points`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ channels: FLOW }) });
    expect(direct.status).toBe(401);
    expect(((await direct.json()) as { error: string }).error).toBe('ERR_TOKEN');
    const other = await context.newPage();
    watchPage(other);
    await other.goto(`${guarded.url}#/test-points`);
    await untilText(other.locator('#write-key'), 'write key needed');
    await other.locator(`#tp-channels input[value="${FLOW[0]}"]`).check();
    await other.fill('#tp-name', 'without the key');
    await other.click('#tp-start');
    await untilText(other.locator('#tp-message'), /^Refused: this write needs the token/);
    await untilVisible(other.locator('#key-dialog'));
    expect(demo.daemon.testPoints.list().length).toBe(countBefore);
    // With the key entered in the page, the same write goes through.
    await other.fill('#key-input', TOKEN);
    await other.click('#key-form button[type="submit"]');
    await untilText(other.locator('#write-key'), 'write key set');
    await other.fill('#tp-name', 'with the key');
    await other.click('#tp-start');
    await untilText(other.locator('#tp-message'), /^Started with the key over [^ ]+\. The form is cleared for the next test point\.$/);
    expect(demo.daemon.testPoints.list().length).toBe(countBefore + 1);
    await other.close();
    expect(alarms).toEqual([]);
  });

  it('latency from a sample\'s publish to its number changing on the page, under load', async () => {
    await page.goto(base);
    // The probe channel: its value is a sequence number, published with the time it was sent.
    let seq = 0;
    const sentAt = new Map<number, number>();
    const send = async () => {
      seq++;
      sentAt.set(seq, Date.now());
      await publish('rig/hx7/probe_latency', JSON.stringify({ v: seq, t: Date.now() / 1000 }));
    };
    await send();
    const last = page.locator('.entry[data-channel="hx7.probe_latency"] [data-field="last"]');
    await last.waitFor({ timeout: 10_000 });
    // Records each change of the number on the page with the browser's clock (the same system
    // clock as this process's Date.now on one machine).
    await page.evaluate(`(() => {
      const target = document.querySelector('.entry[data-channel="hx7.probe_latency"] [data-field="last"]');
      const seen = [];
      window.__seen = seen;
      new MutationObserver(() => seen.push({ text: target.textContent, atMs: Date.now() })).observe(target, { childList: true, characterData: true, subtree: true });
    })()`);
    const publishedBefore = demo.publisher.published;
    const acceptedBefore = demo.daemon.counters.accepted;
    const started = Date.now();
    const durationMs = 8000;
    // One probe sample every 20 ms, not waiting for the broker's acknowledgement.
    const sending: Promise<void>[] = [];
    const timer = setInterval(() => sending.push(send()), 20);
    await new Promise((resolve) => setTimeout(resolve, durationMs));
    clearInterval(timer);
    await Promise.all(sending);
    const elapsedSeconds = (Date.now() - started) / 1000;
    await page.waitForTimeout(1000);
    const seen = await page.evaluate<{ text: string; atMs: number }[]>('window.__seen');
    // (1) Each number shown: from the publish of that sample to its appearance.
    const shown: number[] = [];
    const changes: { seq: number; atMs: number }[] = [];
    for (const change of seen) {
      const value = Number(change.text);
      const sent = sentAt.get(value);
      if (sent === undefined) continue;
      shown.push(change.atMs - sent);
      changes.push({ seq: value, atMs: change.atMs });
    }
    // (2) Each sample published: until the page shows it or a later one (what a reader waits for,
    // including the throttle; samples overtaken within one update interval are never shown).
    const reflected: number[] = [];
    const firstSeen = changes[0]?.seq ?? Number.POSITIVE_INFINITY;
    for (const [value, sent] of sentAt) {
      if (value <= firstSeen) continue;
      const change = changes.find((c) => c.seq >= value);
      if (change) reflected.push(change.atMs - sent);
    }
    shown.sort((a, b) => a - b);
    reflected.sort((a, b) => a - b);
    const latencies = shown;
    expect(shown.length).toBeGreaterThan(10);
    expect(reflected.length).toBeGreaterThan(100);
    figures.publishToPageLatency = {
      shownSample: { p50Ms: Math.round(quantile(shown, 0.5)), p99Ms: Math.round(quantile(shown, 0.99)), maxMs: shown.at(-1), count: shown.length },
      anySampleUntilReflected: { p50Ms: Math.round(quantile(reflected, 0.5)), p99Ms: Math.round(quantile(reflected, 0.99)), maxMs: reflected.at(-1), count: reflected.length },
      probeSamplesSent: seq,
      probeIntervalMs: 20,
      load: {
        rigMessagesPerSecond: Math.round((demo.publisher.published - publishedBefore) / elapsedSeconds),
        samplesAcceptedPerSecond: Math.round((demo.daemon.counters.accepted - acceptedBefore) / elapsedSeconds),
        speed: SPEED,
      },
    };
    // The page updates a few times a second whatever the rate: one change per 250 ms tick at most.
    expect(latencies.length).toBeLessThanOrEqual(Math.ceil((elapsedSeconds * 1000) / 250) + 2);
    expect(quantile(reflected, 0.5)).toBeLessThan(1000);
  });

  it('the page shows the lost connection and recovers by itself when the daemon comes back', async () => {
    await page.goto(base);
    await untilText(page.locator('#connection'), 'link: receiving');
    const port = demo.server.port;
    await demo.server.close();
    await untilText(page.locator('#connection'), '! link lost: values frozen', 5000);
    await untilVisible(page.locator('#connection-banner'));
    await untilText(page.locator('#connection-banner-text'), /reconnecting/);
    await page.screenshot({ path: join(OUTPUT, 'dashboard-connection-lost.png') });
    await page.waitForTimeout(1500);
    const revived = await startServer(demo.daemon, { host: '127.0.0.1', port, token: null, maxBodyBytes: 65_536 });
    extraServers.push(revived);
    expect(revived.port).toBe(port);
    await untilText(page.locator('#connection'), 'link: receiving', 15_000);
    await untilVisible(page.locator('#connection-banner'), false);
    const n = page.locator('.entry[data-channel="hx7.glycol_in_degC"] [data-field="n"]');
    const before = await n.textContent();
    await expect.poll(() => text(n), { timeout: 5000 }).not.toBe(before);
    expect(alarms).toEqual([]);
  });
});
