import { describe, expect, it } from 'vitest';
import { DerivedEngine, type DerivedSnapshot } from '../../../src/engine/derived/derived-engine.js';
import { compileWithConstants, type DerivedConstant } from '../../../src/engine/derived/derived-constants.js';
import type { TypeBSpec } from '../../../src/core/uncertainty/type-b-component.js';
import { roundedUncertainty } from '../../../src/core/uncertainty/uncertainty-budget.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import { readFixture } from '../../helpers/reference.js';

// Derived results with Type B inputs and named constants (src/engine/derived/derived-constants.ts and
// withCombined in derived-engine.ts).

interface Fixture {
  gumH1TypeB: { combinedVariance: number; standardUncertainty: number; nuEff: number; nuD: number; uTheta: number; t99AtTruncatedNu: number; expanded99: number };
}
// scipy recomputation of the GUM H.1 budget (test/fixtures/reference/scripts/conformity-references.py)
const h1 = readFixture<Fixture>('conformity-references.json').gumH1TypeB;

function expectPublished(actual: number, published: number, halfUnit: number): void {
  expect(Math.abs(actual - published)).toBeLessThanOrEqual(halfUnit * (1 + 1e-9));
}

/** Feeds one channel's values at 1 s intervals, then one more sample a bucket later so that the last row closes. */
function feedChannel(engine: DerivedEngine, channel: number, values: ArrayLike<number>, t0 = 1_764_000_000): void {
  for (let i = 0; i < values.length; i++) engine.add(channel, t0 + i, values[i] as number);
}

