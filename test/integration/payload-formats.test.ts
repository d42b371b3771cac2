import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Encoder } from 'cbor-x';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { encodeFrame } from '../../src/ingest/binary-frame.js';
import { SparkplugPayload, SPARKPLUG_TYPES as T } from '../../src/ingest/sparkplug-schema.js';
import { mqttClient, publishAsync, unique, waitFor } from '../helpers/brokers.js';
import { testConfig } from '../helpers/daemon-config.js';
import { startOwnMosquitto, type OwnMosquitto } from '../helpers/mosquitto.js';

// Interoperability of the new formats over real brokers: the embedded broker (aedes) and a
// Mosquitto of the test's own, MQTT 3.1.1 and 5. A daemon subscribed to binary frames, SenML
// in CBOR and Sparkplug B takes every sample; a Sparkplug sequence gap gets a rebirth request on
// the node's NCMD topic, seen by another client; the node's NDEATH makes its channels stale.

let embedded: EmbeddedBroker;
let mosquitto: OwnMosquitto | null = null;

beforeAll(async () => {
  embedded = await startEmbeddedBroker({ port: 0 });
  mosquitto = await startOwnMosquitto();
  if (mosquitto === null) console.log('mosquitto is not installed: the Mosquitto interoperability tests are skipped');
});
afterAll(async () => {
  await embedded.close();
  await mosquitto?.stop();
});

const cbor = new Encoder({ mapsAsObjects: false, useRecords: false, variableMapSize: true });
// Each payload a time stamp of its own (two messages in one millisecond would repeat a sample's time).
let stamp = Date.now();
const sparkplug = (seq: number | null, metrics: Record<string, unknown>[]) => Buffer.from(SparkplugPayload.encode(SparkplugPayload.fromObject({ timestamp: (stamp += 10), ...(seq === null ? {} : { seq }), metrics })).finish());

async function formats(url: string, protocolVersion: 4 | 5) {
  const prefix = unique('fmt');
  const group = unique('g');
  const config = testConfig({
    url,
    prefix,
    clientId: unique('plateau'),
    extra: {
      broker: { url, clientId: unique('plateau'), qos: 1, protocolVersion, reconnectPeriodMs: 200 },
      subscriptions: [
        { topic: `${prefix}/frames/+`, format: 'binary' },
        { topic: `${prefix}/cbor/+`, format: 'senml-cbor' },
        { topic: `spBv1.0/${group}/#`, format: 'sparkplug', channel: '{group}.{node}.{metric}', sparkplug: { requestRebirth: true } },
      ],
    },
  });
  const daemon = new Daemon(config);
  await daemon.start();
  const client = await mqttClient(url, unique('pub'), { protocolVersion });
  try {
    await waitFor(() => daemon.ingest?.connected === true, 5000, 'the daemon to connect');
    await new Promise((resolve) => setTimeout(resolve, 200));
    const requests: string[] = [];
    client.on('message', (topic) => requests.push(topic));
    await client.subscribeAsync(`spBv1.0/${group}/NCMD/#`, { qos: 0 });
    const t0 = Date.now() / 1000 - 100;
    for (let k = 0; k < 5; k++) await publishAsync(client, `${prefix}/frames/a`, Buffer.from(encodeFrame('rigX.frame', t0 + k * 10, 0.01, Array.from({ length: 1000 }, (_, i) => 5 + Math.sin(i)))));
    for (let k = 0; k < 5; k++) await publishAsync(client, `${prefix}/cbor/a`, Buffer.from(cbor.encode([new Map<number, unknown>([[-2, 'rigX.'], [-3, t0 + k], [0, 'pack'], [2, 1.5]]), ...Array.from({ length: 99 }, (_, i) => new Map<number, unknown>([[0, 'pack'], [6, (i + 1) / 100], [2, 1.5 + i / 1000]]))])));
    const node = 'gw1';
    await publishAsync(client, `spBv1.0/${group}/NBIRTH/${node}`, sparkplug(0, [{ name: 'bdSeq', datatype: T.Int64, long_value: 1 }, { name: 'Temp', alias: 1, datatype: T.Double, double_value: 20 }]));
    await publishAsync(client, `spBv1.0/${group}/NDATA/${node}`, sparkplug(1, [{ alias: 1, double_value: 20.5 }]));
    await publishAsync(client, `spBv1.0/${group}/NDATA/${node}`, sparkplug(3, [{ alias: 1, double_value: 21 }]));
    await waitFor(() => daemon.counters.accepted >= 5000 + 500 + 3, 20_000, 'every sample').catch((error: Error) => {
      throw new Error(`${error.message}: accepted ${daemon.counters.accepted}, messages ${daemon.counters.messages}, refused ${JSON.stringify(Object.fromEntries(Object.entries(daemon.counters.rejected).filter(([, n]) => n > 0)))}`);
    });
    await waitFor(() => requests.length >= 1, 5000, 'a rebirth request');
    expect(requests).toEqual([`spBv1.0/${group}/NCMD/${node}`]);
    expect(daemon.registry.get('rigX.frame')?.pipeline.totalReceived).toBe(5000);
    expect(daemon.registry.get('rigX.pack')?.pipeline.totalReceived).toBe(500);
    const channel = `${group}.${node}.Temp`;
    expect(daemon.registry.get(channel)?.pipeline.totalReceived).toBe(3);
    const report = daemon.counterReport() as { sparkplug: Record<string, unknown> };
    expect(report.sparkplug).toMatchObject({ births: 1, sequenceGaps: 1, missedMessages: 1, rebirthRequests: 1, nodesNeedingRebirth: [`${group}/${node}`] });
    // The node's death (its will) with the birth's bdSeq: its channel is stale at once.
    await publishAsync(client, `spBv1.0/${group}/NDEATH/${node}`, sparkplug(null, [{ name: 'bdSeq', datatype: T.Int64, long_value: 1 }]));
    await waitFor(() => daemon.registry.get(channel)?.pipeline.snapshot().state === 'stale', 5000, 'the channel to turn stale');
  } finally {
    client.end(true);
    await daemon.stop();
  }
}

describe.each([
  ['embedded broker (aedes), MQTT 3.1.1', (): string | null => embedded.url, 4 as const],
  ['Mosquitto, MQTT 3.1.1', (): string | null => mosquitto?.url ?? null, 4 as const],
  ['Mosquitto, MQTT 5', (): string | null => mosquitto?.url ?? null, 5 as const],
])('%s', (_label, url, protocol) => {
  it('binary frames, SenML CBOR and Sparkplug B through one daemon; a rebirth request on NCMD; NDEATH makes the channel stale', async (context) => {
    const address = url();
    if (address === null) {
      context.skip();
      return;
    }
    await formats(address, protocol);
  }, 60_000);
});
