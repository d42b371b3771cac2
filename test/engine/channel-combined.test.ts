import { describe, expect, it } from 'vitest';
import { feed } from '../helpers/feed.js';
import { lcgAr1 } from '../helpers/lcg-series.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import { ar1, quantise } from '../../src/sim/signal-families.js';
import { DEFAULT_UNCERTAINTY_SETTINGS, type UncertaintySettings } from '../../src/engine/channel-options.js';
import { coverageFactor } from '../../src/core/uncertainty/coverage-factor.js';
import type { TypeBSpec } from '../../src/core/uncertainty/type-b-component.js';

// The channel pipeline's combined uncertainty, stopping rule and conformity (src/engine/channel-combined.ts).
// Series: the Park-Miller AR(1) stream of test/helpers/lcg-series.ts (invented data: it is never a check value;
// the checks compare the snapshot with the formulas applied to the snapshot's own Type A numbers).

const certificate: TypeBSpec = { name: 'reference certificate', kind: 'certificate', expanded: 0.02, coverageFactor: 2 };
const bath: TypeBSpec = { name: 'bath uniformity', kind: 'stability', halfWidth: 0.01 * Math.sqrt(3), reliability: 0.25 };

function settings(over: Partial<UncertaintySettings>): UncertaintySettings {
  return { ...DEFAULT_UNCERTAINTY_SETTINGS, ...over };
}

function series(n: number, level = 30): Float64Array {
  const x = lcgAr1(7, 0.5, n);
  for (let i = 0; i < n; i++) x[i] = level + 0.05 * (x[i] as number);
  return x;
}

describe('channel snapshot: combined {u_c, nu_eff, k, U, budget}', () => {
  it('Type A from the pipeline plus the configured Type B: u_c, Welch-Satterthwaite nu_eff (GUM G.4.1), k = t_p(nu_eff), U; shares add to one', () => {
    const s = feed(series(4000), { uncertainty: settings({ typeB: [certificate, bath] }) }).snapshot();
    const c = s.combined;
    expect(c).not.toBeNull();
    if (c === null) return;
    const uA = s.standardUncertainty as number;
    const nuA = s.dof as number;
    // certificate: U / k = 0.01 (GUM 4.3.3); bath: a / sqrt 3 = 0.01 with nu = 8 from 25 % reliability (GUM G.4.2)
    const uc = Math.sqrt(uA * uA + 0.01 ** 2 + 0.01 ** 2);
    expect(c.standardUncertainty).toBeCloseTo(uc, 12);
    const nu = uc ** 4 / (uA ** 4 / nuA + 0.01 ** 4 / 8);
    expect(c.dof).toBeCloseTo(nu, 8);
    expect(c.coverageFactor).toBeCloseTo(coverageFactor(0.95, Math.floor(nu)) as number, 12);
    expect(c.expandedUncertainty).toBeCloseTo((c.coverageFactor as number) * uc, 12);
    expect(c.typeA.standardUncertainty).toBeCloseTo(uA, 14);
    expect(c.budget.map((r) => [r.component, r.evaluation, r.distribution])).toEqual([
      ['Type A: scatter of the readings (autocorrelation-aware)', 'A', 'normal'],
      ['reference certificate', 'B', 'normal'],
      ['bath uniformity', 'B', 'rectangular'],
    ]);
    expect(c.budget.reduce((sum, r) => sum + (r.share as number), 0)).toBeCloseTo(1, 12);
    expect(c.budget[2]?.dof).toBe(8);
    expect(c.budget[1]?.dof).toBeNull();
    expect(c.value).toBe(s.mean);
    expect(s.conformity).toBeNull();
  });

  it('no Type B configured: u_c is the Type A u; k at nu truncated to an integer (GUM G.4.1), so U differs from the Type A U in the last digits', () => {
    const s = feed(series(2000)).snapshot();
    expect(s.combined?.standardUncertainty).toBeCloseTo(s.standardUncertainty as number, 14);
    expect(s.combined?.coverageFactor).toBeCloseTo(coverageFactor(0.95, Math.floor(s.dof as number)) as number, 12);
    expect(s.combined?.expandedUncertainty).toBeCloseTo(s.expandedUncertainty as number, 5);
    expect(s.combined?.budget).toHaveLength(1);
    expect(s.combined?.stopping).toBeNull();
  });

  it('a correction estimate moves the value judged; conformity: verdict, guard band w = U and p_c', () => {
    const offset: TypeBSpec = { name: 'certificate correction', kind: 'certificate', expanded: 0.02, coverageFactor: 2, estimate: 0.1 };
    const s = feed(series(2000), { uncertainty: settings({ typeB: [offset], conformity: { limits: { lower: 29.8, upper: 30.12 }, rule: { kind: 'non-binary', guardFactor: 1 } } }) }).snapshot();
    const c = s.combined;
    const f = s.conformity;
    if (c === null || f === null) throw new Error('expected combined and conformity');
    expect(c.value).toBeCloseTo((s.mean as number) + 0.1, 12);
    expect(f.guardBand).toBeCloseTo(c.expandedUncertainty as number, 14);
    expect(f.value).toBe(c.value);
    // the value lies about 30.1, within 0.02 of the upper limit and U about 0.02: inside the tolerance, in the guard band
    const inTolerance = c.value <= 30.12;
    const inAcceptance = c.value <= 30.12 - (c.expandedUncertainty as number);
    expect(f.verdict).toBe(inAcceptance ? 'pass' : inTolerance ? 'conditional-pass' : c.value <= 30.12 + (c.expandedUncertainty as number) ? 'conditional-fail' : 'fail');
    expect(f.probability).toBeGreaterThan(0);
    expect(f.probability).toBeLessThan(1);
    expect(f.rule).toBe('non-binary');
  });
});

