import { describe, expect, it } from 'vitest';
import { Encoder } from 'cbor-x';
import fc from 'fast-check';
import { decodePayload, DECODER_DEFAULTS, type DecoderSpec } from '../../src/ingest/payload-decoder.js';

// SenML in CBOR (RFC 8428 section 6): the RFC's own CBOR bytes decode to the samples of the
// RFC's JSON form of the same pack, and packs of every RFC 8428 section 5.1 example round-trip
// from JSON labels to CBOR integer labels and back to the same samples.

const ARRIVAL = 1_764_300_000_000;
const cbor = (over: Partial<DecoderSpec> = {}): DecoderSpec => ({ ...DECODER_DEFAULTS, format: 'senml-cbor', channel: '{name}', ...over });
const json = (over: Partial<DecoderSpec> = {}): DecoderSpec => ({ ...DECODER_DEFAULTS, format: 'senml', channel: '{name}', ...over });

/** RFC 8428, section 6, the hex dump "of the CBOR example for the same sensor measurement as in Section 5.1.2" (195 bytes, 0x00c3). */
const RFC8428_SECTION6_HEX = [
  '87 a7 21 78 1b 75 72 6e 3a 64 65 76 3a 6f 77 3a',
  '31 30 65 32 30 37 33 61 30 31 30 38 30 30 36 3a',
  '22 fb 41 d3 03 a1 5b 00 10 62 23 61 41 20 05 00',
  '67 76 6f 6c 74 61 67 65 01 61 56 02 fb 40 5e 06',
  '66 66 66 66 66 a3 00 67 63 75 72 72 65 6e 74 06',
  '24 02 fb 3f f3 33 33 33 33 33 33 a3 00 67 63 75',
  '72 72 65 6e 74 06 23 02 fb 3f f4 cc cc cc cc cc',
  'cd a3 00 67 63 75 72 72 65 6e 74 06 22 02 fb 3f',
  'f6 66 66 66 66 66 66 a3 00 67 63 75 72 72 65 6e',
  '74 06 21 02 f9 3e 00 a3 00 67 63 75 72 72 65 6e',
  '74 06 20 02 fb 3f f9 99 99 99 99 99 9a a3 00 67',
  '63 75 72 72 65 6e 74 06 00 02 fb 3f fb 33 33 33',
  '33 33 33',
].join(' ');

/** RFC 8428, section 5.1.2, second example (the JSON form of the section 6 bytes), as printed there. */
const RFC8428_5_1_2_TIMED = `[
  {"bn":"urn:dev:ow:10e2073a0108006:","bt":1.276020076001e+09,
   "bu":"A","bver":5,
   "n":"voltage","u":"V","v":120.1},
  {"n":"current","t":-5,"v":1.2},
  {"n":"current","t":-4,"v":1.3},
  {"n":"current","t":-3,"v":1.4},
  {"n":"current","t":-2,"v":1.5},
  {"n":"current","t":-1,"v":1.6},
  {"n":"current","v":1.7}
]`;

/** The other numeric examples of RFC 8428 section 5.1 (5.1.1, 5.1.2 first, 5.1.3, 5.1.6, 5.1.7), as printed there. */
const RFC8428_SECTION5_EXAMPLES: Record<string, string> = {
  '5.1.1': '[{"n":"urn:dev:ow:10e2073a01080063","u":"Cel","v":23.1}]',
  '5.1.2 (now)': '[{"bn":"urn:dev:ow:10e2073a01080063:","n":"voltage","u":"V","v":120.1},{"n":"current","u":"A","v":1.2}]',
  '5.1.3': `[{"bn":"urn:dev:ow:10e2073a01080063","bt":1.320067464e+09,"bu":"%RH","v":20},{"u":"lon","v":24.30621},{"u":"lat","v":60.07965},
    {"t":60,"v":20.3},{"u":"lon","t":60,"v":24.30622},{"u":"lat","t":60,"v":60.07965},{"t":120,"v":20.7},{"u":"lon","t":120,"v":24.30623},
    {"u":"lat","t":120,"v":60.07966},{"u":"%EL","t":150,"v":98},{"t":180,"v":21.2},{"u":"lon","t":180,"v":24.30628},{"u":"lat","t":180,"v":60.07967}]`,
  '5.1.6': `[{"bn":"2001:db8::2/","bt":1.320078429e+09,"n":"temperature","u":"Cel","v":25.2},{"n":"humidity","u":"%RH","v":30},
    {"bn":"2001:db8::1/","n":"temperature","u":"Cel","v":12.3},{"n":"humidity","u":"%RH","v":67}]`,
  '5.1.7': '[{"bn":"urn:dev:ow:10e2073a01080063:"},{"n":"temp","u":"Cel","v":23.1},{"n":"heat","u":"/","v":1},{"n":"fan","u":"/","v":0}]',
};

