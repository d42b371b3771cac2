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
  it('rig: its id and name, none by default; a bad one is one line naming rig.id or rig.name', () => {
    expect(parseConfig({ subscriptions: [{ topic: 'a/#' }] }, 'test').rig).toEqual({ id: null, name: null });
    expect(parseConfig({ rig: { id: 'HX-7', name: 'bench HX-7' }, subscriptions: [{ topic: 'a/#' }] }, 'test').rig).toEqual({ id: 'HX-7', name: 'bench HX-7' });
    const lines = problems({ rig: { id: 'a"b', name: 'x'.repeat(201), colour: 1 }, subscriptions: [{ topic: 'a/#' }] });
    expect(lines).toEqual(expect.arrayContaining(['rig.colour: unknown key (expected one of id, name)', expect.stringMatching(/^rig\.id: expected 1 to 64 letters, digits, spaces or _ \. : - \/, got "a"b"$/), 'rig.name: expected at most 200 characters, got 201']));
  });

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
        'extra: unknown key (expected one of rig, broker, subscriptions, channels, derived, store, http, topics, log, scale)',
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

describe('issue 10 settings in the configuration: Type B, limits, decision rule, combined target, dominance fraction', () => {
  const certificate = { name: 'reference certificate', kind: 'certificate', expanded: 0.012, coverageFactor: 2, shared: 'ref-prt' };

  it('reads them under channels.defaults and channels.groups[] (a group replaces the list) and under derived[] with constants', () => {
    const config = parseConfig({
      subscriptions,
      channels: {
        defaults: { typeB: [certificate], dominanceFraction: 0.2, combinedTarget: { U: 0.02 } },
        groups: [{ match: 'kb4.probe*', typeB: [certificate, { name: 'display', kind: 'resolution', step: 0.01 }], conformity: { lower: 29.9, upper: 30.1, rule: 'guarded' }, proposeResolution: false }],
      },
      derived: [{ name: 'kb4.offset', expression: 'kb4.probe1 - kb4.ref + drift_corr', conformity: { upper: 0.05 }, combinedTarget: { u: 0.01 }, constants: [{ name: 'drift_corr', value: 0.001, kind: 'normal', standardUncertainty: 0.0005, dof: 12 }] }],
    });
    const ref = settingsFor(config, 'kb4.ref');
    expect(ref.typeB).toEqual([{ ...certificate }]);
    expect(ref.dominanceFraction).toBe(0.2);
    expect(ref.combinedTarget).toEqual({ value: 0.02, relative: false, on: 'U' });
    expect(ref.conformity).toBeNull();
    expect(ref.proposeResolution).toBe(true);
    const probe = settingsFor(config, 'kb4.probe1');
    expect(probe.typeB.map((c) => c.name)).toEqual(['reference certificate', 'display']);
    expect(probe.conformity).toEqual({ limits: { lower: 29.9, upper: 30.1 }, rule: { kind: 'guarded', guardFactor: 1 } });
    expect(probe.proposeResolution).toBe(false);
    const d = config.derived[0];
    expect(d?.conformity).toEqual({ limits: { lower: null, upper: 0.05 }, rule: { kind: 'simple' } });
    expect(d?.combinedTarget).toEqual({ value: 0.01, relative: false, on: 'u' });
    expect(d?.constants).toEqual([{ name: 'drift_corr', value: 0.001, uncertainty: { name: 'drift_corr', kind: 'normal', standardUncertainty: 0.0005, dof: 12 } }]);
  });

  it('defaults: no components, no limits, no combined target, no dominance rule, resolution proposed', () => {
    const s = settingsFor(parseConfig({ subscriptions }), 'any');
    expect([s.typeB, s.conformity, s.combinedTarget, s.dominanceFraction, s.proposeResolution]).toEqual([[], null, null, null, true]);
  });

  it('bad input: one line per problem naming the key path (missing and negative values, unknown kind, lower > upper, guard band beyond the interval)', () => {
    const lines = problems({
      subscriptions,
      channels: {
        defaults: { typeB: [{ name: 'cert', kind: 'certificate', coverageFactor: 2 }, { name: 'bath', kind: 'stability', halfWidth: -0.01 }], dominanceFraction: 1.5 },
        groups: [{ match: 'kb4.*', typeB: [{ name: 'odd', kind: 'trapezoid', halfWidth: 1 }], conformity: { lower: 30.1, upper: 29.9 } }, { match: 'kb5.*', conformity: { lower: 0, upper: 1, rule: 'guarded', guardBand: 0.6 }, combinedTarget: { U: -1 } }],
      },
      derived: [{ name: 'kb4.offset', expression: 'kb4.a - kb4.b', conformity: { lower: 2, upper: 1 }, constants: [{ name: 'c1', kind: 'normal', standardUncertainty: 0.1 }, { name: 'c 2', value: 1, kind: 'normal', standardUncertainty: -0.1 }] }],
    });
    expect(lines).toEqual(
      expect.arrayContaining([
        'channels.defaults.typeB[0].expanded: missing: the expanded uncertainty U printed on the certificate',
        'channels.defaults.typeB[1].halfWidth: expected a number at least 0, got -0.01',
        'channels.defaults.dominanceFraction: expected a number between 0 and 1, got 1.5',
        'channels.groups[0].typeB[0].kind: unknown kind "trapezoid" (expected one of certificate, resolution, drift, stability, installation, rectangular, triangular, u-shaped, normal)',
        'channels.groups[0].conformity.lower: the lower limit 30.1 lies above the upper limit 29.9',
        'channels.groups[1].conformity.guardBand: a guard band of 0.6 on each side leaves no acceptance interval between 0 and 1 (it must be less than 0.5)',
        'channels.groups[1].combinedTarget.U: expected a number above 0, got -1',
        'derived[0].conformity.lower: the lower limit 2 lies above the upper limit 1',
        "derived[0].constants[0].value: missing: the constant's value",
        'derived[0].constants[1].standardUncertainty: expected a number at least 0, got -0.1',
      ]),
    );
    // one line each: no duplicates
    expect(new Set(lines).size).toBe(lines.length);
  });
});