describe('GUM H.1 (JCGM 100:2008), the end gauge, through a derived result with Type A and Type B inputs and named constants', () => {
  // l = l_s + d - l_s (delta_alpha theta + alpha_s delta_theta), in nm and degC (GUM H.1.2; inputs H.1.3, from memory,
  // as test/core/uncertainty/combined-uncertainty.test.ts). The channel d: 25 readings whose mean is 215 nm and whose
  // standard deviation is 29 nm, so that the rows taken as independent observations give u(d) = 29 / sqrt(25) = 5.8 nm
  // with nu = 24, as the pooled estimate of H.1.3.2 does (the readings are constructed to have exactly these statistics;
  // they are not data of the GUM); the comparator's random (3.9 nm, nu 5) and systematic (6.7 nm, reliable to 25 %,
  // nu 8) effects are d's Type B components. The constants: l_s from its certificate (U = 75 nm, k = 3, nu 18), alpha_s
  // rectangular +/- 2e-6, theta = -0.1 degC with u = 0.41 degC, delta_alpha rectangular +/- 1e-6 (reliable to 10 %, nu
  // 50), delta_theta rectangular +/- 0.05 degC (reliable to 50 %, nu 2).
  const constants: DerivedConstant[] = [
    { name: 'l_s', value: 50_000_623, uncertainty: { name: 'l_s', kind: 'certificate', expanded: 75, coverageFactor: 3, dof: 18 } },
    { name: 'alpha_s', value: 11.5e-6, uncertainty: { name: 'alpha_s', kind: 'rectangular', halfWidth: 2e-6 } },
    { name: 'theta', value: -0.1, uncertainty: { name: 'theta', kind: 'normal', standardUncertainty: 0.41 } },
    { name: 'delta_alpha', value: 0, uncertainty: { name: 'delta_alpha', kind: 'rectangular', halfWidth: 1e-6, reliability: 0.1 } },
    { name: 'delta_theta', value: 0, uncertainty: { name: 'delta_theta', kind: 'rectangular', halfWidth: 0.05, reliability: 0.5 } },
  ];
  const dTypeB: TypeBSpec[] = [
    { name: 'random effects of the comparator', kind: 'normal', standardUncertainty: 3.9, dof: 5 },
    { name: 'systematic effects of the comparator', kind: 'normal', standardUncertainty: 6.7, reliability: 0.25 },
  ];
  const compiled = compileWithConstants([{ name: 'l', unit: 'nm', expression: 'l_s + d - l_s * (delta_alpha * theta + alpha_s * delta_theta)' }], [{ name: 'd' }], 'derived', [constants]);
  if (!compiled.ok) throw new Error(compiled.problems.join('\n'));
  const spec = { compiled: compiled.compiled[0] as (typeof compiled.compiled)[number], target: null, confidence: 0.99, uncertainty: { channelTypeB: { d: dTypeB }, conformity: null, combinedTarget: null } };
  const engine = new DerivedEngine([spec], { estimator: 'iid', bucketSeconds: 1 });
  const z = Array.from({ length: 25 }, (_, i) => i - 12);
  const sd = Math.sqrt(z.reduce((s, v) => s + v * v, 0) / 24);
  feedChannel(engine, 0, [...z.map((v) => 215 + (29 * v) / sd), 215]);
  const s = engine.evaluate()[0] as DerivedSnapshot;

  it('the constants are not channels: the only input is d, the Type A part is u(d) = 5.8 nm with nu = 24', () => {
    expect(s.inputs).toEqual(['d']);
    expect(s.rows).toBe(25);
    expect(s.standardUncertainty as number).toBeCloseTo(5.8, 10);
    expect(s.dof).toBe(24);
    // l = 50.000 838 mm (GUM H.1.5, from memory)
    expect(s.value as number).toBeCloseTo(50_000_838, 6);
  });

  it('u_c = 32 nm, nu_eff = 16.7 truncated to 16, k = t_0.995(16) = 2.92, U99 = 93 nm (GUM H.1.5-H.1.6, from memory; scipy fixture to 1e-8)', () => {
    const c = s.combined;
    if (c === null) throw new Error('expected a combined uncertainty');
    expect(c.standardUncertainty ** 2).toBeCloseTo(h1.combinedVariance, 6);
    expectPublished(roundedUncertainty(c.standardUncertainty), 32, 0);
    expect(c.dof as number).toBeCloseTo(h1.nuEff, 8);
    expect(Math.abs((c.dof as number) - 16.7)).toBeLessThanOrEqual(0.1);
    expect(c.coverageFactor as number).toBeCloseTo(h1.t99AtTruncatedNu, 9);
    expectPublished(c.coverageFactor as number, 2.92, 0.005);
    expect(c.expandedUncertainty as number).toBeCloseTo(h1.expanded99, 6);
    expect(Math.abs((c.expandedUncertainty as number) - 93)).toBeLessThanOrEqual(1);
  });

  it('the budget: contributions 25, 5.8, 3.9, 6.7, 2.9 and 16.6 nm; alpha_s and theta enter with c = 0 (GUM Table H.1, from memory); shares add to one', () => {
    const c = s.combined;
    if (c === null) throw new Error('expected a combined uncertainty');
    const by = (quantity: string, component: string) => c.budget.find((r) => r.quantity === quantity && r.component.startsWith(component));
    expectPublished(Math.abs(by('l_s', 'value')?.contribution as number), 25, 0.05);
    expectPublished(Math.abs(by('d', 'Type A')?.contribution as number), 5.8, 0.05);
    expectPublished(Math.abs(by('d', 'random')?.contribution as number), 3.9, 0.05);
    expectPublished(Math.abs(by('d', 'systematic')?.contribution as number), 6.7, 0.05);
    expectPublished(Math.abs(by('delta_alpha', 'value')?.contribution as number), 2.9, 0.05);
    expectPublished(Math.abs(by('delta_theta', 'value')?.contribution as number), 16.6, 0.05);
    expect(by('alpha_s', 'value')?.contribution).toBe(0);
    expect(by('theta', 'value')?.contribution).toBe(0);
    expect(by('delta_theta', 'value')?.sensitivity as number).toBeCloseTo(-50_000_623 * 11.5e-6, 6);
    expect(by('d', 'Type A')?.dof).toBe(24);
    expect(by('d', 'systematic')?.dof).toBe(8);
    expect(c.budget.reduce((sum, r) => sum + (r.share as number), 0)).toBeCloseTo(1, 12);
  });
});

