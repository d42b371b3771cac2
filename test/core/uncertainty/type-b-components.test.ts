import { describe, expect, it } from 'vitest';
import { evaluateTypeB, typeAComponent, TYPE_B_KINDS } from '../../../src/core/uncertainty/type-b-component.js';
import { dofFromReliability } from '../../../src/core/uncertainty/reliability-dof.js';
import { certificateStandardUncertainty } from '../../../src/core/uncertainty/certificate-uncertainty.js';
import { halfWidthDivisor, standardUncertaintyFromHalfWidth } from '../../../src/core/uncertainty/distribution-shape.js';
import { groupSpread } from '../../../src/core/uncertainty/source-spread.js';
import { proposeResolutionComponent } from '../../../src/core/uncertainty/resolution-component.js';
import { detectLattice } from '../../../src/core/resolution/lattice.js';

describe('distribution shapes (GUM 4.3.7, 4.3.9, H.1.3.3)', () => {
  it('a / sqrt(3), a / sqrt(6), a / sqrt(2) for rectangular, triangular, U-shaped (GUM 4.3.7, 4.3.9; U-shaped as in H.1.3.3, from memory)', () => {
    expect(halfWidthDivisor('rectangular')).toBeCloseTo(Math.sqrt(3), 15);
    expect(standardUncertaintyFromHalfWidth('triangular', 6)).toBeCloseTo(6 / Math.sqrt(6), 14);
    // GUM H.1.3.3 (from memory): a cyclic temperature variation of amplitude 0.5 degC is U-shaped, u = 0.35 degC
    expect(standardUncertaintyFromHalfWidth('u-shaped', 0.5)).toBeCloseTo(0.35, 2);
    expect(() => standardUncertaintyFromHalfWidth('rectangular', -1)).toThrow(RangeError);
  });
});

describe('degrees of freedom from reliability (GUM G.4.2, eq. G.3)', () => {
  it('25 % gives 8, 10 % gives 50, 50 % gives 2 (the values GUM H.1 uses; from memory); none given: infinite', () => {
    expect(dofFromReliability(0.25)).toBeCloseTo(8, 12);
    expect(dofFromReliability(0.1)).toBeCloseTo(50, 12);
    expect(dofFromReliability(0.5)).toBeCloseTo(2, 12);
    expect(dofFromReliability(undefined)).toBe(Number.POSITIVE_INFINITY);
    expect(() => dofFromReliability(-0.1)).toThrow(RangeError);
  });
});

describe('certificate (GUM 4.3.3, 4.3.4)', () => {
  it('U and k: u = U / k; GUM H.1.3.1 (from memory): U = 0.075 um with k = 3 gives 25 nm', () => {
    expect(certificateStandardUncertainty({ expanded: 75, coverageFactor: 3 }).standardUncertainty).toBeCloseTo(25, 12);
  });
  it('U at 95 % with no degrees of freedom: normal assumed, divisor 1.960 (GUM 4.3.4; z_0.975 = 1.959964, Table G.2 row infinity)', () => {
    const c = certificateStandardUncertainty({ expanded: 1.96, confidence: 0.95 });
    expect(c.divisor).toBeCloseTo(1.959964, 6);
    expect(c.basis).toBe('normal-quantile');
  });
  it('U at 95 % with nu = 10 stated: divisor t_0.975(10) = 2.23 (GUM Table G.2)', () => {
    const c = certificateStandardUncertainty({ expanded: 2.23, confidence: 0.95, dof: 10 });
    expect(Math.abs(c.divisor - 2.23)).toBeLessThanOrEqual(0.005);
    expect(c.basis).toBe('t-quantile');
  });
  it('refuses neither or both of k and p', () => {
    expect(() => certificateStandardUncertainty({ expanded: 1 })).toThrow(RangeError);
    expect(() => certificateStandardUncertainty({ expanded: 1, coverageFactor: 2, confidence: 0.95 })).toThrow(RangeError);
  });
});

