import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { combineUncertainty, typeASplit, type BudgetInput } from '../../../src/core/uncertainty/combined-uncertainty.js';
import { evaluateTypeB, typeAComponent } from '../../../src/core/uncertainty/type-b-component.js';
import { effectiveDegreesOfFreedom, truncateDegreesOfFreedom } from '../../../src/core/uncertainty/welch-satterthwaite.js';
import { coverageFactor } from '../../../src/core/uncertainty/coverage-factor.js';
import { budgetTable, roundedUncertainty } from '../../../src/core/uncertainty/uncertainty-budget.js';
import { propagateUncertainty } from '../../../src/core/propagation/gum-propagation.js';
import { readFixture } from '../../helpers/reference.js';

// Expected values recomputed with scipy by test/fixtures/reference/scripts/conformity-references.py
// (test/fixtures/reference/conformity-references.json); published digits as marked beside each check.
interface Fixture {
  gumH1TypeB: { combinedVariance: number; standardUncertainty: number; nuEff: number; nuD: number; uTheta: number; t99AtTruncatedNu: number; expanded99: number };
  ea402S2: { standardUncertainties: Record<'mS' | 'dmD' | 'dm' | 'dmC' | 'dB', number>; standardUncertainty: number; expanded: number };
}
const fixture = readFixture<Fixture>('conformity-references.json');

/** |actual - published| <= half a unit in the last printed digit. */
function expectPublished(actual: number, published: number, halfUnit: number): void {
  expect(Math.abs(actual - published)).toBeLessThanOrEqual(halfUnit * (1 + 1e-9));
}

// JCGM 100:2008 (GUM) H.1, calibration of an end gauge: l = l_s + d - l_s (delta_alpha theta + alpha_s delta_theta),
// in nm and degC. Every input as the GUM describes it (H.1.3, from memory; DERIVED-REFERENCES.md section 2).
function gumH1Inputs(): BudgetInput[] {
  const ls = 50_000_623; // nm
  const theta = -0.1; // degC
  const alphaS = 11.5e-6; // per degC
  return [
    // H.1.3.1: certificate U = 0.075 um with k = 3, nu_eff(l_s) = 18 stated with it
    { name: 'l_s', estimate: ls, sensitivity: 1, components: [evaluateTypeB({ kind: 'certificate', name: 'calibration certificate', expanded: 75, coverageFactor: 3, dof: 18 })] },
    // H.1.3.2: d from 25 repeated observations (5.8 nm, nu 24), random comparator effects 3.9 nm (nu 5),
    // systematic comparator effects 6.7 nm judged reliable to 25 % (nu 8)
    {
      name: 'd',
      estimate: 215,
      sensitivity: 1,
      components: [
        typeAComponent({ name: 'repeated observations', standardUncertainty: 5.8, dof: 24 }),
        evaluateTypeB({ kind: 'normal', name: 'random effects of the comparator', standardUncertainty: 3.9, dof: 5 }),
        evaluateTypeB({ kind: 'normal', name: 'systematic effects of the comparator', standardUncertainty: 6.7, reliability: 0.25 }),
      ],
    },
    // H.1.3.3: alpha_s rectangular +/- 2e-6; its sensitivity -l_s delta_theta vanishes at delta_theta = 0
    { name: 'alpha_s', estimate: alphaS, sensitivity: 0, components: [evaluateTypeB({ kind: 'rectangular', name: 'thermal expansion coefficient', halfWidth: 2e-6 })] },
    // H.1.3.4: theta = -0.1 degC, u of the mean 0.2 degC plus a cyclic variation of amplitude 0.5 degC (U-shaped);
    // its sensitivity -l_s delta_alpha vanishes at delta_alpha = 0
    {
      name: 'theta',
      estimate: theta,
      sensitivity: 0,
      components: [evaluateTypeB({ kind: 'normal', name: 'mean temperature of the bed', standardUncertainty: 0.2 }), evaluateTypeB({ kind: 'u-shaped', name: 'cyclic variation', halfWidth: 0.5 })],
    },
    // H.1.3.5: delta_alpha rectangular +/- 1e-6 reliable to 10 % (nu 50); c = -l_s theta
    { name: 'delta_alpha', estimate: 0, sensitivity: -ls * theta, components: [evaluateTypeB({ kind: 'rectangular', name: 'difference of expansion coefficients', halfWidth: 1e-6, reliability: 0.1 })] },
    // H.1.3.6: delta_theta rectangular +/- 0.05 degC reliable to 50 % (nu 2); c = -l_s alpha_s
    { name: 'delta_theta', estimate: 0, sensitivity: -ls * alphaS, components: [evaluateTypeB({ kind: 'rectangular', name: 'difference in temperature', halfWidth: 0.05, reliability: 0.5 })] },
  ];
}

