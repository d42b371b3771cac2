import { readFileSync } from 'node:fs';
import { parse as parseYaml } from 'yaml';
import { ConfigError, ConfigReader, describe, join, type Plain } from './config-reader.js';
import type { ChannelGroup, ChannelSettings, DerivedConfig, PlateauConfig, SubscriptionConfig } from './plateau-config.js';
import { DECODER_DEFAULTS, DECODER_FORMATS } from './decoder-spec.js';
import { checkDerivedDefinitions } from './derived-check.js';
import { ESTIMATOR_NAMES } from '../core/tau/tau-estimate.js';
import type { TargetSpec } from '../core/uncertainty/target-precision.js';
import { DEFAULT_CHANNEL_OPTIONS, DEFAULT_MAX_SAMPLES, type ChannelOptions, type WindowSpec } from '../engine/channel-options.js';
import { readCriteria } from './criteria-config.js';
import { isNatsUrl, readScale } from './scale-config.js';
import { readConformity, readDerivedConstants, readTypeBComponents } from './uncertainty-config.js';

export { ConfigError };

export const CHANNEL_DEFAULTS: ChannelSettings = {
  window: { kind: 'growing', maxSamples: DEFAULT_MAX_SAMPLES },
  maxLag: DEFAULT_CHANNEL_OPTIONS.maxLag,
  estimator: DEFAULT_CHANNEL_OPTIONS.estimator,
  warmup: { mode: 'auto' },
  confidence: 0.95,
  target: null,
  falseAlarmSamples: 1_000_000, // mean samples between false alarms
  staleSeconds: 30,
  rate: null,
  range: null,
  unit: null,
  criteria: null,
  typeB: [],
  conformity: null,
  combinedTarget: null,
  dominanceFraction: null,
  proposeResolution: true,
};

/**
 * Reads and validates a YAML (or JSON) configuration file. Throws ConfigError with one line per problem.
 * `requireSubscriptions: false` (plateau analyze, which reads a file and needs only the channel
 * settings) accepts a file without subscriptions.
 */
export function loadConfigFile(path: string, options: { requireSubscriptions?: boolean } = {}): PlateauConfig {
  let text: string;
  try {
    text = readFileSync(path, 'utf8');
  } catch (error) {
    throw new ConfigError([`${path}: cannot read the file (${(error as NodeJS.ErrnoException).code ?? 'error'})`]);
  }
  let document: unknown;
  try {
    document = parseYaml(text, { maxAliasCount: 100 });
  } catch (error) {
    const message = (error as Error).message.split('\n')[0];
    throw new ConfigError([`${path}: not valid YAML: ${message}`]);
  }
  try {
    return parseConfig(document, path, options);
  } catch (error) {
    if (error instanceof ConfigError) throw new ConfigError(error.problems.map((line) => `${path}: ${line}`));
    throw error;
  }
}

