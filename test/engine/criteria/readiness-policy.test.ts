import { describe, expect, it } from 'vitest';
import { combineReadiness, defaultPolicy } from '../../../src/engine/criteria/readiness-policy.js';
import { CriteriaTracker, type CriterionState } from '../../../src/engine/criteria/criteria-tracker.js';
import { ChannelPipeline } from '../../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../../src/engine/channel-options.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import type { CriterionSpec } from '../../../src/core/criteria/criterion-spec.js';

// The readiness policy combines the statistical verdict with the rules; the scenario (a glycol
// outlet warming up, then a step) is invented for the test, and the checks are the policy's own
// definition (no outside source).

const T0 = 1_700_000_000;

function spec(partial: Partial<CriterionSpec> & Pick<CriterionSpec, 'name' | 'statistic'>): CriterionSpec {
  return {
    basis: { kind: 'readings' },
    window: { kind: 'seconds', seconds: 300 },
    tolerance: { absolute: 1, relative: null, relativeTo: 'reading', zero: 0 },
    comparison: 'at-most',
    setPoint: { kind: 'none' },
    minReadings: 2,
    holdSeconds: 0,
    lag: 1,
    direction: 'any',
    perSeconds: 1,
    preset: null,
    source: null,
    wording: null,
    ...partial,
  };
}

function state(name: string, holds: boolean, extra: Partial<CriterionState> = {}): CriterionState {
  return {
    name,
    statistic: 'range',
    preset: null,
    source: null,
    wording: null,
    rule: 'range at most 1',
    holds,
    met: holds,
    since: holds ? 100 : null,
    holdsFrom: holds ? 100 : null,
    holdSeconds: 0,
    value: holds ? 0.5 : 1.5,
    tolerance: 1,
    comparison: 'at-most',
    margin: holds ? 0.5 : -0.5,
    worstMargin: holds ? 0.25 : null,
    setPoint: null,
    readings: 10,
    earliestHoldTime: null,
    secondsToHold: null,
    pending: holds ? null : '1.5 exceeds the tolerance 1',
    detail: { readings: 10, mean: null, min: null, max: null, sd: null, slope: null, firstTime: null, newestTime: null },
    ...extra,
  };
}

describe('combineReadiness', () => {
  const ready = { ready: true, reasons: [] };
  const notReady = { ready: false, reasons: ['steady state not confirmed yet'] };

  it('defaults to both when rules are configured, else to the statistical verdict', () => {
    expect(defaultPolicy(0)).toBe('statistical');
    expect(defaultPolicy(2)).toBe('both');
    expect(combineReadiness({ statistical: ready, criteria: [] }).policy).toBe('statistical');
    expect(combineReadiness({ statistical: ready, criteria: [state('a', false)] }).policy).toBe('both');
  });

  it('both: ready only when the verdict is ready and every rule holds, with the reasons of each', () => {
    const cases = [
      [ready, [state('a', true), state('b', true)], true],
      [ready, [state('a', true), state('b', false)], false],
      [notReady, [state('a', true)], false],
      [notReady, [state('a', false)], false],
    ] as const;
    for (const [statistical, criteria, expected] of cases) {
      const r = combineReadiness({ policy: 'both', statistical, criteria });
      expect(r.ready).toBe(expected);
      expect(r.reasons.length === 0).toBe(expected);
    }
    const r = combineReadiness({ policy: 'both', statistical: notReady, criteria: [state('a', true), state('b', false)] });
    expect(r.reasons).toEqual(['steady state not confirmed yet', 'rule b: 1.5 exceeds the tolerance 1']);
  });

  it('statistical ignores the rules, rules ignores the verdict; rules without any rule is never ready', () => {
    expect(combineReadiness({ policy: 'statistical', statistical: ready, criteria: [state('a', false)] }).ready).toBe(true);
    expect(combineReadiness({ policy: 'rules', statistical: notReady, criteria: [state('a', true)] }).ready).toBe(true);
    const none = combineReadiness({ policy: 'rules', statistical: ready, criteria: [] });
    expect(none.ready).toBe(false);
    expect(none.reasons).toEqual(['no stability rules are configured']);
  });

  it('states for each rule whether it held over the whole recorded window, with its values and margins', () => {
    const early = state('early', true, { since: 50, holdsFrom: 80 });
    const late = state('late', true, { since: 150, holdsFrom: 150 });
    const r = combineReadiness({ statistical: ready, criteria: [early, late], window: { startTime: 100, endTime: 400 } });
    expect(r.ready).toBe(true);
    expect(r.rules.evidence.map((e) => [e.name, e.heldOverWindow, e.value, e.tolerance, e.margin, e.worstMargin])).toEqual([
      ['early', true, 0.5, 1, 0.5, 0.25],
      ['late', false, 0.5, 1, 0.5, 0.25],
    ]);
  });
});