describe('combineUncertainty: JCGM 100:2008 H.1, the end gauge, with Type A and Type B inputs', () => {
  const h1 = fixture.gumH1TypeB;
  const result = combineUncertainty(gumH1Inputs(), { confidence: 0.99 });

  it('u_c = 32 nm, nu_eff = 16.7 truncated to 16, k = t_0.995(16) = 2.92, U99 = 93 nm (GUM H.1.5-H.1.6; published values from memory)', () => {
    // scipy recomputation of the same budget: u_c^2 = 1002.6 nm^2, nu_eff = 16.75
    expect(result.variance).toBeCloseTo(h1.combinedVariance, 8);
    expect(result.dof as number).toBeCloseTo(h1.nuEff, 9);
    expectPublished(result.standardUncertainty, 32, 0.5);
    expectPublished(roundedUncertainty(result.standardUncertainty), 32, 0);
    // the printed 16.7 is 16.75 computed from rounded components (DERIVED-REFERENCES.md section 2): 0.1 allowed
    expect(Math.abs((result.dof as number) - 16.7)).toBeLessThanOrEqual(0.1);
    expect(result.coverageDof).toBe(16); // GUM G.4.1 / H.1.6: truncated to the next lower integer
    expect(result.coverageFactor as number).toBeCloseTo(h1.t99AtTruncatedNu, 9);
    expectPublished(result.coverageFactor as number, 2.92, 0.005); // t_99(16) as H.1.6 prints it (from memory)
    // U99 = 93 nm (from memory) is 2.92 x the rounded u_c = 32 nm; unrounded 2.9208 x 31.66 = 92.48: within 1 nm
    expectPublished(Number((result.coverageFactor as number).toFixed(2)) * Math.round(result.standardUncertainty), 93, 0.5);
    expect(Math.abs((result.expandedUncertainty as number) - 93)).toBeLessThanOrEqual(1);
    expect(result.expandedUncertainty as number).toBeCloseTo(h1.expanded99, 8);
  });

  it('per input: u(d) = 9.7 nm with nu(d) = 25.6, u(theta) = 0.41 degC; contributions 25, 9.7, 2.9, 16.6 nm (GUM Table H.1, from memory)', () => {
    const byName = Object.fromEntries(result.inputs.map((s) => [s.name, s]));
    expectPublished(byName.d?.standardUncertainty as number, 9.7, 0.05);
    // 25.6 needs the rounded u(d) = 9.7 nm in the numerator; unrounded 25.45 (scipy, fixture)
    expect(byName.d?.dof as number).toBeCloseTo(h1.nuD, 9);
    expectPublished(9.7 ** 4 / ((byName.d?.standardUncertainty as number) ** 4 / (byName.d?.dof as number)), 25.6, 0.05);
    expectPublished(byName.theta?.standardUncertainty as number, 0.41, 0.005);
    expect(byName.theta?.standardUncertainty as number).toBeCloseTo(h1.uTheta, 12);
    [
      ['l_s', 25],
      ['d', 9.7],
      ['delta_alpha', 2.9],
      ['delta_theta', 16.6],
    ].forEach(([name, published]) => expectPublished(Math.abs(byName[name as string]?.contribution as number), published as number, 0.05));
    expect(byName.alpha_s?.contribution).toBe(0);
    expect(byName.theta?.contribution).toBe(0);
    const shares = result.rows.reduce((s, r) => s + (r.share as number), 0);
    expect(shares).toBeCloseTo(1, 12); // nothing shared: the variance terms alone add to u_c^2
    expect(result.covarianceTerms).toHaveLength(0);
  });

  it('agrees with the core law of propagation (src/core/propagation/gum-propagation.ts) fed the inputs u(x_i) and nu_i (common practice: the same law)', () => {
    const inputs = result.inputs;
    const p = inputs.length;
    const covariance = new Float64Array(p * p);
    inputs.forEach((s, i) => (covariance[i * p + i] = s.standardUncertainty ** 2));
    const core = propagateUncertainty({
      values: Float64Array.from(inputs.map((s) => s.estimate)),
      covariance,
      sensitivities: Float64Array.from(inputs.map((s) => s.sensitivity)),
      dofs: inputs.map((s) => s.dof),
      confidence: 0.99,
      dofRounding: 'truncate',
    });
    expect(core.standardUncertainty).toBeCloseTo(result.standardUncertainty, 10);
    expect(core.dof as number).toBeCloseTo(result.dof as number, 9);
    expect(core.expandedUncertainty as number).toBeCloseTo(result.expandedUncertainty as number, 9);
  });

  it('interpolated nu_eff on request: t_0.995(16.75) lies between t(16) and t(17) (GUM G.4.1 allows both)', () => {
    const fractional = combineUncertainty(gumH1Inputs(), { confidence: 0.99, dofRounding: 'fractional' });
    expect(fractional.coverageDof).toBeCloseTo(h1.nuEff, 9);
    expect(fractional.coverageFactor as number).toBeLessThan(coverageFactor(0.99, 16) as number);
    expect(fractional.coverageFactor as number).toBeGreaterThan(coverageFactor(0.99, 17) as number);
  });
});

