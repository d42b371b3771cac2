import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { decodePayload, DECODER_DEFAULTS, type DecoderSpec } from '../../src/ingest/payload-decoder.js';
import { encodeFrame, FRAME_FLOAT32, FRAME_FLOAT64, FRAME_HEADER_BYTES } from '../../src/ingest/binary-frame.js';
import type { DecodeResult } from '../../src/ingest/sample.js';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { parseConfig } from '../../src/config/load-config.js';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

// plateau's binary frame (src/ingest/binary-frame.ts, README "Binary frames"): round trips in
// float64 and float32, at any byte offset; truncated, oversized, misaligned and malformed frames
// refused whole with a reason naming the topic and the fault, and counted by a running daemon.

const ARRIVAL = 1_764_300_000_000;
const spec = (over: Partial<DecoderSpec> = {}): DecoderSpec => ({ ...DECODER_DEFAULTS, format: 'binary', channel: '{name}', ...over });
const T0 = 1_764_300_000.5;

function samplesOf(result: DecodeResult): { channel: string; timeMs: number; value: number }[] {
  const out: { channel: string; timeMs: number; value: number }[] = [];
  for (const block of result.blocks ?? []) for (let i = 0; i < block.length; i++) out.push({ channel: block.channel, timeMs: block.times[i] as number, value: block.values[i] as number });
  return out;
}

