import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { writeFileSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { analyzeFile, configuredChannels } from '../../src/cli/analyze.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';
import { buildHttpApp } from '../../src/server/http-app.js';
import { SeededRandom, ar1Series } from '../../src/core/random/seeded-random.js';
import { brokerReachable, mqttClient, publishAsync, unique, waitFor } from '../helpers/brokers.js';
import { testConfig } from '../helpers/daemon-config.js';

// Samples published over MQTT give, through the HTTP API, exactly the statistics that
// `plateau analyze` gives on the same samples (one engine, one code path). Run against the embedded
// broker always, and against Mosquitto at 127.0.0.1:1883 when it answers.

const N = 6000;
const T0 = 1_764_000_000; // epoch seconds of the first sample

function series() {
  const random = new SeededRandom(31);
  const a = ar1Series(random, 0.8, N).map((v) => 40 + 0.05 * v);
  const b = ar1Series(random, 0.3, N).map((v) => 2.5 + 0.01 * v);
  return { a, b };
}

let embedded: EmbeddedBroker;
let mosquitto = false;

beforeAll(async () => {
  embedded = await startEmbeddedBroker({ port: 0 });
  mosquitto = await brokerReachable();
  if (!mosquitto) console.log('Mosquitto is not reachable at 127.0.0.1:1883: its interoperability test is skipped');
});
afterAll(async () => {
  await embedded.close();
});

async function roundTrip(url: string, protocolVersion: 4 | 5, channels?: Record<string, unknown>) {
  const prefix = unique('it-equal');
  const config = testConfig({ url, prefix, clientId: unique('plateau'), ...(channels ? { channels } : {}), extra: { broker: { url, clientId: unique('plateau'), qos: 1, protocolVersion, reconnectPeriodMs: 200 } } });
  const daemon = new Daemon(config);
  await daemon.start();
  await waitFor(() => daemon.ingest?.connected === true, 5000, 'the daemon to connect');
  // Subscriptions are sent on connect; give the broker a moment to register them.
  await new Promise((resolve) => setTimeout(resolve, 200));
  const publisher = await mqttClient(url, unique('pub'));
  const { a, b } = series();
  const rows = ['time,inlet_degC,flow_kg_s'];
  for (let i = 0; i < N; i++) {
    const t = T0 + i * 0.1;
    rows.push(`${t},${a[i]},${b[i]}`);
    // Alternate channels so both arrive interleaved, as from a rig.
    void publishAsync(publisher, `${prefix}/inlet_degC`, JSON.stringify({ v: a[i], t }));
    void publishAsync(publisher, `${prefix}/flow_kg_s`, JSON.stringify({ v: b[i], t }));
    // Pace the publisher: a broker queues at most so many QoS 1 messages for a subscriber
    // (Mosquitto's max_queued_messages defaults to 1000) and drops the rest.
    if (i % 200 === 199) await waitFor(() => daemon.counters.accepted >= 2 * (i + 1) - 600, 20_000, 'the daemon to keep up');
  }
  await waitFor(() => daemon.counters.accepted >= 2 * N, 30_000, `${2 * N} samples to be accepted`);
  const app = buildHttpApp(daemon, { token: null, maxBodyBytes: 65536 });
  const response = await app.inject({ method: 'GET', url: '/api/channels' });
  expect(response.statusCode).toBe(200);
  const api = (response.json() as { channels: Record<string, unknown>[] }).channels;
  const dir = mkdtempSync(join(tmpdir(), 'plateau-eq-'));
  const file = join(dir, 'same.csv');
  writeFileSync(file, `${rows.join('\n')}\n`);
  const report = channels ? await analyzeFile(file, DEFAULT_CHANNEL_OPTIONS, {}, { requests: [] }, configuredChannels(config, {}, DEFAULT_CHANNEL_OPTIONS)) : await analyzeFile(file, DEFAULT_CHANNEL_OPTIONS);
  publisher.end(true);
  await app.close();
  await daemon.stop();
  return { api, report };
}

describe.each([
  ['embedded broker (aedes), MQTT 3.1.1', (): string => embedded.url, 4 as const, (): boolean => true],
  ['Mosquitto at 127.0.0.1:1883, MQTT 3.1.1', (): string => 'mqtt://127.0.0.1:1883', 4 as const, (): boolean => mosquitto],
  ['Mosquitto at 127.0.0.1:1883, MQTT 5', (): string => 'mqtt://127.0.0.1:1883', 5 as const, (): boolean => mosquitto],
])('%s', (_label, url, protocol, available) => {
  it('the API snapshot equals plateau analyze on the same samples, field for field', async (context) => {
    if (!available()) {
      context.skip();
      return;
    }
    const { api, report } = await roundTrip(url(), protocol);
    for (const name of ['inlet_degC', 'flow_kg_s']) {
      const fromApi = api.find((c) => c.name === name) as Record<string, unknown>;
      const fromFile = report.channels.find((c) => c.name === name) as unknown as Record<string, unknown>;
      expect(fromApi).toBeDefined();
      for (const key of ['n', 'mean', 'sd', 'acf', 'tauInt', 'nEff', 'standardUncertainty', 'dof', 'coverageFactor', 'expandedUncertainty', 'confidence', 'state', 'excluded', 'stationarity', 'allan', 'estimators']) {
        expect(fromApi[key], `${name}.${key}`).toEqual(fromFile[key]);
      }
      // Events: the same kinds at the same sample indices.
      // (stale and fresh come from the daemon's wall clock, which analyze does not have.)
      const kinds = (events: unknown) => (events as { kind: string; at: number }[]).filter((e) => e.kind !== 'stale' && e.kind !== 'fresh').map((e) => `${e.kind}@${e.at}`);
      expect(kinds(fromApi.events)).toEqual(kinds(fromFile.events));
    }
  });
});

describe('embedded broker, with Type B components, limits and a stopping rule (issue 10)', () => {
  // The daemon and `plateau analyze --config` (configuredChannels) apply the same settings: the combined
  // uncertainty, the conformity and the verdict with its stopping condition agree field for field.
  it('combined, conformity and verdict equal plateau analyze with the same configuration', async () => {
    const channels = {
      defaults: {
        window: { kind: 'growing' },
        typeB: [
          { name: 'reference certificate', kind: 'certificate', expanded: 0.02, coverageFactor: 2, shared: 'ref' },
          { name: 'installation', kind: 'installation', halfWidth: 0.01, reliability: 0.25 },
        ],
        dominanceFraction: 0.2,
      },
      groups: [{ match: 'inlet_degC', conformity: { lower: 39.9, upper: 40.1, rule: 'non-binary' }, combinedTarget: { U: 0.05 } }],
    };
    const { api, report } = await roundTrip(embedded.url, 4, channels);
    for (const name of ['inlet_degC', 'flow_kg_s']) {
      const fromApi = api.find((c) => c.name === name) as Record<string, unknown>;
      const fromFile = report.channels.find((c) => c.name === name) as unknown as Record<string, unknown>;
      for (const key of ['standardUncertainty', 'dof', 'combined', 'conformity', 'verdict']) expect(fromApi[key], `${name}.${key}`).toEqual(fromFile[key]);
      expect((fromApi.combined as { budget: unknown[] }).budget).toHaveLength(3);
    }
    expect((api.find((c) => c.name === 'inlet_degC')?.conformity as { rule: string }).rule).toBe('non-binary');
  });
});
