import { describe, expect, it } from 'vitest';
import { conformanceProbability } from '../../../src/core/conformity/conformance-probability.js';
import { assessConformity, decideConformity, type DecisionRule, type Verdict } from '../../../src/core/conformity/decision-rule.js';
import { readFixture } from '../../helpers/reference.js';

// Expected probabilities: scipy.stats.norm.cdf / scipy.stats.t.cdf in
// test/fixtures/reference/scripts/conformity-references.py (test/fixtures/reference/conformity-references.json).
interface Case {
  value: number;
  standardUncertainty: number;
  lower: number | null;
  upper: number | null;
  dof: number | null;
  probability: number;
}
const fixture = readFixture<{ conformance: Case[] }>('conformity-references.json');

describe('conformanceProbability (JCGM 106:2012 clause 7: normal and scaled-and-shifted t; formulas from memory)', () => {
  it('matches scipy for every fixture case, one- and two-sided, normal and t (1e-12 absolute)', () => {
    for (const c of fixture.conformance) {
      const r = conformanceProbability({ value: c.value, standardUncertainty: c.standardUncertainty, dof: c.dof, lower: c.lower, upper: c.upper });
      expect(Math.abs((r.probability as number) - c.probability)).toBeLessThan(1e-12);
      expect(r.distribution).toBe(c.dof === null ? 'normal' : 't');
      expect((r.probability as number) + (r.nonConformance as number)).toBeCloseTo(1, 14);
    }
  });

  it('JCGM 106 7.3 (from memory): a measured value at the upper limit has p_c = 0.5; 1.645 u below it, 0.95; 2 u below, 0.977 (standard normal values)', () => {
    const at = (z: number) => conformanceProbability({ value: -z, standardUncertainty: 1, dof: null, lower: null, upper: 0 }).probability as number;
    expect(at(0)).toBeCloseTo(0.5, 15);
    expect(at(1.6448536269514722)).toBeCloseTo(0.95, 12);
    expect(at(2)).toBeCloseTo(0.9772498680518208, 12); // Phi(2), scipy.stats.norm.cdf(2)
  });

  it('few degrees of freedom lower p_c inside the limits (heavier tails of the t distribution)', () => {
    const normal = conformanceProbability({ value: 0, standardUncertainty: 1, dof: null, lower: null, upper: 2 }).probability as number;
    const t2 = conformanceProbability({ value: 0, standardUncertainty: 1, dof: 2, lower: null, upper: 2 }).probability as number;
    expect(t2).toBeLessThan(normal);
  });

  it('far inside: the complement keeps its digits (no 1 - 1 cancellation)', () => {
    const r = conformanceProbability({ value: 0, standardUncertainty: 1, dof: null, lower: -12, upper: 12 });
    expect(r.nonConformance as number).toBeGreaterThan(0);
    expect(Math.abs((r.nonConformance as number) / 3.552964224155306e-33 - 1)).toBeLessThan(1e-12); // 2 Phi(-12), 2 * scipy.stats.norm.cdf(-12)
  });

  it('zero uncertainty, crossed limits, no limits: values with notes, never NaN', () => {
    expect(conformanceProbability({ value: 1, standardUncertainty: 0, dof: null, lower: 0, upper: 2 }).probability).toBe(1);
    expect(conformanceProbability({ value: 3, standardUncertainty: 0, dof: null, lower: 0, upper: 2 }).probability).toBe(0);
    const crossed = conformanceProbability({ value: 1, standardUncertainty: 1, dof: null, lower: 2, upper: 0 });
    expect(crossed.probability).toBeNull();
    expect(crossed.note).toMatch(/lower limit/);
    expect(conformanceProbability({ value: 1, standardUncertainty: 1, dof: 5, lower: null, upper: null }).probability).toBe(1);
    expect(conformanceProbability({ value: Number.NaN, standardUncertainty: 1, dof: null, lower: 0, upper: 1 }).probability).toBeNull();
  });
});

