import { MAX_MAGNITUDE, MAX_TIME_MS, type DecodeResult, type Rejection, type RejectReason, type Sample, type SampleBlock } from './sample.js';
import type { DecoderSpec } from '../config/decoder-spec.js';
import { senmlCborRecords } from './senml-cbor.js';
import { readFrameHeader, readFrameValues } from './binary-frame.js';
import { SparkplugDecoder } from './sparkplug-decoder.js';

/**
 * Payload decoding: (topic, bytes, subscription, arrival time) -> samples and rejections.
 *
 * Pure and total: every input, however hostile, gives a result and never throws. It is the single
 * place where bad input stops: bytes that are not UTF-8 text or JSON, NaN, Infinity, strings where a
 * number belongs, wrong types, nesting deeper than allowed, oversize messages and too many samples
 * in one message are rejected with a reason and a detail naming where.
 *
 * Formats:
 *   number   the payload is one number as text ("21.37")
 *   json     an object with a value field and optionally a time field, or an array of such objects,
 *            or an object whose `samplesField` holds that array (many samples per message)
 *   senml    a SenML JSON pack (RFC 8428): records with base name bn, base time bt, base unit bu,
 *            base value bv, name n, unit u, value v, time t; records carrying vs/vb/vd (strings,
 *            booleans, data) are rejected as not numeric
 *   senml-cbor  the same pack in CBOR with the integer labels of RFC 8428 section 6 (senml-cbor.ts);
 *            read by the same SenML reader, so it gives exactly the samples of its JSON form
 *   binary   plateau's little-endian frame (binary-frame.ts): one channel, a first time stamp, an
 *            interval and float64 or float32 values, decoded into a typed-array block; a truncated,
 *            oversized or misaligned frame is refused whole (bad-frame), a NaN value alone
 * Times: the payload's time when present (seconds or milliseconds since the epoch, or ISO 8601
 * text), else the arrival time. SenML times below 2^28 are relative to the arrival time
 * (RFC 8428, section 4.5.3).
 */
export { DECODER_DEFAULTS, type DecoderSpec } from '../config/decoder-spec.js';

const SENML_RELATIVE_LIMIT = 2 ** 28; // seconds: RFC 8428 4.5.3
const CHANNEL_PATTERN = /^[\p{L}\p{N}_.:\-/]{1,128}$/u;
const utf8 = new TextDecoder('utf-8', { fatal: true });

/**
 * The daemon's decoders: the pure ones above, and the Sparkplug B decoder with its state per edge
 * node (sparkplug-decoder.ts). One instance per daemon. Binary frames, SenML packs (JSON and CBOR)
 * and JSON arrays come out as blocks of typed arrays, not an object per sample.
 */
export class PayloadDecoders {
  readonly sparkplug = new SparkplugDecoder();
  /**
   * Typed arrays reused by every binary frame: a block's arrays hold its samples only until the next
   * decode (the daemon's ingest takes them at once). Allocating two typed arrays per frame cost
   * more than reading the frame (about 0.1 us per sample, measured on the shared machine).
   */
  private readonly scratch: FrameScratch = { values: new Float64Array(1024), times: new Float64Array(1024) };

  decode(topic: string, payload: Uint8Array, spec: DecoderSpec, arrivalMs: number): DecodeResult {
    if (spec.format === 'sparkplug') return this.sparkplug.decode(topic, payload, spec, arrivalMs);
    return decodePayload(topic, payload, spec, arrivalMs, this.scratch);
  }
}

/** Arrays a binary frame may decode into (grown as needed); without them each frame gets its own. */
export interface FrameScratch {
  values: Float64Array;
  times: Float64Array;
}