describe('shared reference: two channels with the same certificate component, and their difference as a derived result', () => {
  // Invented rig: two probes read in one bath against the same reference certificate (U = 0.02 K, k = 2).
  const shared: TypeBSpec = { name: 'reference certificate', kind: 'certificate', expanded: 0.02, coverageFactor: 2, shared: 'ref-cert' };
  const own: TypeBSpec = { name: 'immersion', kind: 'installation', halfWidth: 0.003 * Math.sqrt(3) };
  function run(expression: string, typeB: Record<string, TypeBSpec[]>): DerivedSnapshot {
    const compiled = compileWithConstants([{ name: 'r', expression }], [{ name: 'a' }, { name: 'b' }], 'derived', [[]]);
    if (!compiled.ok) throw new Error(compiled.problems.join('\n'));
    const engine = new DerivedEngine([{ compiled: compiled.compiled[0] as (typeof compiled.compiled)[number], target: null, confidence: 0.95, uncertainty: { channelTypeB: typeB, conformity: { limits: { lower: -0.05, upper: 0.05 }, rule: { kind: 'guarded', guardFactor: 1 } }, combinedTarget: null } }], { bucketSeconds: 1 });
    const random = new SeededRandom(11);
    for (let i = 0; i < 2001; i++) {
      engine.add(0, 1_764_000_000 + i, 30 + 0.01 * random.normal());
      engine.add(1, 1_764_000_000 + i, 30.002 + 0.01 * random.normal());
    }
    return engine.evaluate()[0] as DerivedSnapshot;
  }

  it('the difference a - b: the shared certificate cancels, and the budget shows its covariance term -2 (0.01)^2 (GUM 5.2.2, r = +1)', () => {
    const diff = run('a - b', { a: [shared, own], b: [shared, own] });
    const c = diff.combined;
    if (c === null) throw new Error('expected a combined uncertainty');
    const uA = diff.standardUncertainty as number;
    // what is left: the Type A part and the two immersion components (0.003 each)
    expect(c.standardUncertainty).toBeCloseTo(Math.sqrt(uA * uA + 2 * 0.003 ** 2), 12);
    const covariance = c.budget.filter((r) => r.evaluation === 'covariance' && r.shared === 'ref-cert');
    expect(covariance).toHaveLength(1);
    expect(covariance[0]?.contribution as number).toBeCloseTo(-2 * 0.01 * 0.01, 14);
    const certificateRows = c.budget.filter((r) => r.component === 'reference certificate');
    expect(certificateRows.map((r) => r.contribution)).toEqual([0.01, -0.01].map((v) => expect.closeTo(v, 14)));
    expect(c.budget.reduce((sum, r) => sum + (r.share as number), 0)).toBeCloseTo(1, 12);
    expect(diff.conformity?.verdict).toBe('pass');
    expect(diff.conformity?.probability as number).toBeGreaterThan(0.99);
  });

  it('the sum a + b gets the shared certificate in full, (2 x 0.01)^2; without the shared key the certificates would add as independent', () => {
    const sum = run('a + b', { a: [shared], b: [shared] });
    const uA = sum.standardUncertainty as number;
    expect(sum.combined?.standardUncertainty as number).toBeCloseTo(Math.sqrt(uA * uA + (2 * 0.01) ** 2), 12);
    const { shared: _s, ...independent } = shared;
    const diff = run('a - b', { a: [independent], b: [independent] });
    const uD = diff.standardUncertainty as number;
    expect(diff.combined?.standardUncertainty as number).toBeCloseTo(Math.sqrt(uD * uD + 2 * 0.01 ** 2), 12);
  });
});

describe('named constants: problems, one line each', () => {
  it('a constant named like a channel, and one name with two values', () => {
    const c = (name: string, value: number): DerivedConstant => ({ name, value, uncertainty: { name, kind: 'normal', standardUncertainty: 0.1 } });
    const result = compileWithConstants([{ name: 'x', expression: 'a * k' }, { name: 'y', expression: 'a * k' }], [{ name: 'a' }], 'derived', [[c('a', 1), c('k', 2)], [c('k', 3)]]);
    expect(result.ok).toBe(false);
    if (result.ok) return;
    expect(result.problems).toEqual(['derived[0].constants[0].name: "a" is also a channel name', 'derived[1].constants[0].name: "k" is defined again with another value or uncertainty (constants share one namespace)']);
  });
});
