import { describe, expect, it } from 'vitest';
import { join } from 'node:path';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { loadConfigFile, parseConfig } from '../../src/config/load-config.js';
import { ConfigError } from '../../src/config/config-reader.js';
import { ChannelRegistry } from '../../src/engine/channel-registry.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';
import { DerivedResults } from '../../src/daemon/derived-results.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { ROOT } from '../helpers/reference.js';

// Load-time validation of derived expressions in the daemon's configuration: one line per problem,
// naming the key path (the project's config convention, src/config/config-reader.ts).

function config(derived: unknown[], extra: Record<string, unknown> = {}) {
  return parseConfig(
    {
      broker: { url: 'mqtt://127.0.0.1:1', clientId: 'derived-config-test' },
      // Channels are rig.<topic level 2>: names outside rig.* cannot exist.
      subscriptions: [{ topic: 'rig/+', format: 'json', channel: 'rig.{2}', valueField: 'v', timeField: 't' }],
      channels: { defaults: { window: { kind: 'growing' } }, groups: [{ match: 'rig.flow*', range: [0, 5] }, { match: 'rig.meter', range: [0.5, 10] }] },
      store: { path: ':memory:' },
      log: { level: 'silent' },
      derived,
      ...extra,
    },
    'test',
  );
}

const registry = () => new ChannelRegistry(() => DEFAULT_CHANNEL_OPTIONS);

function problems(derived: unknown[]): string[] {
  try {
    new DerivedResults(config(derived), registry());
  } catch (err) {
    expect(err).toBeInstanceOf(ConfigError);
    expect((err as ConfigError).code).toBe('ERR_CONFIG');
    return (err as ConfigError).problems;
  }
  throw new Error('expected a ConfigError');
}

