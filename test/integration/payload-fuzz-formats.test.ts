import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Encoder } from 'cbor-x';
import { PayloadDecoders, DECODER_DEFAULTS, type DecoderSpec } from '../../src/ingest/payload-decoder.js';
import { encodeFrame, FRAME_FLOAT32, FRAME_FLOAT64 } from '../../src/ingest/binary-frame.js';
import { SparkplugPayload } from '../../src/ingest/sparkplug-schema.js';
import { REJECT_REASONS, type RejectReason } from '../../src/ingest/sample.js';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { parseConfig } from '../../src/config/load-config.js';
import { assertNoNonFinite } from '../helpers/cli.js';

// Property-based fuzzing (fast-check) of the formats of issue 13: 100,000 hostile payloads of each
// (binary frames, SenML CBOR, Sparkplug B), valid and broken mixed, through the decoder and through
// a running daemon. No throw, no non-finite sample, every refusal has a reason and a message, and
// the daemon counts exactly what an independent decoder refuses (and takes what it accepts, less
// the channels' own refusals of repeated or old time stamps).

const N = 100_000;
const ARRIVAL = 1_764_400_000_000;
const cbor = new Encoder({ mapsAsObjects: false, useRecords: false, variableMapSize: true });
const doubles = fc.oneof(fc.double(), fc.constantFrom(Number.NaN, Number.POSITIVE_INFINITY, -0, 1e308, 5e-324), fc.double({ min: -1e3, max: 1e3, noNaN: true }));

/** Flips, truncates or extends a valid payload. */
function mutated(valid: fc.Arbitrary<Uint8Array>): fc.Arbitrary<Uint8Array> {
  return fc.tuple(valid, fc.array(fc.tuple(fc.nat(), fc.integer({ min: 0, max: 255 })), { maxLength: 4 }), fc.integer({ min: -40, max: 40 })).map(([bytes, flips, cut]) => {
    let out = Uint8Array.from(bytes);
    for (const [at, value] of flips) if (out.length > 0) out[at % out.length] = value;
    if (cut < 0) out = out.subarray(0, Math.max(0, out.length + cut));
    else if (cut > 20) out = Uint8Array.from([...out, ...new Uint8Array(cut - 20).fill(cut)]);
    return out;
  });
}

const frames = fc.tuple(fc.constantFrom('a', 'hx.t', 'ch:1', 'bad name', ''), fc.double({ min: 1.5e9, max: 1.9e9, noNaN: true }), fc.oneof(fc.double({ min: 1e-6, max: 10, noNaN: true }), doubles), fc.array(doubles, { minLength: 0, maxLength: 20 }), fc.constantFrom(FRAME_FLOAT64, FRAME_FLOAT32)).map(([id, first, interval, values, type]) => encodeFrame(id, first, interval, values, type));
const binaryPayloads = fc.oneof(frames, mutated(frames), fc.uint8Array({ maxLength: 120 }));

const labels = fc.oneof(fc.integer({ min: -8, max: 10 }), fc.constantFrom('bn', 'v', '__proto__', 'constructor', 'x_'));
const values = fc.oneof(doubles, fc.string({ maxLength: 8 }), fc.boolean(), fc.constant(null), fc.bigInt({ min: -(2n ** 70n), max: 2n ** 70n }), fc.uint8Array({ maxLength: 4 }));
const records = fc.array(fc.array(fc.tuple(labels, values), { maxLength: 6 }).map((entries) => new Map<unknown, unknown>(entries)), { maxLength: 20 });
const goodPacks = fc.tuple(fc.constantFrom('n.', 'hx7:', ''), fc.integer({ min: 0, max: 2e9 }), fc.array(fc.tuple(fc.constantFrom('a', 'b', 'c d'), doubles, fc.integer({ min: -100, max: 100 })), { minLength: 1, maxLength: 20 })).map(([bn, bt, rs]) =>
  cbor.encode(rs.map(([n, v, t], i) => new Map<number, unknown>(i === 0 ? [[-2, bn], [-3, bt], [0, n], [2, v], [6, t]] : [[0, n], [2, v], [6, t]]))),
);
const cborPayloads = fc.oneof(goodPacks, mutated(goodPacks), records.map((r) => cbor.encode(r)), fc.anything({ maxDepth: 4 }).map((x) => { try { return cbor.encode(x); } catch { return new Uint8Array([0xff]); } }), fc.uint8Array({ maxLength: 120 }));

