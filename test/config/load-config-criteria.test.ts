import { describe, expect, it } from 'vitest';
import { parseConfig, ConfigError, settingsFor } from '../../src/config/load-config.js';

// `criteria` read by load-config per channel group, with presets by name: one line per problem
// naming the whole key path (the configuration's own convention, no outside source). The rig
// (chiller loop CL-3) and its channel names are invented.

const subscriptions = [{ topic: 'rig/cl3/+', format: 'json' }];

function problems(document: unknown): string[] {
  try {
    parseConfig(document);
  } catch (error) {
    expect(error).toBeInstanceOf(ConfigError);
    return (error as ConfigError).problems;
  }
  throw new Error('expected a ConfigError');
}

describe('criteria in the configuration', () => {
  it('reads rules per group and presets by name; a group replaces the defaults\' rules', () => {
    const config = parseConfig({
      subscriptions,
      channels: {
        defaults: { criteria: { rules: [{ name: 'quiet', statistic: 'sd', windowSeconds: 300, tolerance: 0.2 }] } },
        groups: [
          { match: 'cl3.supply_degC', criteria: { policy: 'rules', rules: ['iec-60335-2-6', { preset: 'ashrae-93-inlet-temperature', name: 'supply-band', setPoint: 7 }] } },
          { match: 'cl3.flow_*', unit: 'kg/s' },
        ],
      },
    });
    const supply = settingsFor(config, 'cl3.supply_degC').criteria;
    expect(supply?.policy).toBe('rules');
    expect(supply?.rules.map((r) => [r.name, r.preset])).toEqual([
      ['iec-60335-2-6', 'iec-60335-2-6'],
      ['supply-band', 'ashrae-93-inlet-temperature'],
    ]);
    expect(supply?.rules[1]?.setPoint).toEqual({ kind: 'config', value: 7 });
    // A group without criteria keeps the defaults'.
    expect(settingsFor(config, 'cl3.flow_main').criteria?.rules.map((r) => r.name)).toEqual(['quiet']);
    // No criteria anywhere: null.
    expect(settingsFor(parseConfig({ subscriptions }), 'cl3.x').criteria).toBeNull();
  });

  it('bad rules: one line each, naming the whole key path', () => {
    const lines = problems({
      subscriptions,
      channels: {
        defaults: { criteria: { rules: [{ name: 'a', statistic: 'spread', windowSeconds: 60, tolerance: 1 }] } },
        groups: [
          {
            match: 'cl3.*',
            criteria: {
              policy: 'sometimes',
              rules: [
                { name: 'b', statistic: 'range', windowSeconds: -900, tolerance: 1 },
                { name: 'c', statistic: 'range', windowSeconds: 900, holdSeconds: 1200, tolerance: 1 },
                { name: 'd', statistic: 'range', windowSeconds: 60, tolerance: { relative: 0.02, relativeTo: 'setpoint' } },
                'no-such-preset',
              ],
            },
          },
        ],
      },
    });
    expect(lines).toEqual([
      'channels.defaults.criteria.rules[0].statistic: unknown statistic "spread" (expected one of range, deviation, mean-deviation, setpoint-deviation, sd, cv, slope, change, average-change)',
      'channels.groups[0].criteria.policy: expected one of statistical, rules, both, got "sometimes"',
      'channels.groups[0].criteria.rules[0].windowSeconds: expected a window above 0 seconds, got -900',
      'channels.groups[0].criteria.rules[1].holdSeconds: hold of 1200 s is longer than the window (900 s): widen the window to state how long the condition must hold',
      'channels.groups[0].criteria.rules[2].tolerance.relativeTo: a tolerance relative to the set point needs a set point (setPoint: <value> or setPoint: test-point)',
      expect.stringMatching(/^channels\.groups\[0\]\.criteria\.rules\[3\]\.preset: unknown preset "no-such-preset" \(expected one of iec-62282-2, /),
    ]);
  });

  it('a criteria key of the wrong shape is one line', () => {
    expect(problems({ subscriptions, channels: { defaults: { criteria: 'strict' } } })).toEqual(['channels.defaults.criteria: expected a mapping of keys, got "strict"']);
    expect(problems({ subscriptions, channels: { defaults: { criteria: { rules: [], colour: 1 } } } })).toEqual(['channels.defaults.criteria.colour: unknown key (expected one of policy, rules)']);
  });
});