describe('Welch-Satterthwaite and k (GUM G.4.1, Table G.2)', () => {
  it('GUM H.1.6 (from memory): u_c^4 / (25^4/18 + 9.7^4/25.6 + 2.9^4/50 + 16.6^4/2) = 16.7 with u_c^2 = 1002 nm^2; truncated 16; t_99(16) = 2.92 (scipy 2.9208)', () => {
    const nu = effectiveDegreesOfFreedom(
      [
        { contribution: 25, dof: 18 },
        { contribution: 9.7, dof: 25.6 },
        { contribution: 2.9, dof: 50 },
        { contribution: 16.6, dof: 2 },
      ],
      1002, // u_c^2 as H.1.5 prints it; with the rounded 32^2 = 1024 the formula gives 17.5
    ) as number;
    expectPublished(nu, 16.7, 0.05);
    expect(truncateDegreesOfFreedom(nu)).toBe(16);
    expectPublished(coverageFactor(0.99, 16) as number, 2.92, 0.005);
  });

  it('GUM Table G.2 (via NIST TN 1297 Table B.1, REFERENCES.md section 3): k at the truncated nu_eff for 95 % and 99 %', () => {
    // nu_eff = 7.9 truncates to 7: t_95(7) = 2.36, t_99(7) = 3.50; nu_eff = 20.4 truncates to 20: 2.09, 2.85
    for (const [nuEff, k95, k99] of [
      [7.9, 2.36, 3.5],
      [20.4, 2.09, 2.85],
      [1.3, 12.71, 63.66],
    ] as const) {
      const nu = truncateDegreesOfFreedom(nuEff);
      expectPublished(coverageFactor(0.95, nu) as number, k95, 0.005);
      expectPublished(coverageFactor(0.99, nu) as number, k99, 0.005);
    }
    expect(truncateDegreesOfFreedom(0.4)).toBe(1);
    expect(truncateDegreesOfFreedom(Number.POSITIVE_INFINITY)).toBe(Number.POSITIVE_INFINITY);
  });

  it('EA-4/02 M:2013 Annex E, Table E.1 (from memory; the same numbers as the GUM Table G.2 column 95.45 %, verified in REFERENCES.md): k(nu_eff) for p = 95.45 %', () => {
    const p = 0.9544997361036416; // erf(2 / sqrt 2): the table's "95.45 %"
    for (const [nu, k] of [
      [1, 13.97],
      [2, 4.53],
      [3, 3.31],
      [4, 2.87],
      [5, 2.65],
      [6, 2.52],
      [7, 2.43],
      [8, 2.37],
      [10, 2.28],
      [20, 2.13],
      [50, 2.05],
    ] as const) {
      expectPublished(coverageFactor(p, nu) as number, k, 0.005);
    }
    expectPublished(coverageFactor(p, Number.POSITIVE_INFINITY) as number, 2.0, 0.005);
  });

  it('only infinite-nu terms: nu_eff infinite; u_c = 0 with finite nu: undefined (null); bad nu refused', () => {
    expect(effectiveDegreesOfFreedom([{ contribution: 1, dof: null }])).toBe(Number.POSITIVE_INFINITY);
    expect(effectiveDegreesOfFreedom([{ contribution: 0, dof: 4 }])).toBeNull();
    expect(() => effectiveDegreesOfFreedom([{ contribution: 1, dof: 0 }])).toThrow(RangeError);
  });

  it('property: a nu_eff lies between the smallest nu_i and the sum of all nu_i (common practice; follows from the formula)', () => {
    fc.assert(
      fc.property(fc.array(fc.record({ contribution: fc.double({ min: 0.01, max: 10, noNaN: true }), dof: fc.double({ min: 1, max: 100, noNaN: true }) }), { minLength: 1, maxLength: 6 }), (terms) => {
        const nu = effectiveDegreesOfFreedom(terms) as number;
        const smallest = Math.min(...terms.map((t) => t.dof));
        const sum = terms.reduce((s, t) => s + t.dof, 0);
        expect(nu).toBeGreaterThanOrEqual(smallest * (1 - 1e-9));
        expect(nu).toBeLessThanOrEqual(sum * (1 + 1e-9));
      }),
      { numRuns: 300 },
    );
  });
});