const LABEL_NUMBERS: Record<string, number> = { bver: -1, bn: -2, bt: -3, bu: -4, bv: -5, bs: -6, n: 0, u: 1, v: 2, vs: 3, vb: 4, s: 5, t: 6, ut: 7, vd: 8 }; // RFC 8428 Table 4
const encoder = new Encoder({ mapsAsObjects: false, useRecords: false, variableMapSize: true });

/** A JSON SenML pack in CBOR with the integer labels of RFC 8428 Table 4. */
function toCbor(records: Record<string, unknown>[]): Uint8Array {
  return encoder.encode(records.map((r) => new Map(Object.entries(r).map(([k, v]) => [LABEL_NUMBERS[k] ?? k, v]))));
}

describe('SenML CBOR (RFC 8428 section 6)', () => {
  it('the RFC section 6 bytes decode to the samples of the RFC section 5.1.2 JSON pack', () => {
    const bytes = Buffer.from(RFC8428_SECTION6_HEX.replace(/ /g, ''), 'hex');
    expect(bytes.length).toBe(0xc3); // RFC 8428 section 6: the dump ends at 00c3
    const fromCbor = decodePayload('rig/cbor', bytes, cbor(), ARRIVAL);
    const fromJson = decodePayload('rig/json', Buffer.from(RFC8428_5_1_2_TIMED), json(), ARRIVAL);
    expect(fromCbor.rejections).toEqual([]);
    expect(fromCbor.samples).toEqual(fromJson.samples);
    // What the RFC says the pack means (section 5.1.2): voltage and six currents at bt - 5 s .. bt, in A.
    expect(fromCbor.samples).toHaveLength(7);
    expect(fromCbor.samples[0]).toEqual({ channel: 'urn:dev:ow:10e2073a0108006:voltage', timeMs: 1276020076001, value: 120.1, unit: 'V', stamped: true });
    expect(fromCbor.samples.slice(1).map((s) => [s.channel, s.unit, s.timeMs, s.value])).toEqual(
      [1.2, 1.3, 1.4, 1.5, 1.6, 1.7].map((v, i) => ['urn:dev:ow:10e2073a0108006:current', 'A', 1276020076001 + (i - 5) * 1000, v]),
    );
  });

  for (const [section, text] of Object.entries(RFC8428_SECTION5_EXAMPLES)) {
    it(`RFC 8428 example ${section}: the CBOR form gives the samples of the JSON form`, () => {
      const records = JSON.parse(text) as Record<string, unknown>[];
      const fromJson = decodePayload('rig/json', Buffer.from(text), json(), ARRIVAL);
      const fromCbor = decodePayload('rig/cbor', toCbor(records), cbor(), ARRIVAL);
      expect(fromJson.rejections).toEqual([]);
      expect(fromCbor.rejections).toEqual([]);
      expect(fromCbor.samples).toEqual(fromJson.samples);
      expect(fromCbor.samples.length).toBe(records.filter((r) => r.v !== undefined).length);
    });
  }

  it('RFC 8428 example 5.1.5 (multiple data types): string, boolean and data values are refused as not numeric, in both forms', () => {
    const records = [{ bn: 'urn:dev:ow:10e2073a01080063:', n: 'temp', u: 'Cel', v: 23.1 }, { n: 'label', vs: 'Machine Room' }, { n: 'open', vb: false }, { n: 'nfv-reader', vd: new Uint8Array([0x68, 0x69, 0x20, 0x0a]) }];
    const fromCbor = decodePayload('rig/cbor', toCbor(records), cbor(), ARRIVAL);
    expect(fromCbor.samples.map((s) => s.channel)).toEqual(['urn:dev:ow:10e2073a01080063:temp']);
    expect(fromCbor.rejections.map((r) => r.reason)).toEqual(['wrong-type', 'wrong-type', 'wrong-type']);
    expect(fromCbor.rejections[0]?.detail).toMatch(/topic rig\/cbor: record 1: only numeric values/);
  });

  it('decimal fractions (CBOR tag 4, allowed by RFC 8428 section 6) and integers are numbers', () => {
    // [{0: "x", 2: 4([-2, 2715])}] : 27.15 as a decimal fraction (RFC 8949 section 3.4.4 gives tag 4 as [exponent, mantissa])
    const bytes = Buffer.from('81a2' + '006178' + '02c48221190a9b', 'hex');
    const r = decodePayload('rig/cbor', bytes, cbor(), ARRIVAL);
    expect(r.rejections).toEqual([]);
    expect(r.samples[0]?.value).toBeCloseTo(27.15, 12);
  });

  it('round trip: random packs of numeric records give the same samples in JSON and in CBOR', () => {
    const record = fc.record(
      { n: fc.constantFrom('a', 'b', 'c.d'), v: fc.double({ min: -1e9, max: 1e9, noNaN: true }), t: fc.integer({ min: -100, max: 100 }), u: fc.constantFrom('Cel', 'kPa', 'V') },
      { requiredKeys: ['v'] },
    );
    const pack = fc.tuple(fc.record({ bn: fc.constantFrom('hx9.', 'cell3:'), bt: fc.integer({ min: 1_700_000_000, max: 1_800_000_000 }) }), fc.array(record, { minLength: 1, maxLength: 40 }));
    fc.assert(
      fc.property(pack, ([base, rest]) => {
        const records = [{ ...base, ...rest[0] }, ...rest.slice(1)] as Record<string, unknown>[];
        const fromJson = decodePayload('rig/json', Buffer.from(JSON.stringify(records)), json(), ARRIVAL);
        const fromCbor = decodePayload('rig/cbor', toCbor(records), cbor(), ARRIVAL);
        expect(fromCbor).toEqual(fromJson);
      }),
      { numRuns: 500, seed: 13 },
    );
  });

  it('bad CBOR is refused with a reason naming the topic: truncated, not an array, too many records, a hostile key', () => {
    const good = toCbor([{ n: 'x', v: 1 }]);
    const cases: [Uint8Array, Partial<DecoderSpec>, string, RegExp][] = [
      [good.subarray(0, good.length - 3), {}, 'unparseable', /topic rig\/cbor: payload is not CBOR/],
      [encoder.encode(new Map([[0, 'x']])), {}, 'wrong-type', /SenML CBOR needs an array of records, got a map/],
      [toCbor([{ v: 1 }, { v: 2 }, { v: 3 }]), { maxSamples: 2 }, 'too-many-samples', /3 records in one pack, more than the 2 allowed/],
      [Buffer.from('9affffffff', 'hex'), {}, 'unparseable', /not CBOR/],
      [Buffer.from(`${'81'.repeat(100_000)}01`, 'hex'), { maxBytes: 1_000_000 }, 'unparseable', /not CBOR/],
      [toCbor([{ n: 'x', v: Number.NaN }]), {}, 'nan', /v is NaN/],
      [toCbor([{ n: 'x', v: '12' }]), {}, 'wrong-type', /v is of the wrong type/],
    ];
    for (const [bytes, over, reason, detail] of cases) {
      const r = decodePayload('rig/cbor', bytes, cbor(over), ARRIVAL);
      expect(r.samples).toEqual([]);
      expect(r.rejections.map((x) => x.reason)).toEqual([reason]);
      expect(r.rejections[0]?.detail).toMatch(detail);
    }
    const proto = encoder.encode([new Map<unknown, unknown>([['__proto__', { polluted: true }], [0, 'x'], [2, 1]])]);
    const r = decodePayload('rig/cbor', proto, cbor(), ARRIVAL);
    expect(r.samples.map((s) => s.value)).toEqual([1]);
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
  });
});
