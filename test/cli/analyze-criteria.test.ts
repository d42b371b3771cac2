import { beforeAll, describe, expect, it } from 'vitest';
import { runCli, tempFile, assertNoNonFinite } from '../helpers/cli.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import { CriteriaTracker } from '../../src/engine/criteria/criteria-tracker.js';
import { parseConfig, settingsFor } from '../../src/config/load-config.js';
import { parse as parseYaml } from 'yaml';
import pino from 'pino';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { ManualClock } from '../../src/clock/manual-clock.js';

// `plateau analyze --config`: the configuration's stability rules per channel, in JSON
// (criteria[{name, holds, since, value, tolerance, margin}]) and in the table. The values are
// checked against a tracker fed the same samples directly (the engine's own definition, no outside
// source); the rig (chiller loop CL-3), its file and its configuration are invented.

const T0 = 1_790_000_000;
const CONFIG = `
channels:
  groups:
    - match: "cl3.supply_degC"
      criteria:
        rules:
          - iec-60335-2-6
          - name: supply-drift
            statistic: slope
            windowSeconds: 600
            perSeconds: 60
            tolerance: 0.05
            comparison: less-than
    - match: "cl3.flow_kg_s"
      criteria:
        policy: rules
        rules:
          - name: flow-band
            statistic: range
            windowSeconds: 300
            tolerance: 0.01
`;

let file = '';
let configFile = '';
const rows: { t: number; supply: number; flow: number; ret: number }[] = [];

beforeAll(() => {
  const random = new SeededRandom(21);
  let a = 0;
  for (let i = 0; i < 1500; i++) {
    a = 0.6 * a + 0.03 * random.normal();
    // The supply settles; the flow drifts by 0.02 kg/s over the last 300 s (its band rule is lost).
    rows.push({ t: T0 + i, supply: 7 + 3 * Math.exp(-i / 100) + a, flow: 1.2 + (i > 1200 ? ((i - 1200) / 300) * 0.02 : 0) + 0.001 * random.normal(), ret: 12 + a });
  }
  file = tempFile('cl3-run.csv', `time,cl3.supply_degC,cl3.flow_kg_s,cl3.return_degC\n${rows.map((r) => `${r.t},${r.supply},${r.flow},${r.ret}`).join('\n')}\n`);
  configFile = tempFile('cl3.yaml', CONFIG);
});