describe('EA-4/02 M:2013 S2, calibration of a weight of nominal value 10 kg (all values from memory: the stored copies of EA-4/02 hold only its opening pages)', () => {
  // m_X = m_S + dm_D + dm + dm_C + dB, in mg relative to the nominal value
  const inputs: BudgetInput[] = [
    { name: 'm_S', estimate: 10_000_005, sensitivity: 1, components: [evaluateTypeB({ kind: 'certificate', name: 'reference standard', expanded: 45, coverageFactor: 2 })] },
    { name: 'dm_D', estimate: 0, sensitivity: 1, components: [evaluateTypeB({ kind: 'drift', name: 'drift since last calibration', halfWidth: 15 })] },
    // three comparisons, mean +20 mg; pooled standard deviation 25 mg from a previous evaluation: u = 25 / sqrt(3)
    { name: 'dm', estimate: 20, sensitivity: 1, components: [typeAComponent({ name: 'comparator observations', standardUncertainty: 25 / Math.sqrt(3), dof: 9 })] },
    { name: 'dm_C', estimate: 0, sensitivity: 1, components: [evaluateTypeB({ kind: 'rectangular', name: 'eccentricity and magnetic effects', halfWidth: 10 })] },
    { name: 'dB', estimate: 0, sensitivity: 1, components: [evaluateTypeB({ kind: 'rectangular', name: 'air buoyancy', halfWidth: 10 })] },
  ];
  const result = combineUncertainty(inputs, { confidence: 0.9544997361036416 });
  const s2 = fixture.ea402S2;

  it('u(m_S) = 22.5 mg, u(dm) = 14.4 mg, u(dm_C) = u(dB) = 5.77 mg; u(m_X) = 29.3 mg; U = 59 mg with k = 2 (EA-4/02 S2, from memory)', () => {
    const u = Object.fromEntries(result.inputs.map((s) => [s.name, s.standardUncertainty]));
    expectPublished(u.m_S as number, 22.5, 0.05);
    expectPublished(u.dm as number, 14.4, 0.05);
    expectPublished(u.dm_C as number, 5.77, 0.005);
    expectPublished(u.dB as number, 5.77, 0.005);
    expect(u.dm_D as number).toBeCloseTo(s2.standardUncertainties.dmD, 12); // 15 / sqrt(3) = 8.66 mg (scipy fixture)
    expect(result.standardUncertainty).toBeCloseTo(s2.standardUncertainty, 10);
    expectPublished(result.standardUncertainty, 29.3, 0.05);
    // k = 2 as EA-4/02 takes it (nu_eff large: the Type A part has 9 degrees of freedom pooled, but its share is small)
    const U = 2 * result.standardUncertainty;
    expectPublished(roundedUncertainty(U), 59, 0);
    // the result as reported: m_X = 10.000 025 kg (m_S + dm)
    expect(inputs.reduce((s, i) => s + i.estimate, 0) / 1e6).toBeCloseTo(10.000025, 9);
  });
});

