import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import Database from 'better-sqlite3';
import pino from 'pino';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { MqttClient } from 'mqtt';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { buildHttpApp } from '../../src/server/http-app.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import type { StoredEvent } from '../../src/ports/store.js';
import { mqttClient, publishAsync, unique, waitFor } from '../helpers/brokers.js';
import { testConfig } from '../helpers/daemon-config.js';
import { startOwnMosquitto, type OwnMosquitto } from '../helpers/mosquitto.js';
import { storedSeries } from '../helpers/stored-series.js';

// Commit failures with a real broker in front of the daemon (QoS 1, persistent session) and real
// SQLite failures behind it: the file full (PRAGMA max_page_count: SQLITE_FULL), the file locked by
// another writer (SQLITE_BUSY), and faults thrown inside the real transaction at random commits
// under load. Each time: /healthz answers 503 while commits fail, nothing is acknowledged that is
// not stored, the daemon recovers by itself, and every published sample is stored exactly once,
// in order. Over the embedded broker (aedes) always, and over a Mosquitto of the test's own on a
// free port when the mosquitto package is installed.

const T0 = 1_764_500_000;
const CHANNELS = ['oven.zone1_degC', 'oven.zone2_degC'];

let embedded: EmbeddedBroker;
let mosquitto: OwnMosquitto | null = null;

beforeAll(async () => {
  embedded = await startEmbeddedBroker({ port: 0 });
  mosquitto = await startOwnMosquitto();
  if (mosquitto === null) console.log('mosquitto is not installed: the Mosquitto cases of the commit-failure test are skipped');
});
afterAll(async () => {
  await embedded.close();
  await mosquitto?.stop();
});

interface Run {
  daemon: Daemon;
  store: SqliteStore;
  path: string;
  prefix: string;
  publisher: MqttClient;
  published: Map<string, number[]>;
  events: StoredEvent[];
  statuses: number[];
  step: number;
  health(): Promise<number>;
  close(): Promise<void>;
}

async function start(url: string, inTransaction?: () => void): Promise<Run> {
  const prefix = unique('commitfail');
  const path = join(mkdtempSync(join(tmpdir(), 'plateau-commitfail-')), 'state.sqlite');
  const config = testConfig({ url, prefix, clientId: unique('plateau-cf'), store: path });
  const store = new SqliteStore(path, inTransaction ? { inTransaction } : {});
  const daemon = new Daemon(config, { store, logger: pino({ level: 'silent' }), commitRetry: { initialMs: 50, maxMs: 400 } });
  await daemon.start();
  await waitFor(() => daemon.ingest?.connected === true, 5000, 'the daemon to connect');
  await new Promise((resolve) => setTimeout(resolve, 200));
  const publisher = await mqttClient(url, unique('cf-pub'));
  const app = buildHttpApp(daemon, { token: null, maxBodyBytes: 65536 });
  const run: Run = {
    daemon,
    store,
    path,
    prefix,
    publisher,
    published: new Map(CHANNELS.map((c) => [c, []])),
    events: [],
    statuses: [],
    step: 0,
    health: async () => {
      const status = (await app.inject({ method: 'GET', url: '/healthz' })).statusCode;
      run.statuses.push(status);
      return status;
    },
    close: async () => {
      publisher.end(true);
      await app.close();
      await daemon.stop();
    },
  };
  daemon.onEvent((event) => run.events.push(event));
  return run;
}

/** Publishes `steps` steps (one message per channel each), QoS 1, waiting for the broker's acknowledgements. */
async function publish(run: Run, steps: number): Promise<void> {
  const sends: Promise<void>[] = [];
  for (let k = 0; k < steps; k++, run.step++) {
    CHANNELS.forEach((channel, c) => {
      const value = 180 + 5 * c + Math.sin(run.step / 11 + c);
      (run.published.get(channel) as number[]).push(value);
      sends.push(publishAsync(run.publisher, `${run.prefix}/${channel}`, JSON.stringify({ v: value, t: T0 + run.step * 0.05 })));
    });
    if (sends.length >= 200) await Promise.all(sends.splice(0));
  }
  await Promise.all(sends);
}

function storedCount(run: Run): number {
  return storedSeries(run.store, CHANNELS[0] as string).values.length;
}

async function expectEverythingStoredOnce(run: Run): Promise<void> {
  await waitFor(() => run.daemon.counters.accepted >= 2 * run.step, 30_000, `${2 * run.step} samples to be accepted`);
  await waitFor(async () => (await run.health()) === 200 && run.daemon.health().store.pendingSamples === 0, 10_000, 'the daemon to be healthy with nothing pending');
  expect(run.daemon.counters.accepted).toBe(2 * run.step);
  for (const channel of CHANNELS) {
    const stored = storedSeries(run.store, channel);
    expect(stored.contiguous, `${channel}: no gap, no repeat in the stored sample indices`).toBe(true);
    // Every published sample stored once. Messages redelivered after a broker restart can come
    // after newer ones: they are stored in arrival order, as late samples.
    const published = run.published.get(channel) as number[];
    const byTime = stored.times.map((t, i) => [t, stored.values[i]] as [number, number]).sort((a, b) => a[0] - b[0]);
    expect(byTime.map(([, v]) => v), `${channel}: every published sample stored once`).toEqual(published);
    expect(new Set(stored.times).size).toBe(published.length);
    if (run.daemon.counters.late === 0) expect(stored.values).toEqual(published);
    expect(run.daemon.registry.get(channel)?.pipeline.totalReceived).toBe(run.step);
  }
}

