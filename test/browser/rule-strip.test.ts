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
import { ROOT } from '../helpers/reference.js';

// The rule strip on a channel tile (dashboard/lib/rule-strip.js), in Debian's Chromium through
// playwright-core: one chip per stability rule with its value against its tolerance, and the rule
// that holds marked apart from the one that does not. The rig (chiller loop CL-3) is invented.

const CHROMIUM = '/usr/bin/chromium';
const available = existsSync(CHROMIUM);
const T0 = 1_790_000_000;

let daemon: Daemon;
let server: RunningServer;
let context: BrowserContext;
let page: Page;
let userDir = '';
const errors: string[] = [];

describe.skipIf(!available)('the rule strip in Chromium', () => {
  beforeAll(async () => {
    const config = parseConfig({
      subscriptions: [{ topic: 'rig/cl3/+', format: 'json', channel: 'cl3.{3}' }],
      channels: { groups: [{ match: 'cl3.supply_degC', unit: 'degC', criteria: { rules: ['iec-60335-2-6', { name: 'tight-band', statistic: 'range', windowSeconds: 60, tolerance: 0.001 }] } }] },
      store: { path: ':memory:' },
      log: { level: 'silent' },
    });
    const source = new MemorySampleSource(daemonSubscriptions(config));
    const clock = new ManualClock(T0 * 1000);
    daemon = new Daemon(config, { logger: pino({ level: 'silent' }), clock, store: new MemoryStore(), source });
    await daemon.start();
    let t = T0;
    for (let i = 0; i < 1200; i++) {
      t += 1;
      source.publish('rig/cl3/supply_degC', JSON.stringify({ v: 7 + 0.01 * Math.sin(i / 7), t }));
    }
    clock.advance(1_200_000);
    daemon.commitNow();
    server = await startServer(daemon, { host: '127.0.0.1', port: 0, token: null, maxBodyBytes: 65536 });
    mkdirSync(join(ROOT, 'test-output'), { recursive: true });
    userDir = mkdtempSync(join(tmpdir(), 'plateau-chromium-'));
    context = await chromium.launchPersistentContext(userDir, { executablePath: CHROMIUM, headless: true, args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking'], viewport: { width: 1200, height: 800 } });
    page = context.pages()[0] ?? (await context.newPage());
    page.on('pageerror', (error) => errors.push(error.message));
  });

  afterAll(async () => {
    await context?.close();
    await server?.close();
    await daemon?.stop();
    if (userDir) rmSync(userDir, { recursive: true, force: true });
  });

  it('one chip per rule, with its value against its tolerance; held and not held told apart', async () => {
    await page.goto(server.url);
    const strip = page.locator('[data-channel="cl3.supply_degC"] .rule-strip');
    await expect.poll(() => strip.locator('.rule-chip').count(), { timeout: 15_000, interval: 100 }).toBe(2);
    const chips = strip.locator('.rule-chip');
    expect(await chips.nth(0).locator('.rule-name').textContent()).toBe('iec-60335-2-6');
    expect(await chips.nth(0).getAttribute('class')).toContain('rule-holds');
    expect(await chips.nth(0).locator('.rule-value').textContent()).toMatch(/^0\.0\d+ \/ 1$/);
    expect(await chips.nth(1).getAttribute('class')).toContain('rule-not-met');
    expect(await chips.nth(1).locator('.rule-value').textContent()).toMatch(/^0\.0\d+ \/ 0\.001$/);
    expect(await chips.nth(1).getAttribute('title')).toMatch(/tight-band: does not hold, margin -0\.0\d+ degC/);
    await page.locator('[data-channel="cl3.supply_degC"]').screenshot({ path: join(ROOT, 'test-output', 'rule-strip.png') });
    expect(errors).toEqual([]);
  });
});