describe('readiness of a live channel under "both"', () => {
  it('becomes ready only when the statistical verdict and every rule hold, and carries the rule evidence', () => {
    // An outlet warming up from 40 towards 45 (time constant 150 s) with AR(1) noise, 1 sample/s,
    // then a step of +0.8 at 3000 s. Rules: a gradient of at most 0.03 per minute over 5 min,
    // held for 2 min, and a 5 min band of 0.6.
    const rules = [
      spec({ name: 'gradient', statistic: 'slope', perSeconds: 60, tolerance: { absolute: 0.03, relative: null, relativeTo: 'reading', zero: 0 }, minReadings: 3, holdSeconds: 120 }),
      spec({ name: 'band', statistic: 'range', tolerance: { absolute: 0.6, relative: null, relativeTo: 'reading', zero: 0 } }),
    ];
    const pipeline = new ChannelPipeline('hx7.glycol_out_degC', { ...DEFAULT_CHANNEL_OPTIONS, target: { value: 0.02, relative: false, on: 'U' } });
    const tracker = new CriteriaTracker(rules);
    const random = new SeededRandom(7);
    let noise = 0;
    const seen = { rulesOnly: 0, statisticalOnly: 0, both: 0 };
    let firstReady: ReturnType<typeof combineReadiness> | null = null;
    let firstWindow: { startTime: number; endTime: number } | null = null;
    for (let i = 0; i < 8000; i++) {
      noise = 0.8 * noise + 0.05 * random.normal();
      const value = 45 - 5 * Math.exp(-i / 150) + noise + (i >= 3000 ? 0.8 : 0);
      pipeline.push(value, T0 + i);
      tracker.push(value, T0 + i);
      if (i % 50 !== 0) continue;
      const snapshot = pipeline.snapshot();
      const statistical = { ready: snapshot.verdict.ready, reasons: snapshot.verdict.pending.map((p) => p.message) };
      const criteria = tracker.states();
      const window = snapshot.window.startTime === null || snapshot.window.endTime === null ? null : { startTime: snapshot.window.startTime, endTime: snapshot.window.endTime };
      const readiness = combineReadiness({ statistical, criteria, window });
      expect(readiness.policy).toBe('both');
      expect(readiness.ready).toBe(statistical.ready && criteria.every((c) => c.holds));
      if (statistical.ready && !tracker.allHold) seen.statisticalOnly++;
      if (!statistical.ready && tracker.allHold) seen.rulesOnly++;
      if (readiness.ready) {
        seen.both++;
        if (!firstReady) {
          firstReady = readiness;
          firstWindow = window;
        }
      }
    }
    // The scenario has each side ready while the other is not, so the policy is put to the test.
    expect(seen.rulesOnly).toBeGreaterThan(0);
    expect(seen.statisticalOnly).toBeGreaterThan(0);
    expect(seen.both).toBeGreaterThan(0);
    const record = firstReady!;
    expect(record.rules.evidence.map((e) => e.name)).toEqual(['gradient', 'band']);
    for (const e of record.rules.evidence) {
      expect(e.holds).toBe(true);
      expect(e.margin).toBeGreaterThanOrEqual(0);
      expect(e.worstMargin).toBeLessThanOrEqual(e.margin!);
      expect(e.value! + e.margin!).toBeCloseTo(e.tolerance!, 12);
      // Held over the recorded window when it has held since before the window's first sample.
      expect(e.heldOverWindow).toBe(e.holdsFrom! <= firstWindow!.startTime);
    }
  });
});