describe('binary frames', () => {
  it('round trip, float64: every value, its time first + i * interval, one block without objects per sample', () => {
    const values = [21.5, 21.625, -3.25e-7, 1e99, 0];
    const frame = encodeFrame('hx9.inlet', T0, 0.01, values);
    expect(frame.length).toBe(FRAME_HEADER_BYTES + 16 + values.length * 8); // "hx9.inlet" is 9 bytes, padded to 16
    const r = decodePayload('rig/frames', frame, spec(), ARRIVAL);
    expect(r.rejections).toEqual([]);
    expect(r.samples).toEqual([]);
    expect(r.blocks?.[0]?.values).toBeInstanceOf(Float64Array);
    expect(samplesOf(r)).toEqual(values.map((value, i) => ({ channel: 'hx9.inlet', timeMs: (T0 + i * 0.01) * 1000, value })));
  });

  it('round trip, float32: values rounded to single precision, a unit from the configuration', () => {
    const values = [0.1, 293.15, -40];
    const r = decodePayload('rig/frames', encodeFrame('cell3.T', T0, 1, values, FRAME_FLOAT32), spec({ unit: 'K', channel: 'rig.{name}' }), ARRIVAL);
    expect(r.blocks?.[0]?.unit).toBe('K');
    expect(samplesOf(r)).toEqual(values.map((v, i) => ({ channel: 'rig.cell3.T', timeMs: (T0 + i) * 1000, value: Math.fround(v) })));
  });

  it('round trip at any byte offset of the delivered buffer (values not aligned in memory)', () => {
    fc.assert(
      fc.property(fc.array(fc.double({ min: -1e6, max: 1e6, noNaN: true }), { minLength: 1, maxLength: 50 }), fc.integer({ min: 0, max: 7 }), fc.constantFrom(FRAME_FLOAT64, FRAME_FLOAT32), (values, offset, type) => {
        const frame = encodeFrame('p', T0, 0.5, values, type);
        const shifted = new Uint8Array(frame.length + offset);
        shifted.set(frame, offset);
        const r = decodePayload('rig/frames', shifted.subarray(offset), spec(), ARRIVAL);
        expect(r.rejections).toEqual([]);
        expect(samplesOf(r).map((s) => s.value)).toEqual(values.map((v) => (type === FRAME_FLOAT64 ? v : Math.fround(v))));
      }),
      { numRuns: 300, seed: 5 },
    );
  });

  it('a NaN or infinite value is refused alone, the rest of the frame is taken', () => {
    const r = decodePayload('rig/frames', encodeFrame('p', T0, 1, [1, Number.NaN, 3, Number.POSITIVE_INFINITY, 5, 1e101]), spec(), ARRIVAL);
    expect(samplesOf(r).map((s) => [s.value, s.timeMs])).toEqual([[1, T0 * 1000], [3, (T0 + 2) * 1000], [5, (T0 + 4) * 1000]]);
    expect(r.rejections.map((x) => x.reason)).toEqual(['nan', 'infinite', 'out-of-range']);
    expect(r.rejections[0]?.detail).toBe('topic rig/frames: binary frame: value 1 is NaN, which is not a measurement');
  });

  const good = encodeFrame('hx9.inlet', T0, 0.01, [1, 2, 3, 4]);
  const edit = (mutate: (frame: Uint8Array, view: DataView) => Uint8Array | void): Uint8Array => {
    const copy = good.slice();
    return mutate(copy, new DataView(copy.buffer)) ?? copy;
  };
  const bad: [string, Uint8Array, Partial<DecoderSpec>, string, RegExp][] = [
    ['shorter than the header', good.subarray(0, 20), {}, 'bad-frame', /binary frame truncated: 20 bytes, shorter than the 32-byte header/],
    ['truncated values', good.subarray(0, good.length - 8), {}, 'bad-frame', /binary frame truncated: 3 of the 4 values the header declares/],
    ['truncated channel id', good.subarray(0, 36), {}, 'bad-frame', /binary frame truncated: 36 bytes, shorter than the header and its 9-byte channel id/],
    ['oversized', (() => { const f = new Uint8Array(good.length + 16); f.set(good); return f; })(), {}, 'bad-frame', /binary frame oversized: 2 values beyond the 4 the header declares/],
    ['misaligned', good.subarray(0, good.length - 3), {}, 'bad-frame', /binary frame misaligned: 29 bytes of values, not a whole number of 8-byte values/],
    ['misaligned float32', encodeFrame('p', T0, 1, [1, 2], FRAME_FLOAT32).subarray(0, FRAME_HEADER_BYTES + 8 + 6), {}, 'bad-frame', /misaligned: 6 bytes of values, not a whole number of 4-byte values/],
    ['wrong magic', edit((f) => void (f[0] = 0x4a)), {}, 'bad-frame', /refused: does not start with the frame magic "PTF1"/],
    ['other version', edit((f) => void (f[4] = 2)), {}, 'bad-frame', /frame version 2, this daemon reads version 1/],
    ['unknown value type', edit((f) => void (f[5] = 9)), {}, 'bad-frame', /value type 9, expected 1 \(float64\) or 2 \(float32\)/],
    ['empty channel id', edit((_f, v) => v.setUint16(6, 0, true)), {}, 'bad-frame', /channel id of 0 bytes/],
    ['nonzero padding', edit((f) => void (f[FRAME_HEADER_BYTES + 10] = 1)), {}, 'bad-frame', /padding after the channel id is not zero/],
    ['flags set', edit((_f, v) => v.setUint32(12, 4, true)), {}, 'bad-frame', /flags 4, expected 0/],
    ['zero interval', edit((_f, v) => v.setFloat64(24, 0, true)), {}, 'bad-time', /sample interval 0 s/],
    ['time in milliseconds', edit((_f, v) => v.setFloat64(16, T0 * 1000, true)), {}, 'bad-time', /not plausible times/],
    ['too many values', good, { maxSamples: 3 }, 'too-many-samples', /4 values in one frame, more than the 3 allowed/],
    ['too large', good, { maxBytes: 64 }, 'too-large', /80 bytes, more than the 64 allowed/],
    ['a channel id that makes no valid name', encodeFrame('<script>', T0, 1, [1]), {}, 'bad-channel', /channel id "<script>" gives no valid channel name/],
  ];
  for (const [label, frame, over, reason, detail] of bad) {
    it(`refused whole: ${label} (${reason})`, () => {
      const r = decodePayload('rig/frames', frame, spec(over), ARRIVAL);
      expect(r.blocks).toBeUndefined();
      expect(r.rejections.map((x) => x.reason)).toEqual([reason]);
      expect(r.rejections[0]?.detail).toMatch(/^topic rig\/frames: /);
      expect(r.rejections[0]?.detail).toMatch(detail);
    });
  }

  it('a running daemon takes good frames and counts each bad one by reason, never crashing', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'plateau-frames-'));
    const config = parseConfig(
      {
        broker: { url: 'mqtt://127.0.0.1:1', clientId: 'frames' },
        subscriptions: [{ topic: 'rig/frames/+', format: 'binary' }],
        channels: { defaults: { window: { kind: 'growing' } } },
        store: { path: join(dir, 'state.sqlite') },
        http: { listen: '127.0.0.1:0' },
        log: { level: 'silent' },
      },
      'test',
    );
    const source = new MemorySampleSource(daemonSubscriptions(config));
    const daemon = new Daemon(config, { source });
    await daemon.start();
    try {
      for (let k = 0; k < 10; k++) source.publish('rig/frames/a', Buffer.from(encodeFrame('hx9.inlet', T0 + k * 100, 1, Array.from({ length: 100 }, (_, i) => 20 + Math.sin(i + k)))));
      for (const [, frame, over] of bad.slice(0, 6)) if (Object.keys(over).length === 0) source.publish('rig/frames/a', Buffer.from(frame));
      daemon.commitNow();
      expect(daemon.registry.get('hx9.inlet')?.pipeline.totalReceived).toBe(1000);
      expect(daemon.counters.accepted).toBe(1000);
      expect(daemon.counters.rejected['bad-frame']).toBe(6);
      expect(source.unacknowledgedMessages).toBe(0);
    } finally {
      await daemon.stop();
    }
  });
});