describe('derived results: configuration errors at load time, one line each with the key path', () => {
  it('an unknown channel (no subscription can produce it)', () => {
    const lines = problems([{ name: 'q', expression: 'rig.t_in - lab.t_out' }]);
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/^derived\[0\]\.expression: unknown channel 'lab\.t_out' in "rig\.t_in - lab\.t_out": no subscription gives a channel of that name \(channel templates: rig\.\{2\}/);
  });

  it('a syntax error, with the character position', () => {
    const lines = problems([{ name: 'q', expression: 'rig.t_in - (rig.t_out' }]);
    expect(lines).toEqual([expect.stringMatching(/^derived\[0\]\.expression: syntax error at character \d+ in "rig\.t_in - \(rig\.t_out"/)]);
  });

  it('division by a channel whose declared range includes 0, naming the channel and its range', () => {
    const lines = problems([{ name: 'k', expression: 'rig.ref / rig.flow_a' }]);
    expect(lines).toEqual([expect.stringMatching(/^derived\[0\]\.expression: the denominator 'rig\.flow_a' can be zero: over the declared ranges rig\.flow_a in \[0, 5\]/)]);
    // A range that excludes 0 is accepted.
    expect(() => new DerivedResults(config([{ name: 'k', expression: 'rig.ref / rig.meter' }]), registry())).not.toThrow();
  });

  it('every problem at once, each on its own line with its own index', () => {
    const lines = problems([
      { name: 'ok', expression: 'rig.a + rig.b' },
      { name: 'unknown', expression: 'rig.a - lab.x' },
      { name: 'syntax', expression: 'rig.a +* rig.b' },
      { name: 'division', expression: 'rig.a / rig.flow_b' },
      { name: 'function', expression: 'max(rig.a, rig.b)' },
    ]);
    // The unknown channel and the compiler's findings, together, in the order of the definitions.
    expect(lines.map((l) => l.slice(0, l.indexOf(':')))).toEqual(['derived[1].expression', 'derived[2].expression', 'derived[3].expression', 'derived[4].expression']);
    expect(lines[0]).toMatch(/unknown channel 'lab\.x'/);
    const compiled = problems([
      { name: 'ok', expression: 'rig.a + rig.b' },
      { name: 'syntax', expression: 'rig.a +* rig.b' },
      { name: 'division', expression: 'rig.a / rig.flow_b' },
      { name: 'function', expression: 'max(rig.a, rig.b)' },
    ]);
    expect(compiled.map((l) => l.slice(0, l.indexOf(':')))).toEqual(['derived[1].expression', 'derived[2].expression', 'derived[3].expression']);
    expect(compiled[2]).toMatch(/'max' is not allowed: it is not differentiable/);
  });

  it('a name the subscriptions can produce is taken as a channel (the daemon has no channel list); until it sends data the result waits for it by name', () => {
    // rig.{2} produces any rig.* name, so a typo such as rig.glycol_inn passes the load-time check;
    // a dotted name is never property access here (rig.glycol_in.constructor is just a channel name,
    // looked up in a map), and the snapshot says which input has no samples.
    const results = new DerivedResults(config([{ name: 'q', expression: 'rig.glycol_inn - rig.glycol_in.constructor' }]), registry());
    expect(results.inputsOf(['q'])).toEqual(['rig.glycol_inn', 'rig.glycol_in.constructor']);
    const [view] = results.snapshots();
    expect(view?.ready).toBe(false);
    expect(view?.notes.join(' ')).toMatch(/no samples in the window yet from rig\.glycol_inn, rig\.glycol_in\.constructor/);
  });

  it('derived results may use each other by their dotted names; a cycle is one problem naming it', () => {
    const ok = new DerivedResults(config([{ name: 'rig.dt', expression: 'rig.t_out - rig.t_in' }, { name: 'rig.q', expression: 'rig.flow_a * 4.18 * rig.dt' }]), registry());
    expect(ok.inputsOf(['rig.q'])).toEqual(['rig.flow_a', 'rig.t_out', 'rig.t_in']);
    const lines = problems([{ name: 'rig.x', expression: 'rig.y + rig.a' }, { name: 'rig.y', expression: 'rig.x * 2' }]);
    expect(lines).toEqual([expect.stringMatching(/^derived\[\d\]\.expression: derived results refer to each other in a cycle: rig\.(x|y) -> rig\.(x|y) -> rig\.(x|y)/)]);
  });

  it('the configuration reader and the Daemon constructor both refuse it', () => {
    expect(() => config([{ name: 'q', expression: 'lab.t' }])).toThrow(ConfigError);
    const accepted = config([{ name: 'q', expression: 'rig.t' }]);
    // A configuration object edited after reading is checked again by the daemon.
    expect(() => new Daemon({ ...accepted, derived: [{ ...(accepted.derived[0] as (typeof accepted.derived)[number]), expression: 'lab.t' }] })).toThrow(ConfigError);
  });

  it('a file with several bad definitions: every problem at once, each line naming the file', () => {
    const dir = mkdtempSync(join(tmpdir(), 'plateau-derived-'));
    const file = join(dir, 'rig.yaml');
    writeFileSync(file, 'subscriptions:\n  - topic: rig/+\n    channel: "rig.{2}"\nderived:\n  - name: a\n    expression: "rig.x +"\n  - name: b\n    expression: "lab.y"\n');
    try {
      loadConfigFile(file);
      throw new Error('expected a ConfigError');
    } catch (err) {
      expect((err as ConfigError).problems).toEqual([expect.stringMatching(new RegExp(`^${file.replace(/[.*+?^${}()|[\]\\/]/g, '\\$&')}: derived\\[0\\]\\.expression: syntax error`)), expect.stringContaining(`${file}: derived[1].expression: unknown channel 'lab.y'`)]);
    }
  });

  it('the shipped configurations compile: heat duty over dotted hx7 channel names, bath corrections over cb2 names', () => {
    const hx7 = new DerivedResults(loadConfigFile(join(ROOT, 'config', 'hx7-heat-exchanger.yaml')), registry());
    expect(hx7.names()).toEqual(['hx7.heat_duty_kW']);
    expect(hx7.inputsOf(['hx7.heat_duty_kW'])).toEqual(['hx7.glycol_flow_kg_s', 'hx7.glycol_in_degC', 'hx7.glycol_out_degC']);
    const bath = new DerivedResults(loadConfigFile(join(ROOT, 'config', 'bath-calibration.yaml')), registry());
    expect(bath.inputsOf(['cb2.correction_p1', 'cb2.correction_p3'])).toEqual(['cb2.ref', 'cb2.p1', 'cb2.p3']);
  });
});
