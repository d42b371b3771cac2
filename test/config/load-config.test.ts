import { describe, expect, it } from 'vitest';
import { parseConfig, loadConfigFile, ConfigError, globMatch, settingsFor } from '../../src/config/load-config.js';
import { tempFile } from '../helpers/cli.js';
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { ROOT } from '../helpers/reference.js';

// Every bad configuration gets one line per problem, naming the key path and what was expected.

function problems(document: unknown): string[] {
  try {
    parseConfig(document);
  } catch (error) {
    expect(error).toBeInstanceOf(ConfigError);
    expect((error as ConfigError).code).toBe('ERR_CONFIG');
    return (error as ConfigError).problems;
  }
  throw new Error('expected a ConfigError');
}

const subscriptions = [{ topic: 'rig/+', format: 'json' }];

describe('configuration validation', () => {
  it('the example configurations load', () => {
    for (const file of readdirSync(join(ROOT, 'config')).filter((f) => f.endsWith('.yaml'))) {
      expect(() => loadConfigFile(join(ROOT, 'config', file))).not.toThrow();
    }
  });

  it('reports every problem at once, one line each, with its key path', () => {
    const lines = problems({
      broker: { url: 'http://nowhere', qos: 2, protocolVersion: 3, keepaliveSeconds: -1 },
      subscriptions: [{ topic: 'rig/#/x', format: 'xml', maxBytes: 'big', colour: 'blue' }],
      channels: { defaults: { confidence: 1.5, window: { kind: 'sliding' }, target: { U: 0.1, u: 0.05 }, range: [5, 1] } },
      http: { listen: 'everywhere' },
      topics: { events: 'plateau/#' },
      store: { retentionSeconds: 5 },
      extra: true,
    });
    expect(lines).toEqual(
      expect.arrayContaining([
        'extra: unknown key (expected one of broker, subscriptions, channels, derived, store, http, topics, log, scale)',
        'broker.url: expected "embedded", a URL such as mqtt://127.0.0.1:1883, or nats://host:port (JetStream), got "http://nowhere"',
        'broker.protocolVersion: expected one of 4, 5, got 3',
        'broker.qos: expected one of 0, 1, got 2',
        'broker.keepaliveSeconds: expected a whole number at least 1 and at most 65535, got -1',
        'subscriptions[0].colour: unknown key (expected one of topic, format, channel, valueField, timeField, timeUnit, samplesField, channelField, unit, maxBytes, maxDepth, maxSamples, sparkplug)',
        'subscriptions[0].topic: "rig/#/x" is not a valid MQTT topic filter (+ and # must fill a whole level; # only at the end)',
        'subscriptions[0].format: expected one of number, json, senml, senml-cbor, binary, sparkplug, got "xml"',
        'subscriptions[0].maxBytes: expected a whole number at least 16 and at most 67108864, got "big"',
        'channels.defaults.window: a sliding window needs samples or seconds',
        'channels.defaults.confidence: expected a number between 0 and 1, got 1.5',
        'channels.defaults.target: expected exactly one of U, u (bounds in the channel unit), relativeU, relativeu (fractions of |mean|)',
        'channels.defaults.range: expected [low, high] with low < high, got a list',
        'store.retentionSeconds: expected a whole number at least 60, got 5',
        'http.listen: expected host:port such as 127.0.0.1:8080, got "everywhere"',
        'topics.events: "plateau/#" must be a plain topic, without + or #',
      ]),
    );
  });

  it('the payload formats of issue 13: defaults and their problems', () => {
    const ok = parseConfig({ subscriptions: [{ topic: 'a/#', format: 'senml-cbor' }, { topic: 'b/#', format: 'binary' }, { topic: 'spBv1.0/#', format: 'sparkplug', sparkplug: { requestRebirth: true } }] }, 'test');
    expect(ok.subscriptions.map((s) => [s.format, s.channel, s.sparkplug.requestRebirth])).toEqual([['senml-cbor', '{name}', false], ['binary', '{name}', false], ['sparkplug', '{node}.{device}.{metric}', true]]);
    expect(problems({ subscriptions: [{ topic: 'spBv1.0/#', format: 'sparkplug', channel: '{2}.{name}', sparkplug: { rebirth: 1 } }, { topic: 'x/#', format: 'json', sparkplug: { requestRebirth: true } }] })).toEqual([
      'subscriptions[0].channel: unknown placeholder {2} (a Sparkplug B channel template takes {group}, {node}, {device} and {metric})',
      'subscriptions[0].channel: unknown placeholder {name} (a Sparkplug B channel template takes {group}, {node}, {device} and {metric})',
      'subscriptions[0].channel: a Sparkplug B channel template needs {metric}',
      'subscriptions[0].sparkplug.rebirth: unknown key (expected one of requestRebirth)',
      'subscriptions[1].sparkplug: only for format: sparkplug',
    ]);
  });

  it('a missing subscription list and a listen address beyond loopback without a token', () => {
    expect(problems({})).toContain('subscriptions: missing: at least one subscription (a topic filter and how to read its payloads)');
    expect(problems({ subscriptions, http: { listen: '0.0.0.0:8080' } })).toContain('http.token: required when http.listen is beyond loopback (0.0.0.0): every write must carry it');
    expect(problems({ subscriptions, http: { listen: '0.0.0.0:8080', token: 'short' } })).toContain('http.token: expected at least 16 characters (it guards every write when the server listens beyond loopback)');
  });

  it('a file that is not YAML, and one that is missing, get one line naming the file', () => {
    const bad = tempFile('bad.yaml', 'broker: [unclosed\n');
    expect(() => loadConfigFile(bad)).toThrow(new RegExp(`^${bad.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}: not valid YAML`));
    expect(() => loadConfigFile('/nonexistent/plateau.yaml')).toThrow('/nonexistent/plateau.yaml: cannot read the file (ENOENT)');
  });

  it('channel settings: defaults, then every matching group in order (glob without backtracking)', () => {
    const config = parseConfig({
      subscriptions,
      channels: { defaults: { confidence: 0.95 }, groups: [{ match: 'hx7.*', confidence: 0.99 }, { match: 'hx7.*_degC', target: { U: 0.01 } }] },
    });
    expect(settingsFor(config, 'hx7.inlet_degC').confidence).toBe(0.99);
    expect(settingsFor(config, 'hx7.inlet_degC').target).toEqual({ value: 0.01, relative: false, on: 'U' });
    expect(settingsFor(config, 'cb2.ref').confidence).toBe(0.95);
    expect(globMatch('a*b?c', 'axxxbyc')).toBe(true);
    expect(globMatch(`${'*a'.repeat(20)}b`, 'a'.repeat(40))).toBe(false);
  });
});
