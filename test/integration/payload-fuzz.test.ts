import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { decodePayload, DECODER_DEFAULTS } from '../../src/ingest/payload-decoder.js';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { assertNoNonFinite } from '../helpers/cli.js';
import { mqttClient, publishAsync, unique, waitFor } from '../helpers/brokers.js';
import { testConfig } from '../helpers/daemon-config.js';

// Property-based fuzzing (fast-check): 100,000 generated payloads, hostile and valid mixed, through
// the decoder and through a running daemon's message handler; then a share of them over MQTT.
// No crash, no NaN in any statistic, every valid sample counted once.

const hostile = fc.oneof(
  fc.uint8Array({ maxLength: 300 }).map((b) => Buffer.from(b)),
  fc.string({ maxLength: 200 }).map((s) => Buffer.from(s)),
  fc.json({ maxDepth: 12 }).map((s) => Buffer.from(s)),
  fc.integer({ min: 1, max: 60 }).map((d) => Buffer.from(`${'['.repeat(d)}1${']'.repeat(d)}`)),
  fc.constantFrom('NaN', 'Infinity', '-Infinity', 'null', '{"v":"NaN"}', '{"v":1e999}', '{"v":null}', '[{"n":"x","v":"1"}]', '{"v":{}}', '{"v":[1]}', '{"__proto__":{"v":1}}', '{"v":1,"t":-5}', '{"v":1,"t":1e20}').map((s) => Buffer.from(s)),
  fc.record({ v: fc.oneof(fc.double(), fc.string(), fc.boolean(), fc.constant(null)), t: fc.oneof(fc.double(), fc.string(), fc.constant(undefined)) }).map((o) => Buffer.from(JSON.stringify(o))),
  fc.array(fc.record({ n: fc.string({ maxLength: 10 }), v: fc.double(), t: fc.double() }), { maxLength: 30 }).map((a) => Buffer.from(JSON.stringify(a))),
);

let broker: EmbeddedBroker;
beforeAll(async () => {
  broker = await startEmbeddedBroker({ port: 0 });
});
afterAll(async () => {
  await broker.close();
});

describe('fuzzing the decoder and the daemon', () => {
  it('100,000 hostile payloads through the decoder: no throw, every rejection has a reason, every sample is finite', () => {
    const json = { ...DECODER_DEFAULTS, format: 'json' as const, channel: '{2}' };
    const senml = { ...DECODER_DEFAULTS, format: 'senml' as const, channel: '{name}' };
    const number = { ...DECODER_DEFAULTS, format: 'number' as const, channel: '{2}' };
    let samples = 0;
    let rejections = 0;
    fc.assert(
      fc.property(hostile, fc.constantFrom(json, senml, number), (payload, spec) => {
        const result = decodePayload('fuzz/x', payload, spec, 1_764_400_000_000);
        for (const sample of result.samples) {
          expect(Number.isFinite(sample.value)).toBe(true);
          expect(Number.isFinite(sample.timeMs)).toBe(true);
        }
        for (const r of result.rejections) expect(r.detail.length).toBeGreaterThan(0);
        samples += result.samples.length;
        rejections += result.rejections.length;
      }),
      { numRuns: 100_000, seed: 42 },
    );
    console.log(`decoder fuzz: 100000 payloads, ${samples} samples accepted, ${rejections} rejections`);
  }, 120_000);

  it('100,000 mixed payloads through a running daemon: valid samples counted once, no NaN anywhere', async () => {
    const prefix = unique('fuzz');
    // First in the same process, through an in-memory source (as MQTT would deliver them).
    const config = testConfig({ url: broker.url, prefix, clientId: unique('plateau-fuzz') });
    const source = new MemorySampleSource(daemonSubscriptions(config));
    const local = new Daemon(config, { source });
    await local.start();
    const payloads = fc.sample(hostile, { numRuns: 90_000, seed: 7 });
    let valid = 0;
    let t = 1_764_400_000;
    for (let i = 0; i < 100_000; i++) {
      if (i % 10 === 0) {
        // A valid sample on its own channel, time strictly increasing: each must be counted once.
        t += 0.01;
        source.publish(`${prefix}/good_${i % 3}`, JSON.stringify({ v: 5 + Math.sin(i), t }));
        valid++;
        // And the same message again, as a redelivery: a duplicate, not a second sample.
        if (i % 30 === 0) source.publish(`${prefix}/good_${i % 3}`, JSON.stringify({ v: 5 + Math.sin(i), t }));
      } else {
        source.publish(`${prefix}/noise_${i % 7}`, payloads[i - Math.floor(i / 10) - 1] as Buffer);
      }
      if (i % 1000 === 999) local.commitNow();
    }
    local.commitNow();
    let good = 0;
    for (let c = 0; c < 3; c++) good += local.registry.get(`good_${c}`)?.pipeline.totalReceived ?? 0;
    expect(good).toBe(valid);
    expect(local.counters.rejected.duplicate).toBeGreaterThanOrEqual(Math.floor(valid / 3));
    for (const channel of local.registry.all()) {
      const snapshot = JSON.parse(JSON.stringify(channel.pipeline.snapshot()));
      assertNoNonFinite(snapshot, channel.name);
      expect(Number.isFinite(channel.pipeline.series.mean) || channel.pipeline.count === 0).toBe(true);
    }
    expect(source.unacknowledgedMessages).toBe(0);
    await local.stop();
    // And over MQTT for real: 5000 of them through the broker.
    const daemon = new Daemon(testConfig({ url: broker.url, prefix: `${prefix}-wire`, clientId: unique('plateau-fuzz') }));
    await daemon.start();
    await waitFor(() => daemon.ingest?.connected === true, 5000, 'the daemon to connect');
    await new Promise((resolve) => setTimeout(resolve, 200));
    const publisher = await mqttClient(broker.url, unique('fuzz-pub'));
    const before = daemon.counters.messages;
    for (let i = 0; i < 5000; i++) {
      void publishAsync(publisher, `${prefix}-wire/wire_${i % 5}`, payloads[i] as Buffer, 1);
      if (i % 500 === 499) await waitFor(() => daemon.counters.messages - before >= i - 600, 10_000, 'the daemon to keep up');
    }
    await waitFor(() => daemon.counters.messages - before >= 5000, 20_000, 'every message over MQTT');
    for (const channel of daemon.registry.all()) assertNoNonFinite(JSON.parse(JSON.stringify(channel.pipeline.snapshot())), channel.name);
    console.log(`daemon fuzz: accepted ${daemon.counters.accepted}, rejected ${JSON.stringify(daemon.counters.rejected)}`);
    publisher.end(true);
    await daemon.stop();
  }, 180_000);
});