const types = ['NBIRTH', 'NDATA', 'DBIRTH', 'DDATA', 'NDEATH', 'DDEATH', 'NCMD', 'STATE', 'XDATA'];
const metric = fc.record(
  { name: fc.constantFrom('bdSeq', 'T1', 'T2', 'Node Control/Rebirth', 'a b'), alias: fc.integer({ min: 0, max: 6 }), timestamp: fc.oneof(fc.integer({ min: 0, max: 2 ** 31 }).map((x) => ARRIVAL + x), fc.constant(0)), datatype: fc.integer({ min: 0, max: 22 }), int_value: fc.integer({ min: 0, max: 2 ** 32 - 1 }), double_value: doubles, float_value: doubles, boolean_value: fc.boolean(), string_value: fc.string({ maxLength: 5 }), is_null: fc.boolean() },
  { requiredKeys: [] },
);
const sparkplugMessages = fc.tuple(
  fc.constantFrom(...types),
  fc.constantFrom('n1', 'n2'),
  fc.constantFrom('d1', ''),
  fc.oneof(fc.integer({ min: 0, max: 300 }), fc.constant(null)),
  fc.array(metric, { maxLength: 6 }),
).map(([type, node, device, seq, metrics]) => {
  const topic = `spBv1.0/g/${type}/${node}${device ? `/${device}` : ''}`;
  let bytes: Uint8Array;
  try {
    bytes = SparkplugPayload.encode(SparkplugPayload.fromObject({ timestamp: ARRIVAL, ...(seq === null ? {} : { seq }), metrics })).finish();
  } catch {
    bytes = new Uint8Array([1, 2, 3]);
  }
  return { topic, bytes };
});
const sparkplugPayloads = fc.oneof(
  sparkplugMessages,
  fc.tuple(sparkplugMessages, mutated(sparkplugMessages.map((m) => m.bytes))).map(([m, bytes]) => ({ topic: m.topic, bytes })),
  fc.tuple(fc.constantFrom('spBv1.0/g/NDATA/n1', 'spBv1.0/g/NBIRTH/n2', 'spBv1.0/g', 'spBv1.0/g/DDATA/n1/d1/x'), fc.uint8Array({ maxLength: 80 })).map(([topic, bytes]) => ({ topic, bytes })),
);

/** Every third message from well-formed edge nodes (births, data by alias in sequence, deaths), among the hostile ones. */
function withValidNodes(hostile: { topic: string; bytes: Uint8Array }[]): { topic: string; bytes: Uint8Array }[] {
  const out: { topic: string; bytes: Uint8Array }[] = [];
  const seqs = new Map<string, number>();
  const encode = (object: Record<string, unknown>) => SparkplugPayload.encode(SparkplugPayload.fromObject(object)).finish();
  let t = ARRIVAL;
  hostile.forEach((message, i) => {
    if (i % 3 === 0) {
      const node = i % 2 === 0 ? 'n1' : 'n3';
      const step = Math.floor(i / 6) % 200;
      t += 10;
      if (step === 0 || !seqs.has(node)) {
        seqs.set(node, 0);
        out.push({ topic: `spBv1.0/g/NBIRTH/${node}`, bytes: encode({ timestamp: t, seq: 0, metrics: [{ name: 'bdSeq', datatype: 4, long_value: i }, { name: 'T1', alias: 1, datatype: 10, double_value: 20 }, { name: 'T2', alias: 2, datatype: 9, float_value: 3 }] }) });
      } else {
        const seq = ((seqs.get(node) as number) + 1) & 0xff;
        seqs.set(node, seq);
        out.push({ topic: `spBv1.0/g/NDATA/${node}`, bytes: encode({ timestamp: t, seq, metrics: [{ alias: 1, double_value: 20 + Math.sin(i), timestamp: t }, { alias: 2, float_value: 3 + Math.cos(i) }] }) });
      }
    } else out.push(message);
  });
  return out;
}