/** While commits fail: 503, and neither the stored samples nor the acknowledgements sent move although messages wait. */
async function expectUnhealthyAndSilent(run: Run): Promise<void> {
  await waitFor(async () => (await run.health()) === 503, 10_000, '/healthz to answer 503');
  expect(run.daemon.health().status).toBe('failing');
  const storedBefore = storedCount(run);
  const acknowledged = run.daemon.commits.acknowledgedCount;
  await new Promise((resolve) => setTimeout(resolve, 600));
  expect(await run.health()).toBe(503);
  expect(run.daemon.commits.acknowledgedCount).toBe(acknowledged);
  expect(run.daemon.ingest?.unacknowledged as number).toBeGreaterThan(0);
  expect(storedCount(run)).toBe(storedBefore);
  expect(run.daemon.health().store.attempts).toBeGreaterThan(1);
}

describe.each([
  ['embedded broker (aedes)', (): string | null => embedded.url],
  ["Mosquitto (the test's own, on a free port)", (): string | null => mosquitto?.url ?? null],
])('commit failures over the %s', (_label, url) => {
  it('the file full (SQLITE_FULL): 503 and no acknowledgement while full, then recovery by itself with every sample stored once', async (context) => {
    const at = url();
    if (at === null) return context.skip();
    const run = await start(at);
    await publish(run, 100);
    await waitFor(() => storedCount(run) === 100 && run.daemon.health().store.pendingSamples === 0, 10_000, 'the first samples to be stored');
    expect(await run.health()).toBe(200);
    run.store.pragma(`max_page_count = ${run.store.pragma('page_count') as number}`);
    const sending = publish(run, 400);
    await expectUnhealthyAndSilent(run);
    expect(run.daemon.health().store.lastError?.code).toBe('ERR_STORE_FULL');
    run.store.pragma('max_page_count = 1073741823');
    await sending;
    await expectEverythingStoredOnce(run);
    expect(run.events.filter((e) => e.kind === 'store-recovered')).toHaveLength(1);
    await run.close();
  }, 60_000);

  it('the file locked by another writer (SQLITE_BUSY): 503 and no acknowledgement while locked, every sample stored once after', async (context) => {
    const at = url();
    if (at === null) return context.skip();
    const run = await start(at);
    await publish(run, 50);
    await waitFor(() => storedCount(run) === 50 && run.daemon.health().store.pendingSamples === 0, 10_000, 'the first samples to be stored');
    const other = new Database(run.path);
    other.exec('BEGIN IMMEDIATE');
    const sending = publish(run, 300);
    await expectUnhealthyAndSilent(run);
    expect(run.daemon.health().store.lastError?.code).toBe('ERR_STORE_BUSY');
    other.exec('COMMIT');
    other.close();
    await sending;
    await expectEverythingStoredOnce(run);
    await run.close();
  }, 60_000);

  it('faults at random commits under load: nothing lost, nothing doubled, unhealthy and recovered again and again', async (context) => {
    const at = url();
    if (at === null) return context.skip();
    const random = new SeededRandom(99);
    let inject = true;
    const run = await start(at, () => {
      if (inject && random.uniform() < 0.3) throw new Error('injected fault');
    });
    let failing = 0;
    let previous = 'ok';
    run.daemon.onHealth((health) => {
      if (health.status === 'failing' && previous !== 'failing') failing++;
      previous = health.status;
    });
    await publish(run, 1500);
    // The embedded broker restarts once in the middle (sessions kept): what the daemon held
    // unacknowledged is delivered again and must not be counted twice.
    if (at === embedded.url) await embedded.restart(300);
    await publish(run, 1500);
    await waitFor(() => run.daemon.counters.accepted >= 2 * run.step, 60_000, 'every sample to be accepted');
    inject = false;
    await expectEverythingStoredOnce(run);
    expect(failing).toBeGreaterThanOrEqual(2);
    expect(run.events.filter((e) => e.kind === 'store-recovered')).toHaveLength(failing);
    console.log(`commit faults over ${at}: ${failing} outages, ${run.daemon.health().store.commits} commits, ${run.daemon.counters.rejected.duplicate} redelivered samples recognised as duplicates, ${run.daemon.counters.late} late`);
    await run.close();
  }, 120_000);
});
