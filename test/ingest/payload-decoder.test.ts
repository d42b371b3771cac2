import { describe, expect, it } from 'vitest';
import { decodePayload, DECODER_DEFAULTS, channelName, nestingDepth, type DecoderSpec } from '../../src/ingest/payload-decoder.js';

// Every kind of bad payload gets a reason and a message naming where; good payloads of each format
// decode to the right samples. SenML per RFC 8428 (base name, base time, base unit, relative times).

const ARRIVAL = 1_764_300_000_000;
const spec = (over: Partial<DecoderSpec>): DecoderSpec => ({ ...DECODER_DEFAULTS, format: 'json', channel: '{2}', ...over });
const bytes = (text: string) => Buffer.from(text, 'utf8');

describe('decodePayload: good payloads', () => {
  it('a bare number, stamped with the arrival time', () => {
    const r = decodePayload('rig/inlet', bytes(' 21.375 '), spec({ format: 'number' }), ARRIVAL);
    expect(r.rejections).toEqual([]);
    expect(r.samples).toEqual([{ channel: 'inlet', timeMs: ARRIVAL, value: 21.375, stamped: false }]);
  });

  it('JSON with value and time fields (seconds, milliseconds and ISO 8601)', () => {
    expect(decodePayload('rig/a', bytes('{"v": 1.5, "t": 1764300001.25}'), spec({}), ARRIVAL).samples).toEqual([{ channel: 'a', timeMs: 1764300001250, value: 1.5, stamped: true }]);
    expect(decodePayload('rig/a', bytes('{"m": {"val": 2}, "ts": 1764300002000}'), spec({ valueField: 'm.val', timeField: 'ts', timeUnit: 'ms' }), ARRIVAL).samples[0]).toEqual({ channel: 'a', timeMs: 1764300002000, value: 2, stamped: true });
    expect(decodePayload('rig/a', bytes('{"v": 3, "t": "2025-11-28T03:20:00Z"}'), spec({}), ARRIVAL).samples[0]?.timeMs).toBe(Date.parse('2025-11-28T03:20:00Z'));
  });

  it('JSON arrays and packs with many samples, channel from a field', () => {
    const pack = JSON.stringify({ readings: [{ probe: 'ref', v: 60.001, t: 1764300000 }, { probe: 'p1', v: 59.998, t: 1764300000 }] });
    const r = decodePayload('lab/cb2/readings', bytes(pack), spec({ samplesField: 'readings', channelField: 'probe', channel: 'cb2.{field}' }), ARRIVAL);
    expect(r.samples.map((s) => s.channel)).toEqual(['cb2.ref', 'cb2.p1']);
    const array = decodePayload('rig/b', bytes('[{"v":1,"t":1764300000},{"v":2,"t":1764300001}]'), spec({}), ARRIVAL);
    expect(array.samples.map((s) => s.value)).toEqual([1, 2]);
  });

  it('SenML pack: base name, base time, base unit, relative and absolute times (RFC 8428 4.5.3)', () => {
    const pack = [{ bn: 'hx7.', bt: 1764300000, bu: 'Cel', n: 'ambient', v: 21.5 }, { n: 'ambient', t: 1, v: 21.6 }, { n: 'shell', u: 'kPa', t: 2, v: 18.4 }];
    const r = decodePayload('rig/senml', bytes(JSON.stringify(pack)), spec({ format: 'senml', channel: '{name}' }), ARRIVAL);
    expect(r.rejections).toEqual([]);
    expect(r.samples).toEqual([
      { channel: 'hx7.ambient', timeMs: 1764300000000, value: 21.5, unit: 'Cel', stamped: true },
      { channel: 'hx7.ambient', timeMs: 1764300001000, value: 21.6, unit: 'Cel', stamped: true },
      { channel: 'hx7.shell', timeMs: 1764300002000, value: 18.4, unit: 'kPa', stamped: true },
    ]);
    const relative = decodePayload('rig/senml', bytes('[{"n":"x","v":1,"t":-2}]'), spec({ format: 'senml', channel: '{name}' }), ARRIVAL);
    expect(relative.samples[0]?.timeMs).toBe(ARRIVAL - 2000);
    expect(relative.samples[0]?.stamped).toBe(false);
  });
});

