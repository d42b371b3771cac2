import { describe, expect, it } from 'vitest';
import { PayloadDecoders, DECODER_DEFAULTS, type DecoderSpec } from '../../src/ingest/payload-decoder.js';
import { SparkplugPayload, SPARKPLUG_TYPES as T } from '../../src/ingest/sparkplug-schema.js';
import { REBIRTH_REPEAT_MS, sparkplugChannel } from '../../src/ingest/sparkplug-decoder.js';

// Sparkplug B: birth, data and death sequences built with the specification's protobuf schema
// (src/ingest/sparkplug-schema.ts, from the Sparkplug 3.0.0 specification's published schema).
// The protocol rules checked here (NBIRTH seq 0 and +1 modulo 256 per message of the node, bdSeq
// shared by NBIRTH and NDEATH, aliases from births, NCMD "Node Control/Rebirth" = true) are the
// Sparkplug 3.0.0 specification's as we remember them, not checked against its text in this session.

const ARRIVAL = 1_764_300_000_000;
const spec = (over: Partial<DecoderSpec> = {}): DecoderSpec => ({ ...DECODER_DEFAULTS, format: 'sparkplug', channel: '{node}.{device}.{metric}', ...over });
const withRebirth = spec({ sparkplug: { requestRebirth: true } });

type MetricSpec = { name?: string; alias?: number; timestamp?: number; datatype?: number; int_value?: number; long_value?: number | string; float_value?: number; double_value?: number; boolean_value?: boolean; string_value?: string; is_null?: boolean };
const payload = (seq: number | null, metrics: MetricSpec[], timestamp = ARRIVAL - 500): Uint8Array =>
  SparkplugPayload.encode(SparkplugPayload.fromObject({ timestamp, ...(seq === null ? {} : { seq }), metrics })).finish();

const G = 'plantA';
const N = 'gw7';
const topic = (type: string, device?: string) => `spBv1.0/${G}/${type}/${N}${device ? `/${device}` : ''}`;

function born(decoders = new PayloadDecoders(), s = spec(), bdSeq = 3) {
  const r = decoders.decode(
    topic('NBIRTH'),
    payload(0, [
      { name: 'bdSeq', datatype: T.Int64, long_value: bdSeq },
      { name: 'Node Control/Rebirth', datatype: T.Boolean, boolean_value: false },
      { name: 'Supply/Temperature', alias: 1, datatype: T.Double, double_value: 61.25, timestamp: ARRIVAL - 1000 },
      { name: 'Supply/Pressure', alias: 2, datatype: T.Float, float_value: 2.5 },
      { name: 'Firmware', alias: 3, datatype: T.String, string_value: '4.2.1' },
    ]),
    s,
    ARRIVAL,
  );
  return { decoders, r };
}