/** Validates a parsed configuration document and fills in defaults. */
export function parseConfig(document: unknown, source = 'config', options: { requireSubscriptions?: boolean } = {}): PlateauConfig {
  const r = new ConfigReader();
  const root = r.section(document ?? {}, '', ['rig', 'broker', 'subscriptions', 'channels', 'derived', 'store', 'http', 'topics', 'log', 'scale']);
  // The rig a record names (its identification on every record and report).
  const rigSection = r.section(root.rig, 'rig', ['id', 'name']);
  const rig = { id: r.string(rigSection, 'id', 'rig', null), name: r.string(rigSection, 'name', 'rig', null) };
  if (rig.id !== null && !/^[\p{L}\p{N}_.:\-/ ]{1,64}$/u.test(rig.id)) r.problem('rig.id', `expected 1 to 64 letters, digits, spaces or _ . : - /, got "${rig.id.slice(0, 80)}"`);
  if (rig.name !== null && rig.name.length > 200) r.problem('rig.name', `expected at most 200 characters, got ${rig.name.length}`);
  const brokerSection = r.section(root.broker, 'broker', ['url', 'clientId', 'username', 'password', 'tls', 'protocolVersion', 'qos', 'sessionExpirySeconds', 'keepaliveSeconds', 'reconnectPeriodMs']);
  // A list of URLs is a NATS cluster (JetStream ingest, see scale-config.ts); one nats:// URL too.
  const urlList = Array.isArray(brokerSection.url) ? (brokerSection.url as unknown[]) : null;
  const nats = urlList !== null || (typeof brokerSection.url === 'string' && brokerSection.url.startsWith('nats://'));
  const natsUrls: string[] = [];
  if (urlList !== null) {
    if (urlList.length === 0) r.problem('broker.url', 'an empty list: give one or more NATS URLs such as nats://127.0.0.1:4222');
    urlList.forEach((item, index) => {
      if (typeof item === 'string' && isNatsUrl(item)) natsUrls.push(item);
      else r.problem(join('broker.url', index), `expected a NATS URL such as nats://127.0.0.1:4222 (a list of URLs is a NATS cluster), got ${describe(item)}`);
    });
  }
  const url = urlList !== null ? natsUrls.join(',') : r.string(brokerSection, 'url', 'broker', 'embedded');
  if (urlList === null && nats) {
    if (isNatsUrl(url)) natsUrls.push(url);
    else r.problem('broker.url', `expected a NATS URL such as nats://127.0.0.1:4222, got ${describe(url)}`);
  }
  if (!nats && url !== 'embedded' && !/^(mqtts?|wss?|tcp|tls):\/\/[^\s]+$/.test(url)) r.problem('broker.url', `expected "embedded", a URL such as mqtt://127.0.0.1:1883, or nats://host:port (JetStream), got ${describe(url)}`);

  const tlsSection = brokerSection.tls === undefined ? null : r.section(brokerSection.tls, 'broker.tls', ['caFile', 'certFile', 'keyFile', 'rejectUnauthorized']);
  const protocol = r.oneOf(brokerSection, 'protocolVersion', 'broker', [4, 5] as const, 4);
  const broker = {
    url,
    clientId: r.string(brokerSection, 'clientId', 'broker', 'plateau'),
    username: r.string(brokerSection, 'username', 'broker', null),
    password: r.string(brokerSection, 'password', 'broker', null),
    tls: tlsSection
      ? {
          caFile: r.string(tlsSection, 'caFile', 'broker.tls', null),
          certFile: r.string(tlsSection, 'certFile', 'broker.tls', null),
          keyFile: r.string(tlsSection, 'keyFile', 'broker.tls', null),
          rejectUnauthorized: r.boolean(tlsSection, 'rejectUnauthorized', 'broker.tls', true),
        }
      : null,
    protocolVersion: protocol,
    qos: r.oneOf(brokerSection, 'qos', 'broker', [0, 1] as const, 1),
    sessionExpirySeconds: r.number(brokerSection, 'sessionExpirySeconds', 'broker', { min: 0, max: 4294967295, integer: true }, 86_400),
    keepaliveSeconds: r.number(brokerSection, 'keepaliveSeconds', 'broker', { min: 1, max: 65535, integer: true }, 30),
    reconnectPeriodMs: r.number(brokerSection, 'reconnectPeriodMs', 'broker', { min: 100, max: 600_000, integer: true }, 1000),
  };

  const scale = readScale(r, root.scale, natsUrls, nats);
  if (nats && broker.tls !== null && !broker.tls.rejectUnauthorized) r.problem('broker.tls.rejectUnauthorized', 'a NATS server\'s certificate is always verified: give its CA in broker.tls.caFile instead');

  const subscriptions: SubscriptionConfig[] = [];
  const subscriptionList = r.list(root.subscriptions, 'subscriptions');
  if (subscriptionList.length === 0 && options.requireSubscriptions !== false) r.problem('subscriptions', 'missing: at least one subscription (a topic filter and how to read its payloads)');
  subscriptionList.forEach((item, index) => {
    const path = join('subscriptions', index);
    const s = r.section(item, path, ['topic', 'format', 'channel', 'valueField', 'timeField', 'timeUnit', 'samplesField', 'channelField', 'unit', 'maxBytes', 'maxDepth', 'maxSamples', 'sparkplug']);
    if (!r.require(s, 'topic', path, 'the MQTT topic filter to subscribe to')) return;
    const topic = r.string(s, 'topic', path, '');
    if (topic && !validTopicFilter(topic)) r.problem(join(path, 'topic'), `"${topic}" is not a valid MQTT topic filter (+ and # must fill a whole level; # only at the end)`);
    const format = r.oneOf(s, 'format', path, DECODER_FORMATS, 'json');
    const channel = r.string(s, 'channel', path, format === 'sparkplug' ? '{node}.{device}.{metric}' : format === 'senml' || format === 'senml-cbor' || format === 'binary' ? '{name}' : '{topic}');
    for (const match of channel.matchAll(/\{(\w+)\}/g)) {
      const key = match[1] as string;
      if (format === 'sparkplug') {
        if (!['group', 'node', 'device', 'metric'].includes(key)) r.problem(join(path, 'channel'), `unknown placeholder {${key}} (a Sparkplug B channel template takes {group}, {node}, {device} and {metric})`);
      } else if (!['topic', 'name', 'field'].includes(key) && !/^[1-9]\d?$/.test(key)) r.problem(join(path, 'channel'), `unknown placeholder {${key}} (expected {topic}, {name}, {field} or a topic level such as {2})`);
    }
    if (format === 'sparkplug' && !channel.includes('{metric}')) r.problem(join(path, 'channel'), 'a Sparkplug B channel template needs {metric}');
    const sparkplugSection = r.section(s.sparkplug, join(path, 'sparkplug'), ['requestRebirth']);
    if (s.sparkplug !== undefined && format !== 'sparkplug') r.problem(join(path, 'sparkplug'), 'only for format: sparkplug');
    const timeField = s.timeField === false ? null : r.string(s, 'timeField', path, DECODER_DEFAULTS.timeField as string);
    subscriptions.push({
      topic,
      format,
      channel,
      valueField: r.string(s, 'valueField', path, DECODER_DEFAULTS.valueField),
      timeField,
      timeUnit: r.oneOf(s, 'timeUnit', path, ['s', 'ms'] as const, 's'),
      samplesField: r.string(s, 'samplesField', path, null),
      channelField: r.string(s, 'channelField', path, null),
      unit: r.string(s, 'unit', path, null),
      maxBytes: r.number(s, 'maxBytes', path, { min: 16, max: 64 * 1024 * 1024, integer: true }, DECODER_DEFAULTS.maxBytes),
      maxDepth: r.number(s, 'maxDepth', path, { min: 1, max: 64, integer: true }, DECODER_DEFAULTS.maxDepth),
      maxSamples: r.number(s, 'maxSamples', path, { min: 1, max: 1_000_000, integer: true }, DECODER_DEFAULTS.maxSamples),
      sparkplug: { requestRebirth: r.boolean(sparkplugSection, 'requestRebirth', join(path, 'sparkplug'), DECODER_DEFAULTS.sparkplug.requestRebirth) },
    });
  });

  const channelsSection = r.section(root.channels, 'channels', ['defaults', 'groups']);
  const defaults = { ...CHANNEL_DEFAULTS, ...readChannelSettings(r, channelsSection.defaults, 'channels.defaults') };
  const groups: ChannelGroup[] = r.list(channelsSection.groups, 'channels.groups').map((item, index) => {
    const path = join('channels.groups', index);
    const plain = r.section(item, path, ['match', ...SETTING_KEYS]);
    r.require(plain, 'match', path, 'a channel-name pattern such as "hx1.*"');
    const match = r.string(plain, 'match', path, '*');
    const { match: _ignored, ...rest } = plain;
    return { match, settings: readChannelSettings(r, rest, path) };
  });

  const derived: DerivedConfig[] = r.list(root.derived, 'derived').map((item, index) => {
    const path = join('derived', index);
    const d = r.section(item, path, ['name', 'unit', 'expression', 'target', 'confidence', 'conformity', 'combinedTarget', 'constants']);
    r.require(d, 'name', path, 'the derived result\'s name');
    r.require(d, 'expression', path, 'an expression over channel names, such as "flow * 4.18 * (outlet - inlet)"');
    return {
      name: r.string(d, 'name', path, `derived${index}`),
      unit: r.string(d, 'unit', path, null),
      expression: r.string(d, 'expression', path, '0'),
      target: readTarget(r, d.target, join(path, 'target')),
      confidence: r.number(d, 'confidence', path, { above: 0, below: 1 }, defaults.confidence),
      conformity: readConformity(d.conformity, join(path, 'conformity'), r),
      combinedTarget: readTarget(r, d.combinedTarget, join(path, 'combinedTarget')),
      constants: readDerivedConstants(d.constants, join(path, 'constants'), r),
      keyPath: join(path, 'expression'),
    };
  });
  const names = new Set<string>();
  derived.forEach((d, index) => {
    if (names.has(d.name)) r.problem(join(join('derived', index), 'name'), `"${d.name}" is used twice`);
    names.add(d.name);
  });

  const storeSection = r.section(root.store, 'store', ['path', 'retentionSeconds', 'flushIntervalMs', 'checkpointSamples']);
  const store = {
    path: r.string(storeSection, 'path', 'store', 'plateau.sqlite'),
    retentionSeconds: r.number(storeSection, 'retentionSeconds', 'store', { min: 60, integer: true }, 7 * 86_400),
    flushIntervalMs: r.number(storeSection, 'flushIntervalMs', 'store', { min: 1, max: 5000, integer: true }, 20),
    checkpointSamples: r.number(storeSection, 'checkpointSamples', 'store', { min: 100, integer: true }, 100_000),
  };
  // The partitions' shared checkpoints follow the same schedule as the local ones.
  if (scale) scale.checkpointSamples = store.checkpointSamples;
  const httpSection = r.section(root.http, 'http', ['listen', 'token', 'maxBodyBytes']);
  const listen = r.string(httpSection, 'listen', 'http', '127.0.0.1:8080');
  const listenMatch = /^(.*):(\d{1,5})$/.exec(listen);
  let host = '127.0.0.1';
  let port = 8080;
  if (!listenMatch || Number(listenMatch[2]) > 65535) r.problem('http.listen', `expected host:port such as 127.0.0.1:8080, got ${describe(listen)}`);
  else {
    host = (listenMatch[1] as string).replace(/^\[|\]$/g, '');
    port = Number(listenMatch[2]);
  }
  const token = r.string(httpSection, 'token', 'http', null);
  if (token !== null && token.length < 16) r.problem('http.token', 'expected at least 16 characters (it guards every write when the server listens beyond loopback)');
  const http = { host, port, token, maxBodyBytes: r.number(httpSection, 'maxBodyBytes', 'http', { min: 1024, max: 16 * 1024 * 1024, integer: true }, 65_536) };
  if (!isLoopback(host) && token === null) r.problem('http.token', `required when http.listen is beyond loopback (${host}): every write must carry it`);

  const topicsSection = r.section(root.topics, 'topics', ['events', 'status', 'command']);
  const topics = {
    events: r.string(topicsSection, 'events', 'topics', 'plateau/events'),
    status: r.string(topicsSection, 'status', 'topics', 'plateau/status'),
    command: r.string(topicsSection, 'command', 'topics', 'plateau/command'),
  };
  for (const [key, value] of Object.entries(topics)) if (/[+#]/.test(value)) r.problem(`topics.${key}`, `"${value}" must be a plain topic, without + or #`);
  const logSection = r.section(root.log, 'log', ['level']);
  const log = { level: r.oneOf(logSection, 'level', 'log', ['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent'] as const, 'info') };
  if (derived.length > 0 && options.requireSubscriptions !== false && r.problems.every((line) => !line.startsWith('derived') && !line.startsWith('subscriptions'))) {
    // The expressions against the channels the subscriptions can produce: every problem listed
    // with the others, before the daemon opens anything (the daemon compiles them the same way).
    const definitions = derived.map((d) => ({ name: d.name, expression: d.expression, ...(d.unit !== null ? { unit: d.unit } : {}) }));
    const partial = { channels: { defaults, groups } } as PlateauConfig;
    const checked = checkDerivedDefinitions(definitions, subscriptions.map((s) => s.channel), (name) => settingsFor(partial, name).range, globMatch, derived.map((d) => d.constants));
    if (!checked.ok) for (const line of checked.problems) r.problems.push(line);
  }
  r.throwIfProblems();
  return { source, rig, broker, subscriptions, channels: { defaults, groups }, derived, store, http, topics, log, ...(scale !== null ? { scale } : {}) };
}

const SETTING_KEYS = ['window', 'maxLag', 'estimator', 'warmup', 'confidence', 'target', 'falseAlarmSamples', 'staleSeconds', 'rate', 'range', 'unit', 'criteria', 'typeB', 'conformity', 'combinedTarget', 'dominanceFraction', 'proposeResolution'];

function readChannelSettings(r: ConfigReader, value: unknown, path: string): Partial<ChannelSettings> {
  const s = r.section(value, path, SETTING_KEYS);
  const out: Partial<ChannelSettings> = {};
  if (s.window !== undefined) {
    const w = r.section(s.window, join(path, 'window'), ['kind', 'samples', 'seconds', 'maxSamples']);
    const wp = join(path, 'window');
    const kind = r.oneOf(w, 'kind', wp, ['growing', 'sliding'] as const, 'growing');
    const samples = r.number(w, 'samples', wp, { min: 4, max: 1 << 26, integer: true }, null);
    const seconds = r.number(w, 'seconds', wp, { above: 0 }, null);
    const maxSamples = r.number(w, 'maxSamples', wp, { min: 4, max: 1 << 26, integer: true }, samples ?? DEFAULT_MAX_SAMPLES);
    if (kind === 'sliding' && samples === null && seconds === null) r.problem(wp, 'a sliding window needs samples or seconds');
    if (kind === 'growing' && (samples !== null || seconds !== null)) r.problem(wp, 'samples and seconds apply to sliding windows; a growing window runs from the test point start');
    const window: WindowSpec = { kind, maxSamples };
    if (samples !== null) window.samples = samples;
    if (seconds !== null) window.seconds = seconds;
    out.window = window;
  }
  if (s.maxLag !== undefined) out.maxLag = r.number(s, 'maxLag', path, { min: 1, max: 4096, integer: true }, CHANNEL_DEFAULTS.maxLag);
  if (s.estimator !== undefined) out.estimator = r.oneOf(s, 'estimator', path, ESTIMATOR_NAMES, CHANNEL_DEFAULTS.estimator);
  if (s.warmup !== undefined) {
    const w = s.warmup;
    if (w === 'auto' || w === 'none') out.warmup = { mode: w };
    else if (typeof w === 'number' && Number.isInteger(w) && w >= 0) out.warmup = { mode: 'fixed', samples: w };
    else r.problem(join(path, 'warmup'), `expected auto, none or a whole number of samples, got ${describe(w)}`);
  }
  if (s.confidence !== undefined) out.confidence = r.number(s, 'confidence', path, { above: 0, below: 1 }, 0.95);
  if (s.target !== undefined) out.target = readTarget(r, s.target, join(path, 'target'));
  if (s.falseAlarmSamples !== undefined) out.falseAlarmSamples = r.number(s, 'falseAlarmSamples', path, { min: 100, integer: true }, CHANNEL_DEFAULTS.falseAlarmSamples);
  if (s.staleSeconds !== undefined) out.staleSeconds = r.number(s, 'staleSeconds', path, { above: 0 }, CHANNEL_DEFAULTS.staleSeconds);
  if (s.rate !== undefined) out.rate = r.number(s, 'rate', path, { above: 0 }, null);
  if (s.unit !== undefined) out.unit = r.string(s, 'unit', path, null);
  // Stability rules (criteria-config.ts): a group's criteria replace those of the defaults.
  if (s.criteria !== undefined) out.criteria = readCriteria(r, s.criteria, join(path, 'criteria'));
  if (s.range !== undefined) {
    const range = s.range;
    if (!Array.isArray(range) || range.length !== 2 || !range.every((v) => typeof v === 'number' && Number.isFinite(v)) || (range[0] as number) >= (range[1] as number)) {
      r.problem(join(path, 'range'), `expected [low, high] with low < high, got ${describe(range)}`);
    } else out.range = [range[0] as number, range[1] as number];
  }
  // issue 10: Type B components, limits with the decision rule, the combined target, the stopping rule
  if (s.typeB !== undefined) out.typeB = readTypeBComponents(s.typeB, join(path, 'typeB'), r);
  if (s.conformity !== undefined) out.conformity = readConformity(s.conformity, join(path, 'conformity'), r);
  if (s.combinedTarget !== undefined) out.combinedTarget = readTarget(r, s.combinedTarget, join(path, 'combinedTarget'));
  if (s.dominanceFraction !== undefined) out.dominanceFraction = r.number(s, 'dominanceFraction', path, { above: 0, below: 1 }, null);
  if (s.proposeResolution !== undefined) out.proposeResolution = r.boolean(s, 'proposeResolution', path, true);
  return out;
}

function readTarget(r: ConfigReader, value: unknown, path: string): TargetSpec | null {
  if (value === undefined || value === null) return null;
  const t = r.section(value, path, ['U', 'u', 'relativeU', 'relativeu']);
  const given = Object.keys(t).filter((k) => ['U', 'u', 'relativeU', 'relativeu'].includes(k));
  if (given.length !== 1) {
    r.problem(path, 'expected exactly one of U, u (bounds in the channel unit), relativeU, relativeu (fractions of |mean|)');
    return null;
  }
  const key = given[0] as string;
  const bound = r.number(t, key, path, { above: 0 }, null);
  if (bound === null) return null;
  return { value: bound, relative: key.startsWith('relative'), on: key.endsWith('U') ? 'U' : 'u' };
}

function validTopicFilter(topic: string): boolean {
  if (topic.length === 0 || topic.length > 65535 || topic.includes('\u0000')) return false;
  const levels = topic.split('/');
  return levels.every((level, i) => (level.includes('+') ? level === '+' : true) && (level.includes('#') ? level === '#' && i === levels.length - 1 : true));
}

function isLoopback(host: string): boolean {
  return host === '127.0.0.1' || host === '::1' || host === 'localhost' || /^127\./.test(host);
}

/** A channel's engine options from its settings (the daemon and `plateau analyze --config` share it). */
export function channelOptionsFromSettings(s: ChannelSettings): ChannelOptions {
  return {
    window: s.window,
    maxLag: s.maxLag,
    estimator: s.estimator,
    warmup: s.warmup,
    confidence: s.confidence,
    target: s.target,
    rate: s.rate,
    falseAlarmSamples: s.falseAlarmSamples,
    staleSeconds: s.staleSeconds,
    uncertainty: { typeB: s.typeB, conformity: s.conformity, combinedTarget: s.combinedTarget, dominanceFraction: s.dominanceFraction, proposeResolution: s.proposeResolution },
    criteria: s.criteria,
  };
}

/** Settings for one channel: the defaults, then every matching group in order. */
export function settingsFor(config: PlateauConfig, channel: string): ChannelSettings {
  let settings = config.channels.defaults;
  for (const group of config.channels.groups) {
    if (globMatch(group.match, channel)) settings = { ...settings, ...group.settings };
  }
  return settings;
}

/** Glob match without regular expressions (no backtracking blow-up): * any run, ? one character. */
export function globMatch(pattern: string, text: string): boolean {
  let p = 0;
  let t = 0;
  let star = -1;
  let mark = 0;
  while (t < text.length) {
    if (p < pattern.length && (pattern[p] === '?' || pattern[p] === text[t])) {
      p++;
      t++;
    } else if (p < pattern.length && pattern[p] === '*') {
      star = p++;
      mark = t;
    } else if (star >= 0) {
      p = star + 1;
      t = ++mark;
    } else return false;
  }
  while (p < pattern.length && pattern[p] === '*') p++;
  return p === pattern.length;
}

export type { Plain };
