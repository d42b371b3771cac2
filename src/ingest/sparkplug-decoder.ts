import type { DecoderSpec } from '../config/decoder-spec.js';
import { MAX_MAGNITUDE, MAX_TIME_MS, type DecodeEffects, type DecodeResult, type RejectReason, type Sample } from './sample.js';
import { REBIRTH_METRIC, SparkplugPayload, SPARKPLUG_TYPE_NAMES, SPARKPLUG_TYPES } from './sparkplug-schema.js';
import { EdgeNodeState, type MetricInfo } from './sparkplug-state.js';

/**
 * Sparkplug B (`format: sparkplug`): topics spBv1.0/<group>/<message type>/<edge node>[/<device>],
 * payloads in the specification's protobuf schema (sparkplug-schema.ts), decoded by protobufjs.
 *
 * Stateful, one EdgeNodeState per edge node (sparkplug-state.ts): NBIRTH and DBIRTH announce the
 * metrics with their names, aliases and data types; NDATA and DDATA may then name a metric by its
 * alias alone. Each metric's time is its own timestamp (ms since the epoch), else the payload's,
 * else the arrival time. The behaviour follows the Sparkplug 3.0.0 specification as we read it:
 *
 * - seq: NBIRTH carries 0; every later message of the node (DBIRTH, NDATA, DDATA, DDEATH) the next
 *   number modulo 256. A jump is a sequence gap: the messages missing are counted, and the node's
 *   channels are told (they feed the gap counters), and the node needs a rebirth.
 * - An alias or name the node never announced, or data before any birth, also makes the node need
 *   a rebirth; its metrics are refused (`unknown-alias`).
 * - A node that needs a rebirth is sent a rebirth request when the subscription says
 *   `sparkplug.requestRebirth: true`: an NCMD on spBv1.0/<group>/NCMD/<node> with the metric
 *   "Node Control/Rebirth" = true, again at most every REBIRTH_REPEAT_MS while it stays unanswered.
 * - NDEATH carries the bdSeq of the birth it ends: when it matches, the node's channels turn stale at
 *   once; a death with another bdSeq (an old session's will, delivered late) is ignored and counted.
 *   DDEATH turns the device's channels stale.
 * - Metrics of a number type (Int8..UInt64, Float, Double) become samples on the channel the
 *   template names; Boolean, String, DateTime, DataSet, Template and the others are refused and
 *   counted (`wrong-type`), as are null values (`missing-field`). The node's bdSeq metric and its
 *   "Node Control/..." metrics are the protocol's own and are skipped without a count.
 * - NCMD, DCMD and STATE carry no measurements: counted as commands and left alone.
 *
 * Channel names: the subscription's template over {group}, {node}, {device} and {metric} (default
 * "{node}.{device}.{metric}"); without a device the {device} placeholder and one separator next to it
 * are dropped; characters a channel name may not hold (spaces, for instance) become "_".
 */
export const SPARKPLUG_NAMESPACE = 'spBv1.0';
export const SPARKPLUG_DEFAULT_CHANNEL = '{node}.{device}.{metric}';
/** A rebirth request is repeated at most this often while the node stays without a birth. */
export const REBIRTH_REPEAT_MS = 10_000;

export interface SparkplugCounters {
  births: number;
  deviceBirths: number;
  deaths: number;
  deviceDeaths: number;
  /** NDEATHs whose bdSeq did not match the node's birth (ignored). */
  staleDeaths: number;
  sequenceGaps: number;
  /** Messages lost, by the sequence numbers. */
  missedMessages: number;
  unknownAliases: number;
  /** Times a node came to need a rebirth. */
  needsRebirth: number;
  rebirthRequests: number;
  /** NCMD, DCMD and STATE messages seen (not measurements). */
  commands: number;
}

const NUMBER_TYPES = new Set<number>([1, 2, 3, 4, 5, 6, 7, 8, 9, 10]);
const CHANNEL_CHARS = /[^\p{L}\p{N}_.:\-/]/gu;
const CHANNEL_PATTERN = /^[\p{L}\p{N}_.:\-/]{1,128}$/u;