describe('Sparkplug B decoder', () => {
  it('NBIRTH: names, aliases and values; per-metric timestamps, else the payload\'s; bdSeq and Node Control are not samples; a String is refused', () => {
    const { decoders, r } = born();
    expect(r.samples).toEqual([
      { channel: 'gw7.Supply/Temperature', timeMs: ARRIVAL - 1000, value: 61.25, stamped: true },
      { channel: 'gw7.Supply/Pressure', timeMs: ARRIVAL - 500, value: 2.5, stamped: true },
    ]);
    expect(r.rejections.map((x) => [x.reason, x.detail])).toEqual([['wrong-type', `topic spBv1.0/plantA/NBIRTH/gw7: NBIRTH of plantA/gw7: metric "Firmware" is a String, not a number`]]);
    expect(decoders.sparkplug.node(G, N)?.bdSeq).toBe(3);
    expect(decoders.sparkplug.counters.births).toBe(1);
  });

  it('NDATA by alias only, DBIRTH and DDATA of a device (aliases unique across node and devices)', () => {
    const { decoders } = born();
    const data = decoders.decode(topic('NDATA'), payload(1, [{ alias: 1, double_value: 61.5, timestamp: ARRIVAL + 100 }, { alias: 2, float_value: 2.75 }]), spec(), ARRIVAL + 200);
    expect(data.rejections).toEqual([]);
    expect(data.samples.map((s) => [s.channel, s.value, s.timeMs])).toEqual([['gw7.Supply/Temperature', 61.5, ARRIVAL + 100], ['gw7.Supply/Pressure', 2.75, ARRIVAL - 500]]);
    const dbirth = decoders.decode(topic('DBIRTH', 'pump 2'), payload(2, [{ name: 'Flow', alias: 10, datatype: T.Int16, int_value: 65535 - 40 + 1 }, { name: 'Running', alias: 11, datatype: T.Boolean, boolean_value: true }]), spec(), ARRIVAL);
    expect(dbirth.samples).toEqual([{ channel: 'gw7.pump_2.Flow', timeMs: ARRIVAL - 500, value: -40, stamped: true }]); // Int16 two's complement in a uint32
    expect(dbirth.rejections.map((x) => x.reason)).toEqual(['wrong-type']);
    const ddata = decoders.decode(topic('DDATA', 'pump 2'), payload(3, [{ alias: 10, int_value: 12 }]), spec(), ARRIVAL);
    expect(ddata.samples.map((s) => [s.channel, s.value])).toEqual([['gw7.pump_2.Flow', 12]]);
    // A device's alias does not name a node metric.
    const wrong = decoders.decode(topic('NDATA'), payload(4, [{ alias: 10, int_value: 1 }]), spec(), ARRIVAL);
    expect(wrong.rejections.map((x) => x.reason)).toEqual(['unknown-alias']);
  });

  it('integer types: Int8, Int32 and Int64 negative values, UInt64 beyond 2^32', () => {
    const decoders = new PayloadDecoders();
    const r = decoders.decode(
      topic('NBIRTH'),
      payload(0, [
        { name: 'bdSeq', datatype: T.UInt64, long_value: 0 },
        { name: 'a', datatype: T.Int8, int_value: 0xff },
        { name: 'b', datatype: T.Int32, int_value: 0xfffffffe },
        { name: 'c', datatype: T.Int64, long_value: '18446744073709551613' },
        { name: 'd', datatype: T.UInt64, long_value: '8589934592' },
      ]),
      spec({ channel: '{group}:{metric}' }),
      ARRIVAL,
    );
    expect(r.samples.map((s) => [s.channel, s.value])).toEqual([['plantA:a', -1], ['plantA:b', -2], ['plantA:c', -3], ['plantA:d', 8589934592]]);
  });

  it('seq wraps from 255 to 0 without a gap', () => {
    const { decoders } = born();
    for (let i = 1; i <= 300; i++) {
      const r = decoders.decode(topic('NDATA'), payload(i % 256, [{ alias: 1, double_value: i }]), withRebirth, ARRIVAL + i);
      expect(r.rejections).toEqual([]);
      expect(r.effects?.sequenceGaps).toEqual([]);
    }
    expect(decoders.sparkplug.counters.sequenceGaps).toBe(0);
    expect(decoders.sparkplug.node(G, N)?.needsRebirth).toBe(false);
  });

  it('a missing seq: the gap is counted with the messages lost, the node needs a rebirth and is sent one on its NCMD topic', () => {
    const { decoders } = born(undefined, withRebirth);
    decoders.decode(topic('NDATA'), payload(1, [{ alias: 1, double_value: 1 }]), withRebirth, ARRIVAL);
    const r = decoders.decode(topic('NDATA'), payload(4, [{ alias: 1, double_value: 2 }]), withRebirth, ARRIVAL + 10);
    // The sample of the message after the gap is still taken: nothing valid is lost.
    expect(r.samples.map((s) => s.value)).toEqual([2]);
    expect(r.effects?.sequenceGaps).toEqual([{ node: 'plantA/gw7', missing: 2, channels: ['gw7.Supply/Temperature', 'gw7.Supply/Pressure'], timeMs: ARRIVAL - 500 }]);
    expect(decoders.sparkplug.counters).toMatchObject({ sequenceGaps: 1, missedMessages: 2, needsRebirth: 1, rebirthRequests: 1 });
    expect(decoders.sparkplug.nodesNeedingRebirth()).toEqual(['plantA/gw7']);
    expect(r.effects?.publish).toHaveLength(1);
    const request = r.effects?.publish[0];
    expect(request?.topic).toBe('spBv1.0/plantA/NCMD/gw7');
    const decoded = SparkplugPayload.toObject(SparkplugPayload.decode(request?.payload as Uint8Array), { longs: Number }) as { metrics: MetricSpec[] };
    expect(decoded.metrics).toEqual([expect.objectContaining({ name: 'Node Control/Rebirth', datatype: T.Boolean, boolean_value: true })]);
    // Not repeated while the request is young; repeated after REBIRTH_REPEAT_MS; none after the rebirth.
    expect(decoders.decode(topic('NDATA'), payload(9, [{ alias: 1, double_value: 3 }]), withRebirth, ARRIVAL + 20).effects?.publish).toEqual([]);
    expect(decoders.decode(topic('NDATA'), payload(12, [{ alias: 1, double_value: 3 }]), withRebirth, ARRIVAL + 20 + REBIRTH_REPEAT_MS).effects?.publish).toHaveLength(1);
    born(decoders, withRebirth, 4);
    expect(decoders.sparkplug.node(G, N)?.needsRebirth).toBe(false);
    expect(decoders.decode(topic('NDATA'), payload(1, [{ alias: 1, double_value: 4 }]), withRebirth, ARRIVAL + 30_000).effects?.publish).toEqual([]);
  });

  it('without sparkplug.requestRebirth the node is marked and counted but nothing is published', () => {
    const { decoders } = born();
    const r = decoders.decode(topic('NDATA'), payload(7, [{ alias: 1, double_value: 2 }]), spec(), ARRIVAL);
    expect(r.effects?.publish).toEqual([]);
    expect(decoders.sparkplug.node(G, N)?.needsRebirth).toBe(true);
    expect(decoders.sparkplug.counters.rebirthRequests).toBe(0);
  });

  it('an unknown alias: refused, counted, the node needs a rebirth; data before any birth likewise', () => {
    const { decoders } = born(undefined, withRebirth);
    const r = decoders.decode(topic('NDATA'), payload(1, [{ alias: 99, double_value: 1 }, { alias: 1, double_value: 5 }]), withRebirth, ARRIVAL);
    expect(r.samples.map((s) => s.value)).toEqual([5]);
    expect(r.rejections.map((x) => x.detail)).toEqual(['topic spBv1.0/plantA/NDATA/gw7: NDATA of plantA/gw7: metric alias 99 was not announced in a birth']);
    expect(r.effects?.publish.map((p) => p.topic)).toEqual(['spBv1.0/plantA/NCMD/gw7']);
    expect(decoders.sparkplug.counters.unknownAliases).toBe(1);
    const orphan = new PayloadDecoders().decode(topic('NDATA'), payload(5, [{ alias: 1, double_value: 1 }]), withRebirth, ARRIVAL);
    expect(orphan.rejections.map((x) => x.reason)).toEqual(['unknown-alias']);
    expect(orphan.effects?.publish.map((p) => p.topic)).toEqual(['spBv1.0/plantA/NCMD/gw7']);
  });

  it('NDEATH with a stale bdSeq is ignored and counted; the matching one marks every channel of the node stale', () => {
    const { decoders } = born(undefined, spec(), 8);
    decoders.decode(topic('DBIRTH', 'pump2'), payload(1, [{ name: 'Flow', alias: 10, datatype: T.Double, double_value: 3 }]), spec(), ARRIVAL);
    const stale = decoders.decode(topic('NDEATH'), payload(null, [{ name: 'bdSeq', datatype: T.Int64, long_value: 7 }]), spec(), ARRIVAL);
    expect(stale.rejections.map((x) => [x.reason, x.detail])).toEqual([['stale-death', "topic spBv1.0/plantA/NDEATH/gw7: NDEATH of plantA/gw7 with bdSeq 7 does not match the birth's (8): ignored"]]);
    expect(stale.effects?.stale).toEqual([]);
    expect(decoders.sparkplug.node(G, N)?.born).toBe(true);
    expect(decoders.sparkplug.counters.staleDeaths).toBe(1);
    const death = decoders.decode(topic('NDEATH'), payload(null, [{ name: 'bdSeq', datatype: T.Int64, long_value: 8 }]), spec(), ARRIVAL);
    expect(death.rejections).toEqual([]);
    expect(death.effects?.stale).toEqual([{ channels: ['gw7.Supply/Temperature', 'gw7.Supply/Pressure', 'gw7.pump2.Flow'], cause: 'NDEATH of edge node plantA/gw7' }]);
    expect(decoders.sparkplug.node(G, N)?.born).toBe(false);
  });

  it('DDEATH marks the device\'s channels stale and takes its seq', () => {
    const { decoders } = born();
    decoders.decode(topic('DBIRTH', 'pump2'), payload(1, [{ name: 'Flow', alias: 10, datatype: T.Double, double_value: 3 }]), spec(), ARRIVAL);
    const r = decoders.decode(topic('DDEATH', 'pump2'), payload(2, []), spec(), ARRIVAL);
    expect(r.effects?.stale).toEqual([{ channels: ['gw7.pump2.Flow'], cause: 'DDEATH of device plantA/gw7/pump2' }]);
    expect(decoders.decode(topic('NDATA'), payload(3, [{ alias: 1, double_value: 1 }]), spec(), ARRIVAL).effects?.sequenceGaps).toEqual([]);
  });

  it('hostile input: not protobuf, wrong topics, commands ignored, null and non-finite metrics', () => {
    const { decoders } = born();
    expect(decoders.decode(topic('NDATA'), new Uint8Array([0x0a, 0xff, 0xff, 0xff]), spec(), ARRIVAL).rejections.map((x) => x.reason)).toEqual(['unparseable']);
    expect(decoders.decode('spBv1.0/plantA/XDATA/gw7', payload(1, []), spec(), ARRIVAL).rejections[0]?.detail).toMatch(/"XDATA" is not a Sparkplug B message type/);
    expect(decoders.decode('spBv1.0/plantA/DDATA/gw7', payload(1, []), spec(), ARRIVAL).rejections[0]?.detail).toMatch(/a DDATA topic needs spBv1.0\/<group>\/DDATA\/<edge node>\/<device>/);
    expect(decoders.decode('other/plantA/NDATA/gw7', payload(1, []), spec(), ARRIVAL).rejections.map((x) => x.reason)).toEqual(['unknown-topic']);
    const cmd = decoders.decode(topic('NCMD'), payload(null, [{ name: 'Node Control/Rebirth', datatype: T.Boolean, boolean_value: true }]), spec(), ARRIVAL);
    expect(cmd.samples).toEqual([]);
    expect(cmd.rejections).toEqual([]);
    expect(decoders.sparkplug.counters.commands).toBe(1);
    const r = decoders.decode(topic('NDATA'), payload(1, [{ alias: 1, is_null: true }, { alias: 1, double_value: Number.NaN }, { alias: 2, float_value: Number.POSITIVE_INFINITY }]), spec(), ARRIVAL);
    expect(r.samples).toEqual([]);
    expect(r.rejections.map((x) => x.reason)).toEqual(['missing-field', 'nan', 'infinite']);
  });

  it('a payload nested 6000 levels deep (Metric.template_value -> Template.metrics -> ...) is refused, not a stack overflow', () => {
    const length = (n: number) => {
      const out: number[] = [];
      for (; n > 127; n >>>= 7) out.push((n & 127) | 128);
      out.push(n);
      return Buffer.from(out);
    };
    let inner = Buffer.alloc(0);
    for (let d = 0; d < 6000; d++) {
      const template = Buffer.concat([Buffer.from([0x12]), length(inner.length), inner]); // Template.metrics, field 2
      inner = Buffer.concat([Buffer.from([0x92, 0x01]), length(template.length), template]); // Metric.template_value, field 18
    }
    const bytes = Buffer.concat([Buffer.from([0x12]), length(inner.length), inner]); // Payload.metrics, field 2
    const r = new PayloadDecoders().decode(topic('NBIRTH'), bytes, spec({ maxBytes: 1_000_000 }), ARRIVAL);
    expect(r.samples).toEqual([]);
    expect(r.rejections.map((x) => x.reason)).toEqual(['unparseable']);
  });

  it('channel templates over group, node, device and metric', () => {
    expect(sparkplugChannel('{node}.{device}.{metric}', 'g', 'n1', null, 'Temp')).toBe('n1.Temp');
    expect(sparkplugChannel('{node}.{device}.{metric}', 'g', 'n1', 'd 1', 'Inlet Temp')).toBe('n1.d_1.Inlet_Temp');
    expect(sparkplugChannel('{device}/{metric}', 'g', 'n1', null, 'T')).toBe('T');
    expect(sparkplugChannel('{group}/{node}/{metric}', 'g', 'n1', null, 'x'.repeat(200))).toBeNull();
  });
});