describe('shared reference: two channels with the same certificate component', () => {
  // Two temperature channels read against the same reference thermometer: its certificate (U = 0.024 K, k = 2)
  // enters both with the key "ref-prt". Each channel also has its own Type A and resolution.
  const channel = (name: string, mean: number, uA: number, nuA: number): BudgetInput => ({
    name,
    estimate: mean,
    sensitivity: 1,
    components: [
      typeAComponent({ name: 'readings', standardUncertainty: uA, dof: nuA }),
      evaluateTypeB({ kind: 'certificate', name: 'reference thermometer certificate', expanded: 0.024, coverageFactor: 2, shared: 'ref-prt' }),
      evaluateTypeB({ kind: 'resolution', name: 'display', step: 0.01 }),
    ],
  });
  const a = channel('hx9.inlet_degC', 60.412, 0.004, 30);
  const b = channel('hx9.outlet_degC', 48.177, 0.006, 45);

  it('the difference a - b: the shared certificate cancels, and its covariance term shows it (GUM 5.2.2, r = +1)', () => {
    const difference = combineUncertainty([a, { ...b, sensitivity: -1 }], { confidence: 0.95 });
    const uRes = 0.01 / Math.sqrt(12);
    const expectedVariance = 0.004 ** 2 + 0.006 ** 2 + 2 * uRes ** 2; // the certificate's 0.012^2 twice, minus 2 x 0.012^2
    expect(difference.variance).toBeCloseTo(expectedVariance, 15);
    // budget rows: the certificate appears once per channel, +0.012 and -0.012 ...
    const certificateRows = difference.rows.filter((r) => r.shared === 'ref-prt');
    expect(certificateRows.map((r) => r.contribution)).toEqual([0.012, -0.012]);
    // ... and the covariance term between them, 2 (0.012)(-0.012), takes both variance terms back
    expect(difference.covarianceTerms).toHaveLength(1);
    expect(difference.covarianceTerms[0]?.term).toBeCloseTo(-2 * 0.012 ** 2, 15);
    const shares = difference.rows.reduce((s, r) => s + (r.share as number), 0) + difference.covarianceTerms.reduce((s, t) => s + (t.share as number), 0);
    expect(shares).toBeCloseTo(1, 12);
    // at the level of the channels: u(a, b) = 0.012^2, term 2 c_a c_b u(a, b) = -2 x 0.012^2
    expect(difference.inputCovariances).toHaveLength(1);
    expect(difference.inputCovariances[0]?.covariance).toBeCloseTo(0.012 ** 2, 15);
    expect(difference.inputCovariances[0]?.term).toBeCloseTo(-2 * 0.012 ** 2, 15);
    // the shared source contributes nothing to Welch-Satterthwaite either
    const independent = effectiveDegreesOfFreedom([
      { contribution: 0.004, dof: 30 },
      { contribution: 0.006, dof: 45 },
      { contribution: uRes, dof: null },
      { contribution: uRes, dof: null },
    ]);
    expect(difference.dof as number).toBeCloseTo(independent as number, 9);
  });

  it('the sum a + b: the shared certificate adds in full (2 x 0.012)^2, not 2 x 0.012^2', () => {
    const sum = combineUncertainty([a, b], { confidence: 0.95 });
    const uRes = 0.01 / Math.sqrt(12);
    expect(sum.variance).toBeCloseTo(0.004 ** 2 + 0.006 ** 2 + 2 * uRes ** 2 + 4 * 0.012 ** 2, 15);
    expect(sum.covarianceTerms[0]?.term).toBeCloseTo(2 * 0.012 ** 2, 15);
    expect(sum.inputCovariances[0]?.correlation).toBeGreaterThan(0.8);
  });

  it('without the shared key the certificates are independent and do not cancel (the mistake the key prevents)', () => {
    const unshared = (input: BudgetInput, c: number): BudgetInput => ({ ...input, sensitivity: c, components: input.components.map((k) => ({ ...k, shared: null })) });
    const difference = combineUncertainty([unshared(a, 1), unshared(b, -1)], { confidence: 0.95 });
    expect(difference.variance).toBeGreaterThan(2 * 0.012 ** 2);
    expect(difference.covarianceTerms).toHaveLength(0);
  });

  it('budget table: one line per component, a covariance line, the closing u_c, nu_eff, k, U', () => {
    const difference = combineUncertainty([a, { ...b, sensitivity: -1 }], { confidence: 0.95 });
    const table = budgetTable(difference);
    expect(table.columns.map((c) => c.key)).toEqual(['source', 'estimate', 'standardUncertainty', 'distribution', 'sensitivity', 'contribution', 'dof', 'share']);
    expect(table.rows).toHaveLength(6);
    expect(table.rows[0]?.source).toBe('hx9.inlet_degC: readings');
    expect(table.rows[0]?.distribution).toBe('normal (Type A)');
    expect(table.rows[2]?.distribution).toBe('rectangular');
    expect(table.covariance[0]?.source).toMatch(/shared: ref-prt/);
    expect(table.total.standardUncertainty).toBe(difference.standardUncertainty);
    expect(JSON.parse(JSON.stringify(table)).rows[1].dof).toBeNull(); // an infinite nu is null in JSON
  });

  it('typeASplit: the Type A terms apart from the rest, shared sources merged', () => {
    const difference = combineUncertainty([a, { ...b, sensitivity: -1 }], { confidence: 0.95 });
    const split = typeASplit(difference);
    expect(split.typeAVariance).toBeCloseTo(0.004 ** 2 + 0.006 ** 2, 15);
    expect(split.typeAVariance + split.otherVariance).toBeCloseTo(difference.variance, 15);
    expect(split.otherDofDenominator).toBe(0);
  });
});