interface LongLike {
  low: number;
  high: number;
  unsigned: boolean;
  toNumber(): number;
}
type PbMessage = Record<string, unknown>;

const has = (object: PbMessage, key: string) => Object.prototype.hasOwnProperty.call(object, key) && object[key] !== null && object[key] !== undefined;

/** A uint64 field (a Long, or a number) as a number; signed: two's complement. */
function longNumber(value: unknown, signed = false): number {
  if (typeof value === 'number') return value;
  if (typeof value === 'bigint') return Number(signed ? BigInt.asIntN(64, value) : value);
  const long = value as LongLike;
  return (signed ? long.high | 0 : long.high >>> 0) * 4294967296 + (long.low >>> 0);
}

export class SparkplugDecoder {
  readonly counters: SparkplugCounters = { births: 0, deviceBirths: 0, deaths: 0, deviceDeaths: 0, staleDeaths: 0, sequenceGaps: 0, missedMessages: 0, unknownAliases: 0, needsRebirth: 0, rebirthRequests: 0, commands: 0 };
  private readonly nodes = new Map<string, EdgeNodeState>();
  /** Nodes a message reached since the last saveChanges, and the tables version each had when last saved. */
  private readonly touched = new Set<EdgeNodeState>();
  private readonly savedTables = new WeakMap<EdgeNodeState, number>();
  private countersChanged = false;

  /**
   * What changed since the last call, as state entries (key suffix, JSON body): each node a message
   * reached (its sequence state, and its tables when a birth or death changed them) and the
   * counters. The daemon commits them with the samples of the same messages, so a restart continues
   * where the last commit left: aliases known, the next seq expected, a rebirth still needed.
   */
  saveChanges(put: (key: string, body: string) => void): void {
    for (const node of this.touched) {
      const key = `${node.group}/${node.node}`;
      put(`node/${key}`, JSON.stringify(node.seqState()));
      if (this.savedTables.get(node) !== node.tablesVersion) {
        put(`tables/${key}`, JSON.stringify(node.tablesState()));
        this.savedTables.set(node, node.tablesVersion);
      }
    }
    this.touched.clear();
    if (this.countersChanged) put('counters', JSON.stringify(this.counters));
    this.countersChanged = false;
  }

  /**
   * The saved entries (key suffixes as saveChanges wrote them). A node whose records cannot be read
   * is left out and named in the returned problems: it needs a rebirth like a node never seen.
   */
  restore(entries: readonly { key: string; body: string }[]): string[] {
    const problems: string[] = [];
    const tables = new Map<string, string>();
    for (const entry of entries) if (entry.key.startsWith('tables/')) tables.set(entry.key.slice('tables/'.length), entry.body);
    for (const entry of entries) {
      try {
        if (entry.key === 'counters') {
          const saved = JSON.parse(entry.body) as Partial<SparkplugCounters>;
          for (const name of Object.keys(this.counters) as (keyof SparkplugCounters)[]) if (typeof saved[name] === 'number') this.counters[name] = saved[name] as number;
        } else if (entry.key.startsWith('node/')) {
          const key = entry.key.slice('node/'.length);
          const seq = JSON.parse(entry.body);
          const node = new EdgeNodeState(String(seq.group), String(seq.node));
          const table = tables.get(key);
          node.load(seq, table === undefined ? null : JSON.parse(table));
          this.nodes.set(key, node);
          this.savedTables.set(node, node.tablesVersion);
        }
      } catch (error) {
        problems.push(`${entry.key}: ${(error as Error).message}`);
      }
    }
    return problems;
  }

  /** The edge nodes seen, for queries and tests. */
  node(group: string, node: string): EdgeNodeState | undefined {
    return this.nodes.get(`${group}/${node}`);
  }

  nodesNeedingRebirth(): string[] {
    return [...this.nodes.values()].filter((n) => n.needsRebirth).map((n) => `${n.group}/${n.node}`);
  }