export function decodePayload(topic: string, payload: Uint8Array, spec: DecoderSpec, arrivalMs: number, scratch?: FrameScratch): DecodeResult {
  const out: DecodeResult = { samples: [], rejections: [] };
  const reject = (reason: RejectReason, detail: string) => {
    out.rejections.push({ reason, detail: `topic ${truncate(topic)}: ${detail}` });
    return out;
  };
  if (payload.byteLength > spec.maxBytes) return reject('too-large', `${payload.byteLength} bytes, more than the ${spec.maxBytes} allowed`);
  if (spec.format === 'sparkplug') return reject('wrong-type', 'Sparkplug B payloads are read by the stateful decoder (PayloadDecoders), not payload by payload');
  if (spec.format === 'binary') {
    decodeFrame(topic, payload, spec, out, scratch);
    return out;
  }
  if (spec.format === 'senml-cbor') {
    const read = senmlCborRecords(payload, spec.maxSamples);
    if ('error' in read) return reject(read.error.startsWith('payload is not CBOR') ? 'unparseable' : read.error.includes('more than the') ? 'too-many-samples' : 'wrong-type', read.error);
    decodeSenml(topic, read.records, spec, arrivalMs, out, scratch !== undefined);
    return out;
  }
  let text: string;
  try {
    text = utf8.decode(payload);
  } catch {
    return reject('unparseable', 'payload is not UTF-8 text');
  }
  if (spec.format === 'number') {
    const channel = channelName(spec.channel, topic, {});
    const value = readNumberText(text);
    if (typeof value === 'string') {
      reject(value, `payload "${truncate(text)}" is ${REASON_TEXT[value]}`);
      if (channel !== null) (out.rejections.at(-1) as Rejection).channel = channel;
      return out;
    }
    if (channel === null) return reject('bad-channel', `channel template "${spec.channel}" gives no valid name for this topic`);
    out.samples.push(withUnit({ channel, timeMs: arrivalMs, value, stamped: false }, spec.unit));
    return out;
  }
  const depth = nestingDepth(text);
  if (depth > spec.maxDepth) return reject('too-deep', `JSON nested ${depth} levels, more than the ${spec.maxDepth} allowed`);
  let document: unknown;
  try {
    document = JSON.parse(text);
  } catch {
    return reject('unparseable', `payload is not JSON: "${truncate(text)}"`);
  }
  if (spec.format === 'senml') decodeSenml(topic, document, spec, arrivalMs, out, scratch !== undefined);
  else decodeJson(topic, document, spec, arrivalMs, out, scratch !== undefined);
  return out;
}

/** `asBlocks`: as in decodeSenml, runs of one channel and kind of time become blocks. */
function decodeJson(topic: string, document: unknown, spec: DecoderSpec, arrivalMs: number, out: DecodeResult, asBlocks = false): void {
  let records: unknown[];
  if (typeof document === 'number') {
    // A bare JSON number is accepted as a value at arrival time.
    records = [{ [spec.valueField]: document }];
  } else if (Array.isArray(document)) records = document;
  else if (isObject(document) && spec.samplesField) {
    const inner = getPath(document, spec.samplesField);
    if (!Array.isArray(inner)) {
      out.rejections.push({ reason: 'missing-field', detail: `topic ${truncate(topic)}: no array at "${spec.samplesField}"` });
      return;
    }
    records = inner;
  } else if (isObject(document)) records = [document];
  else {
    out.rejections.push({ reason: 'wrong-type', detail: `topic ${truncate(topic)}: JSON ${typeName(document)} where an object or array was expected` });
    return;
  }
  if (records.length > spec.maxSamples) {
    out.rejections.push({ reason: 'too-many-samples', detail: `topic ${truncate(topic)}: ${records.length} samples in one message, more than the ${spec.maxSamples} allowed` });
    return;
  }
  // The channel name depends only on the topic unless the template takes a field from each record.
  const perRecordName = spec.channelField !== null && spec.channel.includes('{field}');
  const messageChannel = perRecordName ? null : channelName(spec.channel, topic, {});
  const unit = spec.unit === null ? undefined : spec.unit;
  let block: SampleBlock | null = null;
  let index = 0;
  // The channel is known before the record is read when the name comes from the topic alone.
  const fail = (reason: RejectReason, detail: string) => out.rejections.push({ reason, detail: `topic ${truncate(topic)}: ${records.length > 1 ? `record ${index}` : 'payload'}: ${detail}`, ...(messageChannel !== null ? { channel: messageChannel } : {}) });
  for (; index < records.length; index++) take(records[index]);
  function take(record: unknown): void {
    let raw: unknown = record;
    if (isObject(record)) raw = getPath(record, spec.valueField);
    else if (typeof record !== 'number') return void fail('wrong-type', `${typeName(record)} where an object or number was expected`);
    if (raw === undefined) return void fail('missing-field', `no "${spec.valueField}" field`);
    const value = readJsonNumber(raw);
    if (typeof value === 'string') return void fail(value, `"${spec.valueField}" is ${REASON_TEXT[value]}${typeof raw === 'string' ? ` ("${truncate(raw)}")` : ''}`);
    let timeMs = arrivalMs;
    let stamped = false;
    if (spec.timeField && isObject(record)) {
      const rawTime = getPath(record, spec.timeField);
      if (rawTime !== undefined) {
        const parsed = readTime(rawTime, spec.timeUnit);
        if (parsed === null) return void fail('bad-time', `"${spec.timeField}" is not a time (${truncate(JSON.stringify(rawTime) ?? '')})`);
        timeMs = parsed;
        stamped = true;
      }
    }
    let field: string | undefined;
    if (spec.channelField && isObject(record)) {
      const rawName = getPath(record, spec.channelField);
      if (typeof rawName !== 'string') return void fail('bad-channel', `"${spec.channelField}" is not a string`);
      field = rawName;
    }
    const channel = perRecordName ? channelName(spec.channel, topic, field === undefined ? {} : { field }) : messageChannel;
    if (channel === null) return void fail('bad-channel', `channel template "${spec.channel}" gives no valid name`);
    if (!asBlocks) {
      out.samples.push(withUnit({ channel, timeMs, value, stamped }, spec.unit));
      return;
    }
    if (block === null || block.channel !== channel || block.stamped !== stamped) {
      const room = records.length - index;
      block = { channel, times: new Float64Array(room), values: new Float64Array(room), length: 0, stamped };
      if (unit !== undefined) block.unit = unit;
      (out.blocks ??= []).push(block);
    }
    block.times[block.length] = timeMs;
    block.values[block.length] = value;
    block.length++;
  }
}