describe('the stopping rule u_A <= f u_c and the combined target in the verdict', () => {
  it('waits for the dominance rule with the samples to go, then stops; a Type A target it makes unnecessary is dropped', () => {
    const s = feed(series(400), { uncertainty: settings({ typeB: [certificate], dominanceFraction: 0.2 }) }).snapshot();
    const stop = s.combined?.stopping;
    expect(stop?.stop).toBe(false);
    expect(stop?.waitingFor).toBe('dominance');
    const pending = s.verdict.pending.find((p) => p.condition === 'stopping');
    expect(pending?.message).toMatch(/^waiting for the statistical part to stop mattering, u_A <= 0.2 u_c/);
    // u_A^2 (n) = V_A n0 / n: stops at n = n0 V_A (1 - f^2) / (f^2 V_B) (dominance-stop.ts)
    const uA = s.standardUncertainty as number;
    const expected = Math.ceil((400 * uA * uA * (1 - 0.04)) / (0.04 * 0.01 ** 2)) - 400;
    expect(stop?.samplesToStop).toBe(expected);
    const later = feed(series(400 + expected + 2000), { target: { value: 1e-6, relative: false, on: 'U' }, uncertainty: settings({ typeB: [certificate], dominanceFraction: 0.2 }) }).snapshot();
    expect(later.combined?.stopping?.stop).toBe(true);
    expect(later.combined?.stopping?.reason).toBe('dominance');
    expect(later.verdict.pending.map((p) => p.condition)).not.toContain('target');
    expect(later.verdict.pending.map((p) => p.condition)).not.toContain('stopping');
  });

  it('the summary (what test-point readiness reads) carries the same verdict, u_c and conformity as the snapshot', () => {
    const options = { uncertainty: settings({ typeB: [certificate], dominanceFraction: 0.2, conformity: { limits: { lower: 29, upper: 31 }, rule: { kind: 'simple' as const } } }) };
    const pipeline = feed(series(400), options);
    const snapshot = pipeline.snapshot();
    const summary = pipeline.summary();
    expect(summary.verdict).toEqual(snapshot.verdict);
    expect(summary.combined?.standardUncertainty).toBe(snapshot.combined?.standardUncertainty);
    expect(summary.combined?.stopping).toEqual(snapshot.combined?.stopping);
    expect(summary.conformity).toEqual({ rule: 'simple', verdict: snapshot.conformity?.verdict, probability: snapshot.conformity?.probability });
    // nothing configured: the summary stays as it was
    expect(feed(series(400)).summary().combined).toBeUndefined();
  });

  it('a combined target that cannot be met (Type B alone exceeds it) says so; a reachable one is waited for', () => {
    const unreachable = feed(series(400), { uncertainty: settings({ typeB: [certificate], combinedTarget: { value: 0.009, relative: false, on: 'u' } }) }).snapshot();
    expect(unreachable.combined?.stopping?.waitingFor).toBeNull();
    expect(unreachable.verdict.pending.find((p) => p.condition === 'stopping')?.message).toMatch(/cannot be met.*Type B components alone exceed the target/);
    const reachable = feed(series(400), { uncertainty: settings({ typeB: [certificate], combinedTarget: { value: 0.0102, relative: false, on: 'u' }, dominanceFraction: 0.05 }) }).snapshot();
    expect(reachable.combined?.stopping?.waitingFor).toBe('target');
    expect(reachable.verdict.pending.find((p) => p.condition === 'stopping')?.message).toMatch(/^waiting for the combined target u <= 0.0102/);
  });
});