  decode(topic: string, payload: Uint8Array, spec: DecoderSpec, arrivalMs: number): DecodeResult {
    this.countersChanged = true;
    const effects: DecodeEffects = { publish: [], stale: [], sequenceGaps: [] };
    const out: DecodeResult = { samples: [], rejections: [], effects };
    const where = clip(topic);
    const reject = (reason: RejectReason, detail: string) => void out.rejections.push({ reason, detail: `topic ${where}: ${detail}` });
    if (payload.byteLength > spec.maxBytes) return reject('too-large', `${payload.byteLength} bytes, more than the ${spec.maxBytes} allowed`), out;
    const levels = topic.split('/');
    if (levels[0] !== SPARKPLUG_NAMESPACE || levels.length < 3) return reject('unknown-topic', `not a Sparkplug B topic (${SPARKPLUG_NAMESPACE}/<group>/<message type>/<edge node>[/<device>])`), out;
    const type = levels[2] as string;
    if (type === 'NCMD' || type === 'DCMD' || levels[1] === 'STATE' || type === 'STATE') {
      this.counters.commands++;
      return out;
    }
    const group = levels[1] as string;
    const nodeId = levels[3];
    const device = levels[4] ?? null;
    const deviceTypes = type === 'DBIRTH' || type === 'DDATA' || type === 'DDEATH';
    const nodeTypes = type === 'NBIRTH' || type === 'NDATA' || type === 'NDEATH';
    if (!deviceTypes && !nodeTypes) return reject('unknown-topic', `"${clip(type, 20)}" is not a Sparkplug B message type`), out;
    if (nodeId === undefined || nodeId === '' || group === '' || levels.length > 5 || (deviceTypes && (device === null || device === '')) || (nodeTypes && device !== null)) {
      return reject('unknown-topic', `a ${type} topic needs ${SPARKPLUG_NAMESPACE}/<group>/${type}/<edge node>${deviceTypes ? '/<device>' : ''}`), out;
    }
    let message: PbMessage;
    try {
      message = SparkplugPayload.decode(payload) as unknown as PbMessage;
    } catch (error) {
      return reject('unparseable', `not a Sparkplug B payload (${clip((error as Error).message, 60)})`), out;
    }
    const metrics = (has(message, 'metrics') ? message.metrics : []) as PbMessage[];
    if (metrics.length > spec.maxSamples) return reject('too-many-samples', `${metrics.length} metrics in one payload, more than the ${spec.maxSamples} allowed`), out;
    const seq = has(message, 'seq') ? longNumber(message.seq) : null;
    const payloadTime = has(message, 'timestamp') ? longNumber(message.timestamp) : null;
    const key = `${group}/${nodeId}`;
    let node = this.nodes.get(key);
    if (node === undefined) {
      node = new EdgeNodeState(group, nodeId);
      this.nodes.set(key, node);
    }
    this.touched.add(node);

    if (type === 'NDEATH') {
      const bdSeq = bdSeqOf(metrics);
      if (!node.born || bdSeq === null || bdSeq !== node.bdSeq) {
        this.counters.staleDeaths++;
        return reject('stale-death', `NDEATH of ${key} with bdSeq ${bdSeq ?? 'none'} does not match the birth's (${node.born ? node.bdSeq ?? 'none' : 'no birth'}): ignored`), out;
      }
      this.counters.deaths++;
      effects.stale.push({ channels: node.channels(), cause: `NDEATH of edge node ${key}` });
      node.born = false;
      return out;
    }

    if (type === 'NBIRTH') {
      if (seq === null || seq > 255) return reject('bad-sequence', `NBIRTH of ${key} without a seq of 0 to 255`), out;
      this.counters.births++;
      node.birth(bdSeqOf(metrics), seq);
    } else {
      if (!node.born) {
        this.needsRebirth(node, `${type} before any NBIRTH`, spec, arrivalMs, effects);
        this.counters.unknownAliases += metrics.length;
        return reject('unknown-alias', `${type} of ${key}${device === null ? '' : `/${device}`} before the node's birth: its ${metrics.length} metrics cannot be named`), out;
      }
      if (seq === null || seq > 255) {
        this.needsRebirth(node, `${type} without a seq`, spec, arrivalMs, effects);
        reject('bad-sequence', `${type} of ${key} without a seq of 0 to 255`);
      } else {
        const missing = node.advance(seq);
        if (missing > 0) {
          this.counters.sequenceGaps++;
          this.counters.missedMessages += missing;
          effects.sequenceGaps.push({ node: key, missing, channels: node.channels(), timeMs: payloadTime ?? arrivalMs });
          this.needsRebirth(node, `seq ${seq} after ${(seq - missing - 1 + 256) & 0xff}: ${missing} messages lost`, spec, arrivalMs, effects);
        }
      }
      if (type === 'DBIRTH') {
        this.counters.deviceBirths++;
        node.deviceBirth(device as string);
      } else if (type === 'DDEATH') {
        this.counters.deviceDeaths++;
        effects.stale.push({ channels: node.channels(device as string), cause: `DDEATH of device ${key}/${device}` });
        node.deviceDeath(device as string);
        return out;
      }
    }

    const birth = type === 'NBIRTH' || type === 'DBIRTH';
    const template = spec.channel;
    let unknown = 0;
    for (let i = 0; i < metrics.length; i++) {
      const metric = metrics[i] as PbMessage;
      const name = has(metric, 'name') ? String(metric.name) : null;
      const alias = has(metric, 'alias') ? longNumber(metric.alias) : null;
      const label = name !== null ? `metric "${clip(name, 60)}"` : alias !== null ? `metric alias ${alias}` : `metric ${i}`;
      let info: MetricInfo | undefined;
      if (birth) {
        if (name === null) {
          reject('missing-field', `${type} of ${key}: ${label} has no name`);
          continue;
        }
        if (name === 'bdSeq' || name.startsWith('Node Control/') || name.startsWith('Device Control/')) continue;
        const announced = has(metric, 'datatype') ? Number(metric.datatype) : 0;
        info = { name, device, datatype: announced, channel: sparkplugChannel(template, group, nodeId, device, name), numeric: announced === 0 || NUMBER_TYPES.has(announced) };
        node.learn(info, alias);
      } else {
        if (name !== null && (name === 'bdSeq' || name.startsWith('Node Control/') || name.startsWith('Device Control/'))) continue;
        info = node.lookup(device, name, alias);
        if (info === undefined) {
          unknown++;
          reject('unknown-alias', `${type} of ${key}${device === null ? '' : `/${device}`}: ${label} was not announced in a birth`);
          continue;
        }
      }
      const datatype = has(metric, 'datatype') ? Number(metric.datatype) : info.datatype;
      if (has(metric, 'is_null') && metric.is_null === true) {
        reject('missing-field', `${type} of ${key}: ${label} is null`);
        continue;
      }
      const value = metricValue(metric, datatype);
      if (typeof value === 'string') {
        reject('wrong-type', `${type} of ${key}: ${label} ${value}`);
        continue;
      }
      if (value === null) continue; // a birth may announce a metric without a value
      if (!(Math.abs(value) <= MAX_MAGNITUDE)) {
        reject(Number.isNaN(value) ? 'nan' : Number.isFinite(value) ? 'out-of-range' : 'infinite', `${type} of ${key}: ${label} is ${value}, not a measurement`);
        continue;
      }
      if (info.channel === null) {
        reject('bad-channel', `${type} of ${key}: ${label} gives no valid channel name through "${template}"`);
        continue;
      }
      const metricTime = has(metric, 'timestamp') ? longNumber(metric.timestamp) : null;
      const time = metricTime ?? payloadTime;
      if (time !== null && !(time >= 0 && time < MAX_TIME_MS)) {
        reject('bad-time', `${type} of ${key}: ${label} has timestamp ${time}, not a time in ms since 1970`);
        continue;
      }
      const sample: Sample = { channel: info.channel, timeMs: time ?? arrivalMs, value, stamped: time !== null };
      if (spec.unit !== null) sample.unit = spec.unit;
      out.samples.push(sample);
    }
    if (unknown > 0) {
      this.counters.unknownAliases += unknown;
      this.needsRebirth(node, `${unknown} metrics never announced in a birth`, spec, arrivalMs, effects);
    }
    return out;
  }