/**
 * `asBlocks` (the daemon's decoders): the samples go into blocks, one per run of records with the
 * same channel, unit and kind of time, in the pack's order, instead of an object per sample.
 */
function decodeSenml(topic: string, document: unknown, spec: DecoderSpec, arrivalMs: number, out: DecodeResult, asBlocks = false): void {
  const fail = (reason: RejectReason, detail: string) => out.rejections.push({ reason, detail: `topic ${truncate(topic)}: ${detail}` });
  if (!Array.isArray(document)) return void fail('wrong-type', `SenML needs a JSON array of records, got ${typeName(document)}`);
  if (document.length > spec.maxSamples) return void fail('too-many-samples', `${document.length} records in one pack, more than the ${spec.maxSamples} allowed`);
  let baseName = '';
  let baseTime = 0;
  let baseUnit: string | undefined;
  let baseValue = 0;
  let lastName: string | null = null;
  let lastChannel: string | null = null;
  let block: SampleBlock | null = null;
  document.forEach((record, index) => {
    const where = `record ${index}`;
    if (!isObject(record)) return void fail('wrong-type', `${where}: ${typeName(record)} where a SenML record object was expected`);
    if (record.bn !== undefined) {
      if (typeof record.bn !== 'string') return void fail('wrong-type', `${where}: bn is not a string`);
      baseName = record.bn;
    }
    if (record.bt !== undefined) {
      if (typeof record.bt !== 'number' || !Number.isFinite(record.bt)) return void fail('bad-time', `${where}: bt is not a finite number`);
      baseTime = record.bt;
    }
    if (record.bu !== undefined) {
      if (typeof record.bu !== 'string') return void fail('wrong-type', `${where}: bu is not a string`);
      baseUnit = record.bu;
    }
    if (record.bv !== undefined) {
      if (typeof record.bv !== 'number' || !Number.isFinite(record.bv)) return void fail('not-a-number', `${where}: bv is not a finite number`);
      baseValue = record.bv;
    }
    const hasValue = record.v !== undefined || record.vs !== undefined || record.vb !== undefined || record.vd !== undefined || record.s !== undefined;
    if (!hasValue) {
      if (record.n !== undefined || record.t !== undefined) fail('missing-field', `${where}: no value (v)`);
      return; // a record that only sets base fields
    }
    if (record.v === undefined) return void fail('wrong-type', `${where}: only numeric values (v) are measurements; vs, vb, vd and s are not`);
    const value = readJsonNumber(record.v);
    if (typeof value === 'string') return void fail(value, `${where}: v is ${REASON_TEXT[value]}`);
    const name = record.n === undefined ? '' : record.n;
    if (typeof name !== 'string') return void fail('wrong-type', `${where}: n is not a string`);
    const fullName = baseName + name;
    let t = baseTime;
    if (record.t !== undefined) {
      if (typeof record.t !== 'number' || !Number.isFinite(record.t)) return void fail('bad-time', `${where}: t is not a finite number`);
      t += record.t;
    }
    const relative = Math.abs(t) < SENML_RELATIVE_LIMIT;
    const timeMs = relative ? arrivalMs + t * 1000 : t * 1000;
    if (!(timeMs >= 0 && timeMs < MAX_TIME_MS)) return void fail('bad-time', `${where}: time ${t} s is not a plausible time`);
    const total = inRange(value + baseValue);
    if (typeof total === 'string') return void fail(total, `${where}: v + bv is ${REASON_TEXT[total]}`);
    const unit = record.u !== undefined ? record.u : baseUnit;
    if (unit !== undefined && typeof unit !== 'string') return void fail('wrong-type', `${where}: u is not a string`);
    // Records of a pack mostly repeat a name: the channel is worked out once per run of equal names.
    if (fullName !== lastName) {
      lastName = fullName;
      lastChannel = channelName(spec.channel, topic, { name: fullName });
    }
    const channel = lastChannel;
    if (channel === null) return void fail('bad-channel', `${where}: name "${truncate(fullName)}" is not a valid channel name`);
    const fixed = spec.unit ?? unit;
    if (asBlocks) {
      const sampleUnit = fixed === null ? undefined : fixed;
      if (block === null || block.channel !== channel || block.unit !== sampleUnit || block.stamped === relative) {
        // A new run: room for every record left in the pack.
        const room = (document as unknown[]).length - index;
        block = { channel, times: new Float64Array(room), values: new Float64Array(room), length: 0, stamped: !relative };
        if (sampleUnit !== undefined) block.unit = sampleUnit;
        (out.blocks ??= []).push(block);
      }
      block.times[block.length] = timeMs;
      block.values[block.length] = total;
      block.length++;
      return;
    }
    const sample: Sample = { channel, timeMs, value: total, stamped: !relative };
    if (fixed !== undefined && fixed !== null) sample.unit = fixed;
    out.samples.push(sample);
  });
}