describe('combineUncertainty edge cases', () => {
  it('zero uncertainty: shares null, nu undefined with a note, no NaN', () => {
    const r = combineUncertainty([{ name: 'x', estimate: 1, sensitivity: 1, components: [typeAComponent({ name: 'a', standardUncertainty: 0, dof: 4 })] }], { confidence: 0.95 });
    expect(r.standardUncertainty).toBe(0);
    expect(r.rows[0]?.share).toBeNull();
    expect(r.dof).toBeNull();
    expect(r.dofNote).toMatch(/zero/);
    expect(r.expandedUncertainty).toBe(0);
  });
  it('Type B only: nu_eff infinite, k the normal quantile (GUM Table G.2 row infinity: 1.96 at 95 %)', () => {
    const r = combineUncertainty([{ name: 'x', estimate: 1, sensitivity: 1, components: [evaluateTypeB({ kind: 'rectangular', name: 'r', halfWidth: 1 })] }], { confidence: 0.95 });
    expect(r.dof).toBeNull();
    expectPublished(r.coverageFactor as number, 1.96, 0.005);
  });
  it('refuses no inputs and a non-finite sensitivity', () => {
    expect(() => combineUncertainty([], { confidence: 0.95 })).toThrow(RangeError);
    expect(() => combineUncertainty([{ name: 'x', estimate: 1, sensitivity: Number.NaN, components: [] }], { confidence: 0.95 })).toThrow(RangeError);
  });
  it('roundedUncertainty: two significant digits (GUM 7.2.6, from memory), or up', () => {
    expect(roundedUncertainty(31.66)).toBe(32);
    expect(roundedUncertainty(0.0014433)).toBe(0.0014);
    expect(roundedUncertainty(0.0014433, 2, 'up')).toBe(0.0015);
    expect(roundedUncertainty(0.0015, 2, 'up')).toBe(0.0015);
  });
});