const FORMATS: { label: string; spec: DecoderSpec; subscription: Record<string, unknown>; topicPrefix: string; messages: () => { topic: string; bytes: Uint8Array }[] }[] = [
  { label: 'binary', spec: { ...DECODER_DEFAULTS, format: 'binary', channel: '{2}' }, subscription: { topic: 'fz/+', format: 'binary', channel: '{2}' }, topicPrefix: 'fz', messages: () => fc.sample(binaryPayloads, { numRuns: N, seed: 21 }).map((bytes, i) => ({ topic: `fz/b${i % 5}`, bytes })) },
  { label: 'senml-cbor', spec: { ...DECODER_DEFAULTS, format: 'senml-cbor', channel: '{2}' }, subscription: { topic: 'fz/+', format: 'senml-cbor', channel: '{2}' }, topicPrefix: 'fz', messages: () => fc.sample(cborPayloads, { numRuns: N, seed: 22 }).map((bytes, i) => ({ topic: `fz/c${i % 5}`, bytes })) },
  { label: 'sparkplug', spec: { ...DECODER_DEFAULTS, format: 'sparkplug', channel: '{node}.{device}.{metric}', sparkplug: { requestRebirth: true } }, subscription: { topic: 'spBv1.0/#', format: 'sparkplug', sparkplug: { requestRebirth: true } }, topicPrefix: 'spBv1.0', messages: () => withValidNodes(fc.sample(sparkplugPayloads, { numRuns: N, seed: 23 })) },
];

describe.each(FORMATS)('fuzzing $label', ({ label, spec, subscription, messages }) => {
  it(`${N.toLocaleString('en')} hostile payloads through the decoder and a running daemon: no throw, nothing non-finite, every refusal counted`, async () => {
    const all = messages();
    // The decoder alone (an independent instance: Sparkplug state evolves the same way).
    const decoders = new PayloadDecoders();
    let samples = 0;
    const refused = Object.fromEntries(REJECT_REASONS.map((r) => [r, 0])) as Record<RejectReason, number>;
    all.forEach(({ topic, bytes }, i) => {
      const result = decoders.decode(topic, bytes, spec, ARRIVAL + i);
      for (const s of result.samples) {
        if (!Number.isFinite(s.value) || !Number.isFinite(s.timeMs)) throw new Error(`${label}: non-finite sample from payload ${i}`);
        samples++;
      }
      for (const block of result.blocks ?? []) {
        for (let k = 0; k < block.length; k++) if (!Number.isFinite(block.values[k] as number) || !Number.isFinite(block.times[k] as number)) throw new Error(`${label}: non-finite block sample from payload ${i}`);
        samples += block.length;
      }
      for (const r of result.rejections) {
        expect(r.detail.length).toBeGreaterThan(10);
        refused[r.reason]++;
      }
    });
    expect(samples).toBeGreaterThan(1000); // the mix holds valid payloads too
    // The same payloads through a running daemon, in order, with a commit every 1000 messages.
    const dir = mkdtempSync(join(tmpdir(), 'plateau-fuzz-fmt-'));
    const config = parseConfig({ broker: { url: 'mqtt://127.0.0.1:1', clientId: 'fz' }, subscriptions: [subscription], channels: { defaults: { window: { kind: 'sliding', samples: 512 } } }, store: { path: join(dir, 's.sqlite') }, http: { listen: '127.0.0.1:0' }, log: { level: 'silent' } }, 'test');
    const source = new MemorySampleSource(daemonSubscriptions(config));
    // The daemon's clock is its own: arrival times differ from the loop above, which matters only
    // for samples without time stamps (never refused by time).
    const daemon = new Daemon(config, { source });
    await daemon.start();
    try {
      all.forEach(({ topic, bytes }, i) => {
        source.publish(topic, Buffer.from(bytes));
        if (i % 1000 === 999) daemon.commitNow();
      });
      daemon.commitNow();
      const c = daemon.counters;
      expect(c.messages).toBe(N);
      const channelRefusals = c.rejected.duplicate + c.rejected['out-of-order'] + c.rejected['engine-error'];
      expect(c.rejected['engine-error']).toBe(0);
      expect(c.accepted + channelRefusals).toBe(samples);
      for (const reason of REJECT_REASONS) if (reason !== 'duplicate' && reason !== 'out-of-order' && reason !== 'engine-error') expect(c.rejected[reason], reason).toBe(refused[reason]);
      for (const channel of daemon.registry.all()) assertNoNonFinite(JSON.parse(JSON.stringify(channel.pipeline.snapshot())), channel.name);
      expect(source.unacknowledgedMessages).toBe(0);
      console.log(`${label} fuzz: ${N} payloads, ${samples} samples decoded (${c.accepted} taken, ${channelRefusals} refused by their channels), refusals ${JSON.stringify(Object.fromEntries(Object.entries(refused).filter(([, n]) => n > 0)))}, ${daemon.registry.size} channels`);
    } finally {
      await daemon.stop();
    }
  }, 600_000);
});
