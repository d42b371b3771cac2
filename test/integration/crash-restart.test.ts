import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { analyzeFile } from '../../src/cli/analyze.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';
import { SeededRandom, ar1Series } from '../../src/core/random/seeded-random.js';
import { mqttClient, publishAsync, unique, waitFor } from '../helpers/brokers.js';
import { getJson, killHard, startDaemonProcess, type DaemonProcess } from '../helpers/daemon-process.js';

// SIGKILL during a QoS 1 stream, then a restart: no acknowledged sample is lost or counted twice,
// and the final statistics equal those of an uninterrupted replay of the same samples. The broker
// (embedded, in this test's process) keeps the daemon's persistent session while it is down.

const N = 12_000;
const T0 = 1_764_100_000;

let broker: EmbeddedBroker;
beforeAll(async () => {
  broker = await startEmbeddedBroker({ port: 0 });
});
afterAll(async () => {
  await broker.close();
});

interface Counters {
  samples: { accepted: number; rejected: Record<string, number> };
}

describe('a daemon killed with SIGKILL mid-stream', () => {
  it('loses nothing acknowledged, counts nothing twice, and ends with the statistics of an uninterrupted replay', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'plateau-kill-'));
    const prefix = unique('kill');
    const config = {
      broker: { url: broker.url, clientId: unique('plateau-kill'), qos: 1, reconnectPeriodMs: 200 },
      subscriptions: [{ topic: `${prefix}/+`, format: 'json', channel: '{2}', valueField: 'v', timeField: 't' }],
      channels: { defaults: { window: { kind: 'growing' } } },
      store: { path: join(dir, 'state.sqlite'), checkpointSamples: 2000 },
      http: { listen: '127.0.0.1:0' },
      topics: { events: `${prefix}-p/events`, status: `${prefix}-p/status`, command: `${prefix}-p/command` },
      log: { level: 'silent' },
    };
    let daemon: DaemonProcess = await startDaemonProcess(dir, config);
    await waitFor(async () => (await getJson<{ broker: string }>(`${daemon.url}healthz`)).broker === 'connected', 10_000, 'the daemon to connect');
    await new Promise((resolve) => setTimeout(resolve, 200));
    const publisher = await mqttClient(broker.url, unique('kill-pub'));
    const random = new SeededRandom(5);
    const a = ar1Series(random, 0.9, N).map((v) => 75 + 0.02 * v);
    const b = ar1Series(random, 0.5, N).map((v) => 0.4 + 0.001 * v);
    const rows = ['time,oil_degC,valve_frac'];
    for (let i = 0; i < N; i++) rows.push(`${T0 + i * 0.05},${a[i]},${b[i]}`);
    let killed = false;
    const sends: Promise<void>[] = [];
    for (let i = 0; i < N; i++) {
      const t = T0 + i * 0.05;
      sends.push(publishAsync(publisher, `${prefix}/oil_degC`, JSON.stringify({ v: a[i], t })));
      sends.push(publishAsync(publisher, `${prefix}/valve_frac`, JSON.stringify({ v: b[i], t })));
      if (i % 500 === 499) await Promise.all(sends.splice(0));
      if (!killed && i === Math.floor(N * 0.45)) {
        // Kill as soon as a good part has been committed, in the middle of the stream.
        await waitFor(async () => (await getJson<Counters>(`${daemon.url}api/counters`)).samples.accepted > 0.3 * 2 * N, 20_000, 'part of the stream to be committed');
        await killHard(daemon);
        killed = true;
      }
    }
    await Promise.all(sends);
    daemon = await startDaemonProcess(dir, config);
    await waitFor(async () => (await getJson<Counters>(`${daemon.url}api/counters`)).samples.accepted >= 2 * N, 40_000, 'every sample to be accepted after the restart');
    await new Promise((resolve) => setTimeout(resolve, 300));
    const counters = await getJson<Counters>(`${daemon.url}api/counters`);
    // Every sample accepted exactly once; messages redelivered after the kill were recognised.
    expect(counters.samples.accepted).toBe(2 * N);
    const restored = await getJson<{ restore: { samples: number } }>(`${daemon.url}api/counters`);
    expect(restored.restore.samples).toBeLessThan(2 * N); // rebuilt from a checkpoint plus a replay, not from zero
    const api = (await getJson<{ channels: Record<string, unknown>[] }>(`${daemon.url}api/channels`)).channels;
    const file = join(dir, 'all.csv');
    writeFileSync(file, `${rows.join('\n')}\n`);
    const report = await analyzeFile(file, DEFAULT_CHANNEL_OPTIONS);
    for (const name of ['oil_degC', 'valve_frac']) {
      const live = api.find((c) => c.name === name) as Record<string, unknown>;
      const replay = report.channels.find((c) => c.name === name) as unknown as Record<string, unknown>;
      expect(live.received).toBe(N);
      for (const key of ['n', 'mean', 'sd', 'acf', 'tauInt', 'standardUncertainty', 'dof', 'expandedUncertainty', 'state', 'excluded', 'stationarity']) {
        expect(live[key], `${name}.${key}`).toEqual(replay[key]);
      }
    }
    publisher.end(true);
    daemon.child.kill('SIGTERM');
    await new Promise((resolve) => daemon.child.once('exit', resolve));
  }, 120_000);
});