describe('plateau analyze --config: stability rules', () => {
  it('JSON: criteria per channel with name, holds, since, value, tolerance, margin, equal to a tracker fed the same samples', () => {
    const result = runCli(['analyze', file, '--json', '--config', configFile]);
    expect(result.stderr).toBe('');
    expect(result.status).toBe(0);
    const report = JSON.parse(result.stdout);
    assertNoNonFinite(report);
    const [supply, flow, ret] = report.channels;
    const config = parseConfig(parseYaml(CONFIG), 'cl3.yaml', { requireSubscriptions: false });
    for (const [channel, column] of [
      [supply, 'supply'],
      [flow, 'flow'],
    ] as const) {
      const tracker = new CriteriaTracker(settingsFor(config, channel.name).criteria!.rules);
      for (const r of rows) tracker.push(r[column], r.t);
      const expected = tracker.states().map(({ name, holds, since, value, tolerance, margin }) => ({ name, holds, since, value, tolerance, margin }));
      expect(channel.criteria.map(({ name, holds, since, value, tolerance, margin }: Record<string, unknown>) => ({ name, holds, since, value, tolerance, margin }))).toEqual(expected);
    }
    expect(supply.criteria.map((c: { name: string; holds: boolean }) => [c.name, c.holds])).toEqual([
      ['iec-60335-2-6', true],
      ['supply-drift', true],
    ]);
    expect(supply.readiness.policy).toBe('both');
    expect(flow.criteria[0]).toMatchObject({ name: 'flow-band', holds: false, tolerance: 0.01 });
    expect(flow.criteria[0].margin).toBeLessThan(0);
    expect(flow.readiness).toMatchObject({ policy: 'rules', ready: false });
    // A channel the configuration gives no rules.
    expect(ret.criteria).toEqual([]);
    expect(ret.readiness).toBeNull();
  });

  it('the daemon, fed the same samples over its accept path, gives the same rules as plateau analyze, field for field', async () => {
    const analyzed = JSON.parse(runCli(['analyze', file, '--json', '--config', configFile]).stdout);
    const config = parseConfig({ ...parseYaml(CONFIG), subscriptions: [{ topic: 'rig/cl3/+', format: 'json', channel: 'cl3.{3}' }], store: { path: ':memory:' }, log: { level: 'silent' } });
    const source = new MemorySampleSource(daemonSubscriptions(config));
    const clock = new ManualClock(T0 * 1000);
    const daemon = new Daemon(config, { logger: pino({ level: 'silent' }), clock, store: new MemoryStore(), source });
    await daemon.start();
    try {
      for (const r of rows) {
        source.publish('rig/cl3/supply_degC', JSON.stringify({ v: r.supply, t: r.t }));
        source.publish('rig/cl3/flow_kg_s', JSON.stringify({ v: r.flow, t: r.t }));
        if (r.t % 100 === 0) daemon.commitNow();
      }
      daemon.commitNow();
      for (const name of ['cl3.supply_degC', 'cl3.flow_kg_s']) {
        const live = JSON.parse(JSON.stringify(daemon.channel(name)!.snapshot()));
        const fromFile = analyzed.channels.find((c: { name: string }) => c.name === name);
        expect(live.criteria, name).toEqual(fromFile.criteria);
        expect(live.readiness, name).toEqual(fromFile.readiness);
        const events = (list: { kind: string }[]) => list.filter((e) => e.kind.startsWith('criterion-'));
        expect(events(live.events), name).toEqual(events(fromFile.events));
      }
    } finally {
      await daemon.stop();
    }
  });

  it('the table: a rules column and one line per rule', () => {
    const result = runCli(['analyze', file, '--config', configFile]);
    expect(result.status).toBe(0);
    const out = result.stdout;
    expect(out).toMatch(/channel\s+verdict.*\s+target\s+rules/);
    expect(out).toMatch(/cl3\.supply_degC .* 2\/2 hold/);
    expect(out).toMatch(/cl3\.flow_kg_s .* 0\/1 hold/);
    expect(out).toContain('Stability rules:');
    expect(out).toContain('cl3.flow_kg_s (policy rules): not ready');
    expect(out).toMatch(/- iec-60335-2-6: holds since 2026-\d\d-\d\dT[\d:.]+Z \(value [\d.e-]+, tolerance 1, margin [\d.e-]+\)/);
    expect(out).toMatch(/- flow-band: does not hold: [^\n]*exceeds the tolerance 0\.01/);
    // Without --config: no rules column.
    expect(runCli(['analyze', file]).stdout).not.toContain('Stability rules:');
  });

  it('a bad configuration: one line per problem naming the key path, exit status 2; no time column: a note', () => {
    const bad = tempFile('bad.yaml', 'channels:\n  defaults:\n    criteria:\n      rules:\n        - { name: a, statistic: spread, windowSeconds: 60, tolerance: 1 }\n        - { name: b, statistic: range, windowSeconds: 60, holdSeconds: 90, tolerance: 1 }\n');
    const result = runCli(['analyze', file, '--config', bad]);
    expect(result.status).toBe(2);
    expect(result.stderr.trim().split('\n')).toEqual([
      `plateau: ${bad}: channels.defaults.criteria.rules[0].statistic: unknown statistic "spread" (expected one of range, deviation, mean-deviation, setpoint-deviation, sd, cv, slope, change, average-change)`,
      `plateau: ${bad}: channels.defaults.criteria.rules[1].holdSeconds: hold of 90 s is longer than the window (60 s): widen the window to state how long the condition must hold`,
    ]);
    const untimed = tempFile('untimed.csv', `cl3.supply_degC\n${rows.map((r) => r.supply).join('\n')}\n`);
    const json = JSON.parse(runCli(['analyze', untimed, '--json', '--config', configFile]).stdout);
    expect(json.notes.join(' ')).toContain('stability rules need the time of each sample');
  });
});