  private needsRebirth(node: EdgeNodeState, cause: string, spec: DecoderSpec, arrivalMs: number, effects: DecodeEffects): void {
    if (node.markNeedsRebirth(cause)) this.counters.needsRebirth++;
    if (!spec.sparkplug.requestRebirth) return;
    if (!Number.isNaN(node.rebirthRequestedAt) && arrivalMs - node.rebirthRequestedAt < REBIRTH_REPEAT_MS) return;
    node.rebirthRequestedAt = arrivalMs;
    this.counters.rebirthRequests++;
    effects.publish.push({ topic: rebirthTopic(node.group, node.node), payload: rebirthRequest(arrivalMs) });
  }
}

/** The NCMD topic of an edge node. */
export function rebirthTopic(group: string, node: string): string {
  return `${SPARKPLUG_NAMESPACE}/${group}/NCMD/${node}`;
}

/** An NCMD payload asking for a rebirth: metric "Node Control/Rebirth", Boolean, true. */
export function rebirthRequest(timeMs: number): Uint8Array {
  return SparkplugPayload.encode(SparkplugPayload.fromObject({ timestamp: timeMs, metrics: [{ name: REBIRTH_METRIC, timestamp: timeMs, datatype: SPARKPLUG_TYPES.Boolean, boolean_value: true }] })).finish();
}