function decodeFrame(topic: string, payload: Uint8Array, spec: DecoderSpec, out: DecodeResult, scratch: FrameScratch | undefined): void {
  const header = readFrameHeader(payload, spec.maxSamples);
  if ('problem' in header) {
    const reason: RejectReason = header.problem === 'too-many-samples' ? 'too-many-samples' : header.problem === 'bad-time' ? 'bad-time' : 'bad-frame';
    out.rejections.push({ reason, detail: `topic ${truncate(topic)}: binary frame ${header.problem === 'bad-header' || header.problem === 'bad-time' || header.problem === 'too-many-samples' ? 'refused' : header.problem}: ${header.detail}` });
    return;
  }
  const channel = channelName(spec.channel, topic, { name: header.channelId });
  if (channel === null) {
    out.rejections.push({ reason: 'bad-channel', detail: `topic ${truncate(topic)}: binary frame: channel id "${truncate(header.channelId)}" gives no valid channel name` });
    return;
  }
  const n = header.count;
  let values: Float64Array;
  let times: Float64Array;
  if (scratch === undefined) {
    values = new Float64Array(n);
    times = new Float64Array(n);
  } else {
    if (scratch.values.length < n) {
      scratch.values = new Float64Array(n);
      scratch.times = new Float64Array(n);
    }
    values = scratch.values;
    times = scratch.times;
  }
  readFrameValues(payload, header, values);
  const first = header.firstTime;
  const interval = header.interval;
  let k = 0;
  for (let i = 0; i < n; i++) {
    const v = values[i] as number;
    if (v - v === 0 && v <= MAX_MAGNITUDE && v >= -MAX_MAGNITUDE) {
      values[k] = v;
      times[k] = (first + i * interval) * 1000;
      k++;
    } else {
      const reason = inRange(v) as RejectReason;
      out.rejections.push({ reason, detail: `topic ${truncate(topic)}: binary frame: value ${i} is ${REASON_TEXT[reason]}` });
    }
  }
  const block: SampleBlock = { channel, times, values, length: k, stamped: true };
  if (spec.unit !== null) block.unit = spec.unit;
  if (k > 0) out.blocks = [block];
}

const REASON_TEXT: Record<string, string> = {
  'not-a-number': 'not a number',
  'out-of-range': `beyond +/-${MAX_MAGNITUDE}, outside any measurement`,
  nan: 'NaN, which is not a measurement',
  infinite: 'infinite, which is not a measurement',
  'wrong-type': 'of the wrong type',
  'empty-text': 'empty',
};

function readNumberText(text: string): number | RejectReason {
  const trimmed = text.trim();
  if (trimmed === '') return 'not-a-number';
  if (/^[+-]?nan$/i.test(trimmed)) return 'nan';
  if (/^[+-]?inf(inity)?$/i.test(trimmed)) return 'infinite';
  if (!/^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(trimmed)) return 'not-a-number';
  return inRange(Number(trimmed));
}

