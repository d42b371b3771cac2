import { describe, expect, it } from 'vitest';
import { decodePayload, DECODER_DEFAULTS, type DecoderSpec } from '../../src/ingest/payload-decoder.js';

// A refusal names its channel when the payload named one before it failed (so the daemon counts it
// for that channel too: the intake of GET /api/channels/:name); when the name would come from the
// refused record itself, or the payload is not read at all, it names none.

const ARRIVAL = 1_764_300_000_000;
const bytes = (text: string) => new TextEncoder().encode(text);
const spec = (over: Partial<DecoderSpec>): DecoderSpec => ({ ...DECODER_DEFAULTS, format: 'json', channel: '{2}', ...over });

describe('the channel of a refusal', () => {
  it('json: a record that fails names the channel its topic gives', () => {
    const r = decodePayload('rig/inlet', bytes('[{"v": "n/a"}, {"v": 2}, {"t": 5}]'), spec({}), ARRIVAL);
    expect(r.samples.map((s) => s.channel)).toEqual(['inlet']);
    expect(r.rejections.map((x) => [x.reason, x.channel])).toEqual([
      ['wrong-type', 'inlet'],
      ['missing-field', 'inlet'],
    ]);
  });

  it('number: a payload that is not a number names the channel of its topic', () => {
    const r = decodePayload('rig/outlet', bytes('warming up'), spec({ format: 'number' }), ARRIVAL);
    expect(r.rejections).toHaveLength(1);
    expect(r.rejections[0]?.channel).toBe('outlet');
  });

  it('none when the payload is not read, or the name comes from the refused record', () => {
    expect(decodePayload('rig/inlet', bytes('{not json'), spec({}), ARRIVAL).rejections[0]?.channel).toBeUndefined();
    const perRecord = decodePayload('rig/x', bytes('[{"name": "a", "v": "bad"}]'), spec({ channel: '{field}', channelField: 'name' }), ARRIVAL);
    expect(perRecord.rejections[0]?.reason).toBe('wrong-type');
    expect(perRecord.rejections[0]?.channel).toBeUndefined();
  });
});