describe('evaluateTypeB: every kind gives u, nu, distribution and the shared key', () => {
  it('resolution: rectangular of half-width step / 2, u = step / sqrt(12) (GUM F.2.2.1)', () => {
    const c = evaluateTypeB({ kind: 'resolution', name: 'display', step: 0.01 });
    expect(c.standardUncertainty).toBeCloseTo(0.01 / Math.sqrt(12), 15);
    expect(c.halfWidth).toBeCloseTo(0.005, 15);
    expect(c.distribution).toBe('rectangular');
    expect(c.dof).toBe(Number.POSITIVE_INFINITY);
  });
  it('drift: a half-width, or |rate| x elapsed (rectangular unless stated)', () => {
    expect(evaluateTypeB({ kind: 'drift', name: 'd', halfWidth: 0.03 }).standardUncertainty).toBeCloseTo(0.03 / Math.sqrt(3), 15);
    const byRate = evaluateTypeB({ kind: 'drift', name: 'd', rate: -0.002, elapsed: 15, shape: 'triangular' });
    expect(byRate.halfWidth).toBeCloseTo(0.03, 15);
    expect(byRate.standardUncertainty).toBeCloseTo(0.03 / Math.sqrt(6), 15);
    expect(() => evaluateTypeB({ kind: 'drift', name: 'd', halfWidth: 1, rate: 1, elapsed: 1 })).toThrow(RangeError);
  });
  it('stability, installation and the free shapes; reliability gives nu; shared key and sensitivity carried', () => {
    const s = evaluateTypeB({ kind: 'stability', name: 'bath', halfWidth: 0.02, reliability: 0.25, shared: 'bath-7' });
    expect(s.standardUncertainty).toBeCloseTo(0.02 / Math.sqrt(3), 15);
    expect(s.dof).toBeCloseTo(8, 12);
    expect(s.shared).toBe('bath-7');
    const i = evaluateTypeB({ kind: 'installation', name: 'immersion', halfWidth: 0.04, shape: 'triangular', sensitivity: 2 });
    expect(i.standardUncertainty).toBeCloseTo(0.04 / Math.sqrt(6), 15);
    expect(i.sensitivity).toBe(2);
    expect(evaluateTypeB({ kind: 'u-shaped', name: 'cycle', halfWidth: 0.5 }).distribution).toBe('u-shaped');
    expect(evaluateTypeB({ kind: 'normal', name: 'n', expanded: 0.4, coverageFactor: 2 }).standardUncertainty).toBeCloseTo(0.2, 15);
    expect(evaluateTypeB({ kind: 'normal', name: 'n', standardUncertainty: 0.3, dof: 12 }).dof).toBe(12);
    expect(TYPE_B_KINDS).toHaveLength(9);
  });
  it('refuses dof and reliability together, and negative widths', () => {
    expect(() => evaluateTypeB({ kind: 'rectangular', name: 'r', halfWidth: 1, dof: 3, reliability: 0.1 })).toThrow(RangeError);
    expect(() => evaluateTypeB({ kind: 'rectangular', name: 'r', halfWidth: -1 })).toThrow(RangeError);
    expect(() => evaluateTypeB({ kind: 'resolution', name: 'r', step: 0 })).toThrow(RangeError);
  });
  it('Type A component: the mean-uncertainty u and nu as a budget entry', () => {
    const a = typeAComponent({ name: 'readings', standardUncertainty: 0.01, dof: 40 });
    expect(a.evaluation).toBe('A');
    expect(a.dof).toBe(40);
    expect(() => typeAComponent({ name: 'x', standardUncertainty: 0.01, dof: 0 })).toThrow(RangeError);
  });
});

describe('groupSpread: a source\'s uniformity from channels at one instant', () => {
  it('half-range as a rectangular half-width, sample sd beside it (common practice)', () => {
    const s = groupSpread([20.012, 20.004, 20.02, Number.NaN, 20.01]);
    expect(s?.count).toBe(4);
    expect(s?.halfWidth).toBeCloseTo(0.008, 12);
    expect(s?.standardUncertainty).toBeCloseTo(0.008 / Math.sqrt(3), 12);
    // sample sd of 20.012, 20.004, 20.02, 20.01 (n - 1 divisor), computed by hand: 0.006608
    expect(s?.sd).toBeCloseTo(0.0066080, 6);
    expect(groupSpread([1])).toBeNull();
  });
});

describe('proposeResolutionComponent', () => {
  it('a coarse lattice found in the readings gives a resolution component of its step; fine data gives none', () => {
    const readings = Array.from({ length: 200 }, (_, i) => 0.5 * Math.round(Math.sin(i) * 1.2 / 0.5));
    const lattice = detectLattice(readings);
    expect(lattice?.step).toBeCloseTo(0.5, 9);
    const spec = proposeResolutionComponent(lattice);
    expect(spec?.kind).toBe('resolution');
    expect(spec?.step).toBeCloseTo(0.5, 9);
    expect(proposeResolutionComponent(null)).toBeNull();
    expect(proposeResolutionComponent({ step: 0.001, distinct: 200, coarse: false })).toBeNull();
  });
});
