import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { parseConfig } from '../../src/config/load-config.js';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { mqttClient, publishAsync, unique, waitFor } from '../helpers/brokers.js';

// Beyond one machine: several instances on one broker, each owning the channels its topic filters
// match, each with its own SQLite file. Every channel is handled by exactly one of them.

let broker: EmbeddedBroker;
beforeAll(async () => {
  broker = await startEmbeddedBroker({ port: 0 });
});
afterAll(async () => {
  await broker.close();
});

function instance(name: string, topics: string[], prefix: string): Daemon {
  const dir = mkdtempSync(join(tmpdir(), `plateau-${name}-`));
  return new Daemon(
    parseConfig({
      broker: { url: broker.url, clientId: unique(`plateau-${name}`), qos: 1 },
      subscriptions: topics.map((topic) => ({ topic, format: 'json', channel: '{2}.{3}' })),
      store: { path: join(dir, `${name}.sqlite`) },
      http: { listen: '127.0.0.1:0' },
      topics: { events: `${prefix}/${name}/events`, status: `${prefix}/${name}/status`, command: `${prefix}/${name}/command` },
      log: { level: 'silent' },
    }),
  );
}

describe('two instances on one broker', () => {
  it('split the channels by topic filter: each channel is handled by exactly one instance', async () => {
    const prefix = unique('fleet');
    // Instance A owns bench 1 and bench 2; instance B owns bench 3 and the flow loop.
    const a = instance('a', [`${prefix}/bench1/+`, `${prefix}/bench2/+`], prefix);
    const b = instance('b', [`${prefix}/bench3/+`, `${prefix}/loop/+`], prefix);
    await a.start();
    await b.start();
    await waitFor(() => a.ingest?.connected === true && b.ingest?.connected === true, 5000, 'both instances to connect');
    await new Promise((resolve) => setTimeout(resolve, 200));
    const publisher = await mqttClient(broker.url, unique('fleet-pub'));
    const channels = ['bench1/inlet', 'bench1/outlet', 'bench2/inlet', 'bench3/inlet', 'bench3/torque', 'loop/flow'];
    for (let i = 0; i < 200; i++) {
      for (const channel of channels) await publishAsync(publisher, `${prefix}/${channel}`, JSON.stringify({ v: 10 + Math.sin(i + channel.length), t: 1_764_500_000 + i }));
    }
    await waitFor(() => a.counters.accepted + b.counters.accepted >= 200 * channels.length, 20_000, 'every sample');
    const handledBy = (name: string) => [a, b].filter((d) => d.registry.get(name)).length;
    for (const channel of channels) expect(handledBy(channel.replace('/', '.')), channel).toBe(1);
    expect(a.registry.all().map((c) => c.name).sort()).toEqual(['bench1.inlet', 'bench1.outlet', 'bench2.inlet']);
    expect(b.registry.all().map((c) => c.name).sort()).toEqual(['bench3.inlet', 'bench3.torque', 'loop.flow']);
    expect(a.counters.accepted + b.counters.accepted).toBe(200 * channels.length);
    expect(a.config.store.path).not.toBe(b.config.store.path);
    publisher.end(true);
    await a.stop();
    await b.stop();
  }, 60_000);
});