function bdSeqOf(metrics: PbMessage[]): number | null {
  for (const metric of metrics) {
    if (has(metric, 'name') && metric.name === 'bdSeq') {
      if (has(metric, 'long_value')) return longNumber(metric.long_value);
      if (has(metric, 'int_value')) return Number(metric.int_value) >>> 0;
      return null;
    }
  }
  return null;
}

/** The metric's value as a number, null when it carries none, or the text of why it is not a number. */
function metricValue(metric: PbMessage, datatype: number): number | null | string {
  if (datatype !== 0 && !NUMBER_TYPES.has(datatype)) return `is a ${SPARKPLUG_TYPE_NAMES[datatype] ?? `type ${datatype}`}, not a number`;
  if (has(metric, 'double_value')) return metric.double_value as number;
  if (has(metric, 'float_value')) return metric.float_value as number;
  if (has(metric, 'int_value')) {
    const raw = metric.int_value as number;
    // Int8, Int16 and Int32 travel as uint32 in two's complement.
    if (datatype === SPARKPLUG_TYPES.Int8) return (raw << 24) >> 24;
    if (datatype === SPARKPLUG_TYPES.Int16) return (raw << 16) >> 16;
    if (datatype === SPARKPLUG_TYPES.Int32) return raw | 0;
    return raw >>> 0;
  }
  if (has(metric, 'long_value')) return longNumber(metric.long_value, datatype === SPARKPLUG_TYPES.Int64);
  if (has(metric, 'boolean_value')) return 'is a Boolean, not a number';
  if (has(metric, 'string_value')) return 'is a String, not a number';
  if (has(metric, 'bytes_value') || has(metric, 'dataset_value') || has(metric, 'template_value') || has(metric, 'extension_value')) return 'is not a number';
  return null;
}

/** A channel name from the template, or null when it gives no valid name. */
export function sparkplugChannel(template: string, group: string, node: string, device: string | null, metric: string): string | null {
  const clean = (text: string) => text.replace(CHANNEL_CHARS, '_');
  let name = template.replace(/\{(group|node|device|metric)\}/g, (_m, key: string) => {
    if (key === 'group') return clean(group);
    if (key === 'node') return clean(node);
    if (key === 'metric') return clean(metric);
    return device === null ? '\u0000' : clean(device);
  });
  if (name.startsWith('\u0000')) name = name.replace(/^\u0000[./:_-]?/, '');
  name = name.replace(/[./:_-]?\u0000/g, '');
  return CHANNEL_PATTERN.test(name) ? name : null;
}

function clip(text: string, length = 80): string {
  const clean = text.replace(/[\u0000-\u001f\u007f]/g, '?');
  return clean.length > length ? `${clean.slice(0, length)}...` : clean;
}
