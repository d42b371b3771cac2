import { describe, expect, it } from 'vitest';
import { stoppingStatus, type StoppingInput } from '../../../src/core/uncertainty/dominance-stop.js';
import { combineUncertainty, typeASplit } from '../../../src/core/uncertainty/combined-uncertainty.js';
import { evaluateTypeB, typeAComponent } from '../../../src/core/uncertainty/type-b-component.js';
import { coverageFactor } from '../../../src/core/uncertainty/coverage-factor.js';

// The rule is common practice with no published source; these checks follow from its definition
// (u_A <= f u_c, u_A^2 falling as 1/n, its nu growing as n).
function input(over: Partial<StoppingInput> = {}): StoppingInput {
  return { n: 1000, mean: 20, typeAVariance: 0.01 ** 2, typeADofDenominator: 0.01 ** 4 / 99, otherVariance: 0.02 ** 2, otherDofDenominator: 0, typeADof: 99, confidence: 0.95, rate: 10, capacity: Number.POSITIVE_INFINITY, ...over };
}

describe('stoppingStatus: u_A <= f u_c, or the target, whichever comes first', () => {
  it('dominance: with u_A = 0.01, u_B = 0.02 and f = 0.2, the wait is for n x V_A (1 - f^2) / (f^2 V_B) = 6 x n samples', () => {
    const s = stoppingStatus({ fraction: 0.2 }, input());
    expect(s.stop).toBe(false);
    expect(s.waitingFor).toBe('dominance');
    // m = 1e-4 x 0.96 / (0.04 x 4e-4) = 6
    expect(s.dominance.samplesToMeet).toBe(5000);
    expect(s.secondsToStop).toBeCloseTo(500, 12);
    expect(s.typeARatio as number).toBeCloseTo(0.01 / Math.sqrt(0.01 ** 2 + 0.02 ** 2), 12);
    // at 6 x n the rule holds exactly: u_A / u_c = f
    const later = stoppingStatus({ fraction: 0.2 }, input({ n: 6000, typeAVariance: 0.01 ** 2 / 6 }));
    expect(later.stop).toBe(true);
    expect(later.reason).toBe('dominance');
    expect(later.typeARatio as number).toBeCloseTo(0.2, 9);
  });

  it('a reachable combined target that comes first is what the wait is for; an unreachable one leaves the dominance rule', () => {
    // u target 0.0215 on u_c: needs V_A/m <= 0.0215^2 - 0.02^2, m = 1e-4 / 6.225e-5 = 1.606
    const near = stoppingStatus({ fraction: 0.2, target: { value: 0.0215, relative: false, on: 'u', basis: 'combined' } }, input());
    expect(near.waitingFor).toBe('target');
    expect(near.target?.samplesToMeet).toBe(Math.ceil(1000 * (1e-4 / (0.0215 ** 2 - 0.02 ** 2))) - 1000);
    const far = stoppingStatus({ fraction: 0.2, target: { value: 0.019, relative: false, on: 'u', basis: 'combined' } }, input());
    expect(far.target?.samplesToMeet).toBeNull();
    expect(far.target?.note).toMatch(/Type B components alone exceed the target/);
    expect(far.waitingFor).toBe('dominance');
  });

  it('a target on U: k(nu_eff(m)) u_c(m) <= T found by bisection, and met where the search says', () => {
    const spec = { value: 0.043, relative: false, on: 'U' as const, basis: 'combined' as const };
    const s = stoppingStatus({ fraction: 0.05, target: spec }, input({ otherDofDenominator: 0.02 ** 4 / 40 }));
    expect(s.waitingFor).toBe('target');
    const more = s.target?.samplesToMeet as number;
    const m = (1000 + more) / 1000;
    const at = (mm: number) => {
      const v = 1e-4 / mm + 4e-4;
      const nu = (v * v) / (0.01 ** 4 / 99 / mm ** 3 + 0.02 ** 4 / 40);
      return (coverageFactor(0.95, nu) as number) * Math.sqrt(v);
    };
    expect(at(1)).toBeGreaterThan(0.043);
    expect(at(m)).toBeLessThanOrEqual(0.043);
    expect(at(m - 2 / 1000)).toBeGreaterThan(0.043);
  });

  it('a target on the Type A part alone uses target-precision.ts: n (u_A / T)^2', () => {
    const s = stoppingStatus({ fraction: 0.2, target: { value: 0.002, relative: false, on: 'u', basis: 'type-a' } }, input());
    expect(s.target?.samplesToMeet).toBe(24000); // 1000 x (0.01 / 0.002)^2 - 1000
    expect(s.waitingFor).toBe('dominance'); // 5000 < 24000: the dominance rule stops first
  });

  it('relative targets use |mean|; met targets stop with reason target', () => {
    const s = stoppingStatus({ fraction: 0.2, target: { value: 0.01, relative: true, on: 'u', basis: 'combined' } }, input());
    expect(s.stop).toBe(true);
    expect(s.reason).toBe('target');
    expect(s.target?.bound).toBeCloseTo(0.2, 12);
  });

  it('no Type B at all: the dominance rule cannot be met, and says so', () => {
    const s = stoppingStatus({ fraction: 0.2 }, input({ otherVariance: 0 }));
    expect(s.dominance.samplesToMeet).toBeNull();
    expect(s.dominance.note).toMatch(/no Type B/);
    expect(s.waitingFor).toBeNull();
  });

  it('a sliding window too short for the wait: unreachable with a note, not a time', () => {
    const s = stoppingStatus({ fraction: 0.2 }, input({ capacity: 4096 }));
    expect(s.dominance.samplesToMeet).toBeNull();
    expect(s.dominance.note).toMatch(/more than it holds/);
  });

  it('from a budget: typeASplit feeds the rule', () => {
    const budget = combineUncertainty(
      [{ name: 'ch', estimate: 20, sensitivity: 1, components: [typeAComponent({ name: 'readings', standardUncertainty: 0.01, dof: 99 }), evaluateTypeB({ kind: 'normal', name: 'certificate', standardUncertainty: 0.02 })] }],
      { confidence: 0.95 },
    );
    const split = typeASplit(budget);
    const s = stoppingStatus({ fraction: 0.2 }, { ...input(), ...split, typeADof: split.typeADof as number });
    expect(s.dominance.samplesToMeet).toBe(5000);
  });

  it('refuses a fraction outside (0, 1)', () => {
    expect(() => stoppingStatus({ fraction: 1 }, input())).toThrow(RangeError);
  });
});