describe('decision rules: ILAC-G8:09/2019 4.2 outcomes at and around the limits', () => {
  // Tolerance 10.0 +/- 0.5 (T_L = 9.5, T_U = 10.5), U = 0.1 (k = 2), guard band w = U.
  const limits = { lower: 9.5, upper: 10.5 };
  const U = 0.1;
  const verdict = (value: number, rule: DecisionRule): Verdict | null => decideConformity({ value, expandedUncertainty: U, limits, rule }).verdict;
  const simple: DecisionRule = { kind: 'simple' };
  const guarded: DecisionRule = { kind: 'guarded', guardFactor: 1 };
  const nonBinary: DecisionRule = { kind: 'non-binary', guardFactor: 1 };

  it('simple acceptance (4.2.1, w = 0): pass up to and at the limit, fail just beyond', () => {
    expect(verdict(10.0, simple)).toBe('pass');
    expect(verdict(10.5, simple)).toBe('pass'); // on the limit: the conforming side (our stated choice)
    expect(verdict(10.5001, simple)).toBe('fail');
    expect(verdict(9.4999, simple)).toBe('fail');
    expect(decideConformity({ value: 9.4999, expandedUncertainty: U, limits, rule: simple }).side).toBe('lower');
  });

  it('binary guarded acceptance (4.2.2, AL = TL - w): pass up to and at AL = 10.4, fail inside the guard band', () => {
    expect(verdict(10.4, guarded)).toBe('pass');
    expect(verdict(10.4001, guarded)).toBe('fail');
    expect(verdict(10.5, guarded)).toBe('fail');
    expect(verdict(9.6, guarded)).toBe('pass');
    expect(verdict(9.5999, guarded)).toBe('fail');
    const d = decideConformity({ value: 10.45, expandedUncertainty: U, limits, rule: guarded });
    expect(d.guardBand).toBeCloseTo(0.1, 15);
    expect(d.acceptance.upper).toBeCloseTo(10.4, 15);
    expect(d.side).toBe('upper');
  });

  it('non-binary (4.2.3): pass below AL, conditional pass in [TL - w, TL], conditional fail in [TL, TL + w], fail beyond', () => {
    const cases: [number, Verdict][] = [
      [10.0, 'pass'],
      [10.4, 'pass'], // at AL
      [10.4001, 'conditional-pass'],
      [10.5, 'conditional-pass'], // at TL
      [10.5001, 'conditional-fail'],
      [10.6, 'conditional-fail'], // at TL + w
      [10.6001, 'fail'],
      [9.5999, 'conditional-pass'],
      [9.45, 'conditional-fail'],
      [9.3, 'fail'],
    ];
    for (const [value, expected] of cases) expect(verdict(value, nonBinary), `value ${value}`).toBe(expected);
  });

  it('w = r U with r = 2, and a fixed guard band', () => {
    expect(verdict(10.35, { kind: 'guarded', guardFactor: 2 })).toBe('fail'); // AL = 10.3
    expect(verdict(10.3, { kind: 'guarded', guardFactor: 2 })).toBe('pass');
    expect(verdict(10.45, { kind: 'guarded', guardBand: 0.02 })).toBe('pass'); // AL = 10.48
  });

  it('one-sided upper limit: the missing side never decides', () => {
    const oneSided = { lower: null, upper: 10.5 };
    expect(decideConformity({ value: -1e6, expandedUncertainty: U, limits: oneSided, rule: nonBinary }).verdict).toBe('pass');
    expect(decideConformity({ value: 10.55, expandedUncertainty: U, limits: oneSided, rule: nonBinary }).verdict).toBe('conditional-fail');
  });

  it('guard bands that leave no acceptance interval: binary guarded cannot pass, and says why', () => {
    const d = decideConformity({ value: 10.0, expandedUncertainty: 0.6, limits, rule: guarded });
    expect(d.verdict).toBe('fail');
    expect(d.note).toMatch(/no acceptance interval/);
    expect(decideConformity({ value: 10.0, expandedUncertainty: 0.6, limits, rule: nonBinary }).verdict).toBe('conditional-pass');
  });

  it('no U for a guard factor, crossed limits: no verdict, a note', () => {
    expect(decideConformity({ value: 10, expandedUncertainty: null, limits, rule: guarded }).note).toMatch(/expanded uncertainty/);
    expect(decideConformity({ value: 10, expandedUncertainty: U, limits: { lower: 11, upper: 10 }, rule: simple }).verdict).toBeNull();
  });

  it('ILAC-G8 4.2.2 with w = U (k = 2): at the acceptance limit the probability of false acceptance is Phi(-2) = 2.3 %, below the 2.5 % ILAC-G8 quotes for w = U (from memory)', () => {
    const u = U / 2;
    const atLimit = assessConformity({ value: 10.4, standardUncertainty: u, dof: null, expandedUncertainty: U, limits: { lower: null, upper: 10.5 }, rule: guarded });
    expect(atLimit.verdict).toBe('pass');
    expect(atLimit.probability.nonConformance as number).toBeCloseTo(0.022750131948179195, 12); // scipy.stats.norm.cdf(-2)
    expect(atLimit.probability.nonConformance as number).toBeLessThan(0.025);
    // simple acceptance at the limit itself: 50 % (ILAC-G8 4.2.1 "shared risk")
    const shared = assessConformity({ value: 10.5, standardUncertainty: u, dof: null, expandedUncertainty: U, limits: { lower: null, upper: 10.5 }, rule: simple });
    expect(shared.verdict).toBe('pass');
    expect(shared.probability.probability as number).toBeCloseTo(0.5, 15);
  });
});
