import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pino from 'pino';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { loadConfigFile } from '../../src/config/load-config.js';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import { RigSimulator } from '../../src/sim/rig-simulator.js';
import { startServer, type RunningServer } from '../../src/server/server.js';
import type { TestPointRecord } from '../../src/engine/test-point-record.js';
import { ROOT } from '../helpers/reference.js';

// Honest records in Debian's Chromium through playwright-core (issue 10): the printed report of a
// recorded window (after the channel has moved on), with a provisional channel beside a ready one,
// its running header and page numbers; and the start form, which carries no choice over silently.
// The rig is the demo's seeded simulator of the invented bench HX-7. Screenshots: test-output/.

const CHROMIUM = '/usr/bin/chromium';
const available = existsSync(CHROMIUM);
const START = 1_790_000_000;
const OUTPUT = join(ROOT, 'test-output');
const FLOW = 'hx7.glycol_flow_kg_s';
const DP = 'hx7.shell_dp_kPa';

let daemon: Daemon;
let server: RunningServer;
let context: BrowserContext;
let page: Page;
let userDir = '';
let source: MemorySampleSource;
let rig: RigSimulator;
let clock: ManualClock;
const errors: string[] = [];

function feed(seconds: number): void {
  const until = rig.nextTime + seconds;
  while (rig.nextTime < until) {
    for (const sample of rig.next()) source.publish(`rig/hx7/${sample.channel}`, JSON.stringify({ v: sample.value, t: sample.timeSeconds }));
  }
  clock.advance(seconds * 1000);
  daemon.commitNow();
}