describe('readings on a lattice: the resolution component proposed', () => {
  it('a coarse lattice adds a rectangular component step / sqrt(12), marked proposed (GUM F.2.2.1); a configured one or proposeResolution: false replaces it', () => {
    const random = new SeededRandom(5);
    const x = ar1(random, 0.5, 2000, { sigma: 0.25 * Math.sqrt(1 - 0.25) });
    for (let i = 0; i < x.length; i++) x[i] = (x[i] as number) + 20.3;
    const readings = quantise(x, 0.5);
    const s = feed(readings).snapshot();
    const row = s.combined?.budget.find((r) => r.proposed);
    expect(row?.kind).toBe('resolution');
    expect(row?.standardUncertainty).toBeCloseTo(0.5 / Math.sqrt(12), 9);
    expect(s.combined?.notes.some((n) => n.includes('proposed because the readings lie on a lattice'))).toBe(true);
    const off = feed(readings, { uncertainty: settings({ proposeResolution: false }) }).snapshot();
    expect(off.combined?.budget).toHaveLength(1);
    const configured = feed(readings, { uncertainty: settings({ typeB: [{ name: 'display', kind: 'resolution', step: 0.5 }] }) }).snapshot();
    expect(configured.combined?.budget.filter((r) => r.kind === 'resolution').map((r) => r.proposed)).toEqual([false]);
  });

  it('a constant window (every reading equal) still gets a combined uncertainty from its Type B components', () => {
    const s = feed(new Float64Array(100).fill(20.5), { uncertainty: settings({ typeB: [{ name: 'display', kind: 'resolution', step: 0.1 }] }) }).snapshot();
    expect(s.combined?.standardUncertainty).toBeCloseTo(0.1 / Math.sqrt(12), 12);
    expect(s.combined?.dof).toBeNull();
  });
});

describe('Monte Carlo: a channel on a lattice, through the pipeline snapshot (seeded)', () => {
  // An AR(1) process (phi 0.5, marginal sd a quarter of the step) read through an indication of resolution 1, the
  // true mean uniform within a step (the state of knowledge the rectangular resolution component describes, GUM
  // F.2.2.1), as test/core/uncertainty/lattice-coverage.test.ts does with the core functions; here the proposed
  // component and the combined interval are the snapshot's own (`combined`), with no configuration at all.
  // 400 replicates: the Monte Carlo standard error of a coverage near 0.95 is sqrt(0.95 x 0.05 / 400) = 0.011.
  it('the resolution component is proposed in every replicate; combined coverage >= 0.93 where the Type A interval falls short', () => {
    const replicates = 400;
    let proposed = 0;
    let coveredA = 0;
    let coveredCombined = 0;
    for (let r = 0; r < replicates; r++) {
      const random = new SeededRandom(92_000 + r);
      const trueMean = 20 + random.uniform();
      const x = ar1(random, 0.5, 1000, { sigma: 0.25 * Math.sqrt(1 - 0.25) });
      for (let i = 0; i < x.length; i++) x[i] = (x[i] as number) + trueMean;
      const s = feed(quantise(x, 1)).snapshot();
      if (s.combined?.budget.some((b) => b.proposed && b.kind === 'resolution')) proposed++;
      const error = Math.abs((s.mean as number) - trueMean);
      if (error <= (s.expandedUncertainty as number)) coveredA++;
      if (error <= (s.combined?.expandedUncertainty as number)) coveredCombined++;
    }
    console.log(`lattice channel through the pipeline: proposed ${proposed}/${replicates}; coverage Type A ${(coveredA / replicates).toFixed(3)}, combined ${(coveredCombined / replicates).toFixed(3)}`);
    expect(proposed).toBe(replicates);
    expect(coveredCombined / replicates).toBeGreaterThanOrEqual(0.93);
    expect(coveredA / replicates).toBeLessThan(0.93);
  });
});

describe('the conformity-changed event', () => {
  it('is raised once the steady channel is judged, and again when the outcome changes; the same samples give the same events', () => {
    // a level that steps from inside the limits to beyond them: pass, then (after the break and the new steady state) fail
    // (the regain after a break needs twice the evidence of the first verdict: 24,000 samples after the step)
    const n = 6000;
    const x = series(5 * n);
    for (let i = n; i < 5 * n; i++) x[i] = (x[i] as number) + 1;
    const options = { detectors: true, uncertainty: settings({ typeB: [certificate], conformity: { limits: { lower: 29.5, upper: 30.5 }, rule: { kind: 'simple' as const } } }) };
    const events = (values: Float64Array) => {
      const pipeline = feed(values, options);
      return pipeline.snapshot().events.filter((e) => e.kind === 'conformity-changed');
    };
    const first = events(x.slice(0, n));
    expect(first.map((e) => (e as { verdict: string }).verdict)).toEqual(['pass']);
    const both = events(x);
    expect(both.map((e) => [(e as { verdict: string }).verdict, (e as { previous: string | null }).previous])).toEqual([
      ['pass', null],
      ['fail', null], // forgotten when stationarity was lost: judged afresh
    ]);
    const all = feed(x, options).snapshot().events;
    // judged while steady: the second outcome comes no earlier than the regained verdict
    const regained = all.find((e) => e.kind === 'stationarity-regained');
    expect(regained).toBeDefined();
    expect((both[1] as { at: number }).at).toBeGreaterThanOrEqual((regained as { at: number }).at);
    expect(both).toEqual(events(x));
  });
});
