import { describe, expect, it } from 'vitest';
import { parse as parseYaml } from 'yaml';
import { parseCriteria } from '../../src/config/criteria-config.js';
import { CriteriaTracker } from '../../src/engine/criteria/criteria-tracker.js';

// The `criteria` setting: one line per problem naming the key path (the configuration's own
// convention, no outside source). Rig and channel names are invented.

const PATH = 'channels.groups[0].criteria';

function problems(yaml: string): string[] {
  return parseCriteria(parseYaml(yaml), PATH).problems;
}

describe('criteria configuration', () => {
  it('reads presets and rules of one\'s own into specs a tracker accepts', () => {
    const { settings, problems: lines } = parseCriteria(
      parseYaml(`
policy: both
rules:
  - preset: iec-60335-2-6
  - preset: ashrae-93-inlet-temperature
    name: glycol-inlet
    setPoint: 45
  - name: outlet-band
    statistic: setpoint-deviation
    windowSeconds: 900
    averageSeconds: 30
    tolerance: { absolute: 0.5, relative: 0.02, relativeTo: setpoint }
    setPoint: test-point
    holdSeconds: 60
  - name: three-readings
    statistic: change
    windowReadings: 3
    samplingSeconds: 900
    direction: rise
    tolerance: 0
  - name: drift
    statistic: slope
    windowSeconds: 600
    perSeconds: 60
    tolerance: 0.05
    comparison: less-than
`),
      PATH,
    );
    expect(lines).toEqual([]);
    expect(settings!.policy).toBe('both');
    const [preset, inlet, band, readings, drift] = settings!.rules;
    expect(preset).toMatchObject({ name: 'iec-60335-2-6', statistic: 'change', lag: 'window', comparison: 'less-than', preset: 'iec-60335-2-6' });
    expect(preset!.source).toContain('mail-archive.com');
    expect(inlet).toMatchObject({ name: 'glycol-inlet', setPoint: { kind: 'config', value: 45 } });
    expect(band).toMatchObject({ basis: { kind: 'averages', seconds: 30 }, window: { kind: 'seconds', seconds: 900 }, setPoint: { kind: 'test-point' }, minReadings: 1, holdSeconds: 60 });
    expect(band!.tolerance).toEqual({ absolute: 0.5, relative: 0.02, relativeTo: 'setpoint', zero: 0 });
    expect(readings).toMatchObject({ basis: { kind: 'sampled', seconds: 900 }, window: { kind: 'readings', readings: 3 }, direction: 'rise', minReadings: 2 });
    expect(drift).toMatchObject({ perSeconds: 60, comparison: 'less-than', minReadings: 3 });
    expect(() => new CriteriaTracker(settings!.rules)).not.toThrow();
  });

  it('an unknown statistic: one line naming the key path', () => {
    expect(problems('rules: [{ name: a, statistic: spread, windowSeconds: 60, tolerance: 1 }]')).toEqual([
      `${PATH}.rules[0].statistic: unknown statistic "spread" (expected one of range, deviation, mean-deviation, setpoint-deviation, sd, cv, slope, change, average-change)`,
    ]);
  });

  it('a negative window: one line naming the key path', () => {
    expect(problems('rules: [{ name: a, statistic: range, windowSeconds: -900, tolerance: 1 }]')).toEqual([`${PATH}.rules[0].windowSeconds: expected a window above 0 seconds, got -900`]);
    expect(problems('rules: [{ name: a, statistic: range, windowReadings: -3, tolerance: 1 }]')).toEqual([`${PATH}.rules[0].windowReadings: expected a whole number of readings of at least 1, got -3`]);
  });

  it('a hold longer than the window: one line naming the key path', () => {
    expect(problems('rules: [{ name: a, statistic: range, windowSeconds: 900, holdSeconds: 1200, tolerance: 1 }]')).toEqual([
      `${PATH}.rules[0].holdSeconds: hold of 1200 s is longer than the window (900 s): widen the window to state how long the condition must hold`,
    ]);
    // A window of readings taken every 300 s spans (3 - 1) x 300 s.
    expect(problems('rules: [{ name: a, statistic: range, windowReadings: 3, samplingSeconds: 300, holdSeconds: 601, tolerance: 1 }]')).toEqual([
      `${PATH}.rules[0].holdSeconds: hold of 601 s is longer than the window (600 s): widen the window to state how long the condition must hold`,
    ]);
    // A preset's hold can be overridden, and is checked the same way.
    expect(problems('rules: [{ preset: iec-60335-2-6, holdSeconds: 901 }]')).toEqual([
      `${PATH}.rules[0].holdSeconds: hold of 901 s is longer than the window (900 s): widen the window to state how long the condition must hold`,
    ]);
  });

  it('a relative tolerance with no set point: one line naming the key path', () => {
    expect(problems('rules: [{ name: a, statistic: range, windowSeconds: 60, tolerance: { relative: 0.02, relativeTo: setpoint } }]')).toEqual([
      `${PATH}.rules[0].tolerance.relativeTo: a tolerance relative to the set point needs a set point (setPoint: <value> or setPoint: test-point)`,
    ]);
    // A preset that compares with its set point says so at the key that took it away.
    expect(problems('rules: [{ preset: us-40cfr91.410-speed, windowSeconds: 60, setPoint: none }]')).toEqual([
      `${PATH}.rules[0].setPoint: setpoint-deviation compares with a set point: give setPoint: <value> or setPoint: test-point`,
    ]);
  });

  it('every problem of a list at once, one line each', () => {
    const lines = problems(`
policy: sometimes
rules:
  - { name: a, statistic: spread, windowSeconds: 60, tolerance: 1 }
  - { name: b, statistic: range, windowSeconds: -1, tolerance: 1 }
  - { name: c, statistic: slope, windowSeconds: 60, holdSeconds: 61, tolerance: { relative: 0.1, relativeTo: setpoint } }
  - { name: c, statistic: range, windowSeconds: 60, tolerance: 1 }
  - { preset: iec-99999 }
  - { preset: us-40cfr91.410-speed }
  - { name: d, statistic: change, windowSeconds: 60, windowReadings: 4, tolerance: 1, colour: red }
  - { name: e, statistic: mean-deviation, windowSeconds: 60, tolerance: 1 }
  - { name: f, statistic: average-change, windowSeconds: 20, averageSeconds: 30, tolerance: 1 }
  - { name: g, statistic: range, windowReadings: 1, tolerance: 1 }
  - { name: h, statistic: sd, windowSeconds: 60 }
  - { preset: iec-61810-7, windowSeconds: 60 }
`);
    expect(lines).toEqual([
      `${PATH}.policy: expected one of statistical, rules, both, got "sometimes"`,
      `${PATH}.rules[0].statistic: unknown statistic "spread" (expected one of range, deviation, mean-deviation, setpoint-deviation, sd, cv, slope, change, average-change)`,
      `${PATH}.rules[1].windowSeconds: expected a window above 0 seconds, got -1`,
      `${PATH}.rules[2].holdSeconds: hold of 61 s is longer than the window (60 s): widen the window to state how long the condition must hold`,
      `${PATH}.rules[2].tolerance.relativeTo: a tolerance relative to the set point needs a set point (setPoint: <value> or setPoint: test-point)`,
      `${PATH}.rules[3].name: "c" is already the name of rules[2]: give each rule its own name`,
      `${PATH}.rules[4].preset: unknown preset "iec-99999" (expected one of iec-62282-2, iec-61810-7, iec-60034-1, iec-60335-2-6, ashrae-93-inlet-temperature, ashrae-93-flow, ashrae-93-ambient, ashrae-93-outlet, iso-9806-1994-flow, us-40cfr91.410-speed, us-40cfr91.410-load, us-40cfr91.410-idle-speed, us-10cfr430-m-operating, us-10cfr430-m-condition)`,
      `${PATH}.rules[5].windowSeconds: missing: length of the mode's data period in seconds (the source gives none)`,
      `${PATH}.rules[6].colour: unknown key (expected one of name, statistic, windowSeconds, windowReadings, averageSeconds, samplingSeconds, tolerance, comparison, setPoint, minReadings, holdSeconds, lag, direction, perSeconds)`,
      `${PATH}.rules[6].windowReadings: give the window as windowSeconds or windowReadings, not both`,
      `${PATH}.rules[7].setPoint: mean-deviation compares with a set point: give setPoint: <value> or setPoint: test-point`,
      `${PATH}.rules[8].windowSeconds: a window of 20 s is shorter than one sub-interval (30 s)`,
      `${PATH}.rules[9].windowReadings: range needs at least 2 readings in the window, got 1`,
      `${PATH}.rules[10].tolerance: missing: the tolerance (a number in the channel unit, or a mapping with absolute and/or relative)`,
      `${PATH}.rules[11].windowSeconds: unknown key for preset iec-61810-7 (expected one of preset, name, setPoint, holdSeconds) (a preset fixes windowSeconds; write the rule out in full to change it)`,
    ]);
  });

  it('nothing configured is no criteria', () => {
    expect(parseCriteria(undefined)).toEqual({ settings: null, problems: [] });
    expect(parseCriteria({ rules: [] })).toEqual({ settings: { policy: null, rules: [] }, problems: [] });
  });
});