describe.skipIf(!available)('honest records in Chromium', () => {
  beforeAll(async () => {
    const config = loadConfigFile(join(ROOT, 'config', 'hx7-heat-exchanger.yaml'));
    const testConfig = { ...config, store: { ...config.store, path: ':memory:' }, log: { level: 'silent' as const } };
    source = new MemorySampleSource(daemonSubscriptions(testConfig));
    clock = new ManualClock(START * 1000);
    rig = new RigSimulator({ seed: 9, rate: 10, startSeconds: START });
    daemon = new Daemon(testConfig, { logger: pino({ level: 'silent' }), clock, store: new SqliteStore(':memory:'), source });
    await daemon.start();
    feed(20);
    server = await startServer(daemon, { host: '127.0.0.1', port: 0, token: null, maxBodyBytes: 65536 });
    mkdirSync(OUTPUT, { recursive: true });
    userDir = mkdtempSync(join(tmpdir(), 'plateau-chromium-'));
    context = await chromium.launchPersistentContext(userDir, { executablePath: CHROMIUM, headless: true, args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking'], viewport: { width: 1280, height: 900 } });
    page = context.pages()[0] ?? (await context.newPage());
    page.on('pageerror', (error) => errors.push(error.message));
  }, 60_000);

  afterAll(async () => {
    await context?.close();
    await server?.close();
    await daemon?.stop();
    if (userDir) rmSync(userDir, { recursive: true, force: true });
  });

  it('the report of a recorded window: what was recorded after the channel moved on, a provisional channel said so, page numbers and a running header in print', async () => {
    // The flow runs long enough to be steady at its target; the pressure drop, with its tighter target, is not ready by the stop.
    daemon.startTestPoint({ id: 'sp-4', name: 'HX-7 set point 4', channels: [FLOW] });
    feed(60);
    daemon.stopTestPoint('sp-4');
    daemon.startTestPoint({ id: 'sp-5', name: 'HX-7 set point 5', channels: [FLOW, DP] });
    feed(50);
    const stoppedAt = rig.nextTime;
    feed(0.1);
    daemon.stopTestPoint('sp-5');
    const record = (await (await fetch(`${server.url}api/test-points/sp-5/record.json`)).json()) as TestPointRecord;
    const flow = record.entries.find((e) => e.channel === FLOW);
    const dp = record.entries.find((e) => e.channel === DP);
    expect(flow?.provisional).toBe(false);
    // The channel moves on: a shift of +5 kg/s for 30 s after the stop.
    for (let i = 0; i < 300; i++) source.publish('rig/hx7/glycol_flow_kg_s', JSON.stringify({ v: (flow?.mean as number) + 5, t: stoppedAt + 1 + i * 0.1 }));
    daemon.commitNow();
    expect(daemon.channel(FLOW)?.snapshot().mean).toBeGreaterThan((flow?.mean as number) + 1);

    await page.goto(`${server.url}api/test-points/sp-5/report`);
    const flowSection = page.locator('section', { has: page.locator('h2', { hasText: FLOW }) });
    const dpSection = page.locator('section', { has: page.locator('h2', { hasText: DP }) });
    // The ready channel: its recorded statement as a result, its charts of the recorded window.
    expect(await flowSection.locator('p.statement').getAttribute('class')).toBe('statement');
    expect(await flowSection.locator('p.statement').textContent()).toBe(flow?.statement);
    expect(await flowSection.locator('p.note').last().textContent()).toBe(`Charts show the recorded window (n = ${flow?.n}, record sp-5/${record.recordNumber?.split('/')[1]}).`);
    expect(await flowSection.locator('svg[aria-label="Samples, mean and expanded uncertainty U"]').count()).toBe(1);
    // Its trace's y axis spans the recorded samples only (the shift is 5 kg/s above them).
    const ticks = await flowSection.locator('svg[aria-label="Samples, mean and expanded uncertainty U"] text[text-anchor="end"]').allTextContents();
    expect(ticks.length).toBeGreaterThan(1);
    for (const tick of ticks) expect(Number(tick)).toBeLessThan((flow?.mean as number) + 1);
    // The provisional channel: said before its result, why, and no statement styled as one.
    expect(await dpSection.locator('p.statement').getAttribute('class')).toBe('statement none');
    expect(dp?.provisional).toBe(true);
    expect(dp?.provisionalReasons?.length).toBeGreaterThan(0);
    expect(await dpSection.locator('p.provisional').textContent()).toBe(`Provisional. This channel was not ready when the record was made, so its figures are not a measurement result to report: ${dp?.provisionalReasons?.join('; ')}.`);
    expect(await dpSection.locator('h3').first().textContent()).toBe('Figures of the window (provisional: not a result to report)');
    expect(await flowSection.locator('h3').first().textContent()).toBe('Result');
    const borderOf = (section: typeof flowSection) => section.locator('p.statement').evaluate((el) => (globalThis as unknown as { getComputedStyle(e: unknown): Record<string, string> }).getComputedStyle(el).borderLeftColor);
    const statementStyle = await borderOf(dpSection);
    const validStyle = await borderOf(flowSection);
    expect(statementStyle).not.toBe(validStyle);
    // The rig and the record number in the head.
    expect(await page.locator('table.meta').textContent()).toContain('HX-7 (bench HX-7, glycol/water plate heat exchanger)');
    await page.screenshot({ path: join(OUTPUT, 'report-recorded-window.png'), fullPage: false });
    await dpSection.screenshot({ path: join(OUTPUT, 'report-provisional-channel.png') });

    // Print: the page rule with its margin boxes as Chromium parsed it, each channel's charts kept
    // with it (the chart grid is not split and the heading stays with what follows), and a PDF.
    const printRules = (await page.evaluate('[...document.styleSheets].flatMap((sheet) => [...sheet.cssRules]).filter((rule) => rule instanceof CSSPageRule).map((rule) => rule.cssText)')) as string[];
    expect(printRules.join('\n')).toMatch(/@bottom-right \{[^}]*content: "page " counter\(page\) " of " counter\(pages\)/);
    expect(printRules.join('\n')).toMatch(/@top-left \{[^}]*content: "HX-7 \(bench HX-7, glycol\/water plate heat exchanger\), test point sp-5, record sp-5\/\d"/);
    await page.emulateMedia({ media: 'print' });
    expect(await flowSection.locator('.grid').evaluate((el) => (globalThis as unknown as { getComputedStyle(e: unknown): Record<string, string> }).getComputedStyle(el).breakInside)).toBe('avoid');
    expect(await flowSection.locator('h2').evaluate((el) => (globalThis as unknown as { getComputedStyle(e: unknown): Record<string, string> }).getComputedStyle(el).breakAfter)).toBe('avoid');
    await page.screenshot({ path: join(OUTPUT, 'report-print-media.png'), fullPage: false });
    const pdf = await page.pdf({ format: 'A4', printBackground: true });
    const pages = (pdf.toString('latin1').match(/\/Type\s*\/Page[^s]/g) ?? []).length;
    expect(pages).toBeGreaterThan(1);
    await page.emulateMedia({ media: 'screen' });
    expect(errors).toEqual([]);
  }, 120_000);

  it('the start form begins with nothing chosen, says what a start will take, and is empty again after a start', async () => {
    await page.goto(`${server.url}#/test-points`);
    await page.locator(`#tp-channels input[value="${FLOW}"]`).waitFor();
    await expect.poll(() => page.locator('#tp-chosen').textContent()).toBe('Nothing chosen yet.');
    expect(await page.locator('#tp-channels input:checked').count()).toBe(0);
    await page.check(`#tp-channels input[value="${FLOW}"]`);
    await page.check(`#tp-channels input[value="${DP}"]`);
    await expect.poll(() => page.locator('#tp-chosen').textContent()).toBe(`Will start over 2 channels: ${FLOW}, ${DP}.`);
    await page.fill('#tp-name', 'HX-7 set point 6');
    await page.locator('#tp-form').screenshot({ path: join(OUTPUT, 'start-form-chosen.png') });
    await page.click('#tp-start');
    await expect.poll(() => page.locator('#tp-message').textContent()).toBe(`Started HX-7 set point 6 over ${FLOW}, ${DP}. The form is cleared for the next test point.`);
    // Nothing carried over to the next start.
    expect(await page.locator('#tp-channels input:checked').count()).toBe(0);
    expect(await page.locator('#tp-name').inputValue()).toBe('');
    expect(await page.locator('#tp-chosen').textContent()).toBe('Nothing chosen yet.');
    // A start with nothing chosen is refused on the page, before any request.
    await page.click('#tp-start');
    await expect.poll(() => page.locator('#tp-message').textContent()).toBe('Choose at least one channel.');
    const points = daemon.testPointViews().filter((p) => p.name === 'HX-7 set point 6');
    expect(points.map((p) => p.channels)).toEqual([[FLOW, DP]]);
    await page.locator('#tp-form').screenshot({ path: join(OUTPUT, 'start-form-after-start.png') });
    expect(errors).toEqual([]);
  }, 60_000);
});