function inRange(value: number): number | RejectReason {
  if (Number.isNaN(value)) return 'nan'; // a binary NaN (CBOR, float frames), named as such
  if (!Number.isFinite(value)) return 'infinite';
  return Math.abs(value) <= MAX_MAGNITUDE ? value : 'out-of-range';
}

function readJsonNumber(raw: unknown): number | RejectReason {
  if (typeof raw === 'number') return inRange(raw);
  if (typeof raw === 'string') {
    // Text such as "NaN" or "Infinity" is named as such; other strings are the wrong type.
    if (/^[+-]?nan$/i.test(raw.trim())) return 'nan';
    if (/^[+-]?inf(inity)?$/i.test(raw.trim())) return 'infinite';
    return 'wrong-type';
  }
  return 'wrong-type';
}

/** Epoch milliseconds from seconds, milliseconds or ISO 8601 text; null when it is not a plausible time. */
function readTime(raw: unknown, unit: 's' | 'ms'): number | null {
  let ms: number;
  if (typeof raw === 'number') ms = unit === 's' ? raw * 1000 : raw;
  else if (typeof raw === 'string') ms = Date.parse(raw);
  else return null;
  // Accept 1970 .. 2200: anything else is a unit mistake or garbage.
  return Number.isFinite(ms) && ms >= 0 && ms < MAX_TIME_MS ? ms : null;
}

/** Channel names already worked out, by template, topic, name and field (most messages repeat them). */
const NAMES = new Map<string, string | null>();
const NAMES_KEPT = 4096;

/** Fills a channel template from topic levels ({1}, {2}, ...), {topic}, {name} and {field}. */
export function channelName(template: string, topic: string, extra: { name?: string; field?: string }): string | null {
  const key = `${template}\u0000${topic}\u0000${extra.name ?? '\u0001'}\u0000${extra.field ?? '\u0001'}`;
  const known = NAMES.get(key);
  if (known !== undefined) return known;
  const name = fillTemplate(template, topic, extra);
  if (NAMES.size >= NAMES_KEPT) NAMES.clear();
  NAMES.set(key, name);
  return name;
}

function fillTemplate(template: string, topic: string, extra: { name?: string; field?: string }): string | null {
  const levels = topic.split('/');
  let missing = false;
  const name = template.replace(/\{(\w+)\}/g, (_match, key: string) => {
    if (key === 'topic') return topic;
    if (key === 'name') return extra.name ?? ((missing = true), '');
    if (key === 'field') return extra.field ?? ((missing = true), '');
    const index = Number(key);
    if (Number.isInteger(index) && index >= 1 && index <= levels.length) return levels[index - 1] as string;
    missing = true;
    return '';
  });
  return !missing && CHANNEL_PATTERN.test(name) ? name : null;
}

function withUnit(sample: Sample, unit: string | null): Sample {
  if (unit !== null) sample.unit = unit;
  return sample;
}

const splitPaths = new Map<string, string[]>();

function getPath(object: Record<string, unknown>, path: string): unknown {
  if (!path.includes('.')) return Object.prototype.hasOwnProperty.call(object, path) ? object[path] : undefined;
  let keys = splitPaths.get(path);
  if (!keys) {
    keys = path.split('.');
    if (splitPaths.size < 1000) splitPaths.set(path, keys);
  }
  let current: unknown = object;
  for (const key of keys) {
    if (!isObject(current) || !Object.prototype.hasOwnProperty.call(current, key)) return undefined;
    current = current[key];
  }
  return current;
}

function isObject(value: unknown): value is Record<string, unknown> {
  return typeof value === 'object' && value !== null && !Array.isArray(value);
}

function typeName(value: unknown): string {
  if (value === null) return 'null';
  if (Array.isArray(value)) return 'an array';
  return `a ${typeof value}`;
}

/** Deepest bracket nesting of JSON text, ignoring brackets inside strings; O(length), no recursion. */
export function nestingDepth(text: string): number {
  let depth = 0;
  let deepest = 0;
  let inString = false;
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (inString) {
      if (c === 92) i++; // backslash escape
      else if (c === 34) inString = false;
    } else if (c === 34) inString = true;
    else if (c === 123 || c === 91) {
      depth++;
      if (depth > deepest) deepest = depth;
    } else if (c === 125 || c === 93) depth--;
  }
  return deepest;
}

function truncate(text: string, length = 60): string {
  const clean = text.replace(/[\u0000-\u001f\u007f]/g, '?');
  return clean.length > length ? `${clean.slice(0, length)}...` : clean;
}

export type { Rejection };