describe('decodePayload: bad payloads, each with its reason and message', () => {
  const cases: [string, string | Uint8Array, Partial<DecoderSpec>, string, RegExp][] = [
    ['oversize', 'x'.repeat(300), { maxBytes: 256 }, 'too-large', /300 bytes, more than the 256 allowed/],
    ['not UTF-8', new Uint8Array([0xff, 0xfe, 0x31]), {}, 'unparseable', /not UTF-8 text/],
    ['not JSON', '{"v": 1', {}, 'unparseable', /not JSON/],
    ['nesting too deep', `${'['.repeat(20)}1${']'.repeat(20)}`, {}, 'too-deep', /nested 20 levels, more than the 8 allowed/],
    ['NaN as text', '{"v": "NaN"}', {}, 'nan', /"v" is NaN/],
    ['Infinity as text', '{"v": "-Infinity"}', {}, 'infinite', /"v" is infinite/],
    ['a string value', '{"v": "warm"}', {}, 'wrong-type', /"v" is of the wrong type \("warm"\)/],
    ['a boolean value', '{"v": true}', {}, 'wrong-type', /wrong type/],
    ['a missing value', '{"t": 1764300000}', {}, 'missing-field', /no "v" field/],
    ['a bad time', '{"v": 1, "t": "yesterday"}', {}, 'bad-time', /"t" is not a time/],
    ['a time in milliseconds declared as seconds', '{"v": 1, "t": 1764300000000}', {}, 'bad-time', /not a time/],
    ['a JSON string document', '"hello"', {}, 'wrong-type', /JSON a string where an object or array was expected/],
    ['too many samples', JSON.stringify(Array.from({ length: 5 }, (_, i) => ({ v: i }))), { maxSamples: 4 }, 'too-many-samples', /5 samples in one message, more than the 4 allowed/],
    ['NaN bare number', 'NaN', { format: 'number' }, 'nan', /is NaN/],
    ['Infinity bare number', 'Infinity', { format: 'number' }, 'infinite', /infinite/],
    ['a word as a number', 'warm', { format: 'number' }, 'not-a-number', /"warm" is not a number/],
    ['hexadecimal', '0x1F', { format: 'number' }, 'not-a-number', /not a number/],
    ['SenML not an array', '{"n":"x","v":1}', { format: 'senml', channel: '{name}' }, 'wrong-type', /SenML needs a JSON array/],
    ['SenML string value', '[{"n":"x","vs":"on"}]', { format: 'senml', channel: '{name}' }, 'wrong-type', /only numeric values/],
    ['SenML bad name', '[{"n":"<script>","v":1}]', { format: 'senml', channel: '{name}' }, 'bad-channel', /not a valid channel name/],
  ];
  for (const [label, payload, over, reason, message] of cases) {
    it(`${label}: ${reason}`, () => {
      const r = decodePayload('rig/probe', typeof payload === 'string' ? bytes(payload) : payload, spec(over), ARRIVAL);
      expect(r.samples).toEqual([]);
      expect(r.rejections.length).toBe(1);
      expect(r.rejections[0]?.reason).toBe(reason);
      expect(r.rejections[0]?.detail).toMatch(/^topic rig\/probe: /);
      expect(r.rejections[0]?.detail).toMatch(message);
    });
  }

  it('one bad record in a pack rejects only that record', () => {
    const r = decodePayload('rig/b', bytes('[{"v":1},{"v":"x"},{"v":3}]'), spec({}), ARRIVAL);
    expect(r.samples.map((s) => s.value)).toEqual([1, 3]);
    expect(r.rejections[0]?.detail).toMatch(/record 1: "v" is of the wrong type/);
  });
});

describe('helpers', () => {
  it('channel templates fill topic levels, {topic}, {name}, {field}; invalid names give null', () => {
    expect(channelName('{2}.{3}', 'rig/hx7/inlet', {})).toBe('hx7.inlet');
    expect(channelName('{topic}', 'rig/hx7/inlet', {})).toBe('rig/hx7/inlet');
    expect(channelName('{4}', 'rig/hx7', {})).toBeNull();
    expect(channelName('{2}', 'rig/<b>', {})).toBeNull();
  });
  it('nesting depth ignores brackets inside strings', () => {
    expect(nestingDepth('{"a": "[[[[", "b": [1, [2]]}')).toBe(3);
  });
});
