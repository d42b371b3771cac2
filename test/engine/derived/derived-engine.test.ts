import { describe, expect, it } from 'vitest';
import { compileDerivedSet, type ChannelDeclaration } from '../../../src/engine/derived/expression-model.js';
import { DerivedEngine, seriesAtLeast, seriesAtMost, type DerivedResultSpec, type DerivedSnapshot } from '../../../src/engine/derived/derived-engine.js';
import { multivariateBatchMeans, multivariateEss } from '../../../src/core/multivariate/multivariate-batch-means.js';
import { sampleCovariance } from '../../../src/core/multivariate/sample-covariance.js';
import { propagateJointly, propagateUncertainty } from '../../../src/core/propagation/gum-propagation.js';
import { coverageFactor } from '../../../src/core/uncertainty/coverage-factor.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import { readFixture } from '../../helpers/reference.js';
import { correlatedRows } from './correlated-channels.js';

const ABC: ChannelDeclaration[] = [{ name: 'a' }, { name: 'b' }, { name: 'c' }];

function specs(definitions: { name: string; expression: string }[], channels = ABC, confidence = 0.95): DerivedResultSpec[] {
  return compileDerivedSet(definitions, channels, 'derived').map((compiled) => ({ compiled, target: null, confidence }));
}

/** Feeds rows sampled together at time = t0 + i * dt (channel order a, b, c). */
function feedTogether(engine: DerivedEngine, columns: Float64Array[], t0 = 1_764_000_000, dt = 0.1): void {
  const n = (columns[0] as Float64Array).length;
  for (let i = 0; i < n; i++) columns.forEach((column, c) => engine.add(c, t0 + i * dt, column[i] as number));
}

function relative(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.max(Math.abs(expected), Number.MIN_VALUE);
}

describe('DerivedEngine against a direct batch computation on the same samples', () => {
  // Channels sampled together at 10 Hz: one row per sample, so the direct computation below works
  // on the raw samples. Reference: multivariate batch means (Vats, Flegal & Jones 2019, as
  // multivariateBatchMeans, itself checked against mcmcse in test/core/multivariate) and the law of
  // propagation with correlated inputs (JCGM 100:2008 5.2, eq. (13), as propagateUncertainty,
  // checked against GUM H.2 in test/core/propagation).
  const n = 1500;
  const columns = correlatedRows(new SeededRandom(2024), n);
  const definitions = [
    { name: 'L', expression: 'a - b + 0.5 * c' },
    { name: 'N', expression: 'a * (b - c)' },
  ];
  const engine = new DerivedEngine(specs(definitions));
  feedTogether(engine, columns);
  const [l, nl] = engine.evaluate() as [DerivedSnapshot, DerivedSnapshot];
  // The newest bucket stays open until a later sample arrives: n - 1 rows.
  const m = n - 1;

  it('one row per sample, bucket width 0.1 s (channels sampled together: the 1-2-5 value at the interval)', () => {
    expect(engine.bucketSeconds).toBe(0.1);
    expect(l.rows).toBe(m);
    expect(l.counts.incompleteBuckets).toBe(0);
    expect(l.estimator).toBe('batch-means');
  });

  it('value, u, nu = a - 1, k, U, budget, mESS and the correlation of the results agree to round-off', () => {
    const rows = new Float64Array(m * 3);
    for (let i = 0; i < m; i++) for (let c = 0; c < 3; c++) rows[i * 3 + c] = (columns[c] as Float64Array)[i] as number;
    const batch = multivariateBatchMeans(rows, m, 3, { batchSize: l.batchSize as number });
    const values = { a: batch.means[0] as number, b: batch.means[1] as number, c: batch.means[2] as number };
    const compiled = compileDerivedSet(definitions, ABC, 'derived');
    const jacobian = new Float64Array(6);
    // Round-off: the engine accumulates shifted bucket means in a dyadic pyramid (anchors moved
    // every 64+ rows), the direct path sums deviations from the two-pass mean; with n = 1500 rows
    // the sums differ by a few hundred ulps at most, so 1e-11 relative is round-off, not method.
    const tolerance = 1e-11;
    [l, nl].forEach((snapshot, r) => {
      const model = compiled[r] as (typeof compiled)[number];
      const sensitivities = model.sensitivities(values);
      jacobian.set(sensitivities, r * 3);
      const direct = propagateUncertainty({ values: batch.means, covariance: batch.meanCovariance, sensitivities, confidence: 0.95 });
      expect(relative(snapshot.value as number, model.evaluate(values))).toBeLessThan(tolerance);
      expect(relative(snapshot.standardUncertainty as number, direct.standardUncertainty)).toBeLessThan(tolerance);
      expect(snapshot.batches).toBe(batch.batches);
      expect(snapshot.dof).toBe(batch.batches - 1);
      expect(snapshot.coverageFactor).toBe(coverageFactor(0.95, batch.batches - 1));
      expect(relative(snapshot.expandedUncertainty as number, (coverageFactor(0.95, batch.batches - 1) as number) * direct.standardUncertainty)).toBeLessThan(tolerance);
      snapshot.budget.forEach((entry, i) => {
        expect(relative(entry.contribution, (direct.budget[i] as { contribution: number }).contribution)).toBeLessThan(tolerance);
      });
      // The shares including the covariance terms add to 1 (Euler allocation of c^T U c).
      expect(Math.abs(snapshot.budget.reduce((s, e) => s + (e.share as number), 0) - 1)).toBeLessThan(1e-12);
    });
    const joint = propagateJointly(batch.means, batch.meanCovariance, jacobian);
    expect(Math.abs((l.correlation.N as number) - (joint.correlation[1] as number))).toBeLessThan(1e-11);
    expect(nl.correlation.L).toBe(l.correlation.N);
    const lambda = sampleCovariance(rows, m, 3).covariance;
    const mess = multivariateEss(m, lambda, batch.covariance, 3) as number;
    expect(relative(l.multivariateEss as number, mess)).toBeLessThan(1e-9); // through two log-determinants
  });

  it('the interval as if uncorrelated uses the diagonal and Welch-Satterthwaite, nu_eff = u^4 / sum (c_i u_i)^4 / nu_i (JCGM 100:2008 G.2b)', () => {
    const independent = l.independent as NonNullable<DerivedSnapshot['independent']>;
    const nu = (l.dof as number);
    const contributions = l.budget.map((e) => e.contribution);
    const u2 = contributions.reduce((s, c) => s + c * c, 0);
    expect(relative(independent.standardUncertainty, Math.sqrt(u2))).toBeLessThan(1e-13);
    expect(relative(independent.dof as number, (u2 * u2) / contributions.reduce((s, c) => s + c ** 4 / nu, 0))).toBeLessThan(1e-12);
    // With these correlations (r_ab = 0.8 in the innovations) ignoring them overstates u for a - b + c/2.
    expect(independent.standardUncertainty).toBeGreaterThan(1.3 * (l.standardUncertainty as number));
  });
});

describe('DerivedEngine buckets', () => {
  it('the rows do not depend on how the channels interleave (each channel in its own order)', () => {
    const columns = correlatedRows(new SeededRandom(7), 400);
    const together = new DerivedEngine(specs([{ name: 'L', expression: 'a - b + 0.5 * c' }]));
    feedTogether(together, columns);
    const shuffled = new DerivedEngine(specs([{ name: 'L', expression: 'a - b + 0.5 * c' }]));
    const random = new SeededRandom(8);
    const cursor = [0, 0, 0];
    // Channel a runs up to 40 samples ahead of the others, as separate messages might.
    while (cursor.some((k) => k < 400)) {
      const c = random.integer(3);
      const k = cursor[c] as number;
      if (k >= 400) continue;
      if (c !== 0 && k > (cursor[0] as number) + 5 && (cursor[0] as number) < 400) continue;
      shuffled.add(c, 1_764_000_000 + k * 0.1, (columns[c] as Float64Array)[k] as number);
      cursor[c] = k + 1;
    }
    expect(shuffled.evaluate()).toEqual(together.evaluate());
  });

  it('channels at 10 Hz and 4 Hz out of phase pair up in common buckets of 0.5 s (1.5 x the slowest interval, up to the 1-2-5 series)', () => {
    const fast: [number, number][] = [];
    const slow: [number, number][] = [];
    const random = new SeededRandom(11);
    for (let i = 0; i < 2000; i++) fast.push([100 + i * 0.1 + 0.013, 20 + random.normal()]);
    for (let i = 0; i < 800; i++) slow.push([100 + i * 0.25 + 0.071, 5 + random.normal()]);
    const engine = new DerivedEngine(specs([{ name: 'd', expression: 'a - b' }], [{ name: 'a' }, { name: 'b' }]));
    let f = 0;
    let s = 0;
    while (f < fast.length || s < slow.length) {
      if (s >= slow.length || (f < fast.length && (fast[f] as [number, number])[0] <= (slow[s] as [number, number])[0])) engine.add(0, ...(fast[f++] as [number, number]));
      else engine.add(1, ...(slow[s++] as [number, number]));
    }
    expect(engine.bucketSeconds).toBe(0.5);
    // Direct: bucket means over floor(t / 0.5); a bucket is a row when both channels have a sample,
    // and the last bucket is still open.
    const sums = new Map<number, [number, number, number, number]>();
    for (const [t, v] of fast) {
      const k = Math.floor(t / 0.5);
      const e = sums.get(k) ?? [0, 0, 0, 0];
      e[0] += v;
      e[1]++;
      sums.set(k, e);
    }
    for (const [t, v] of slow) {
      const k = Math.floor(t / 0.5);
      const e = sums.get(k) ?? [0, 0, 0, 0];
      e[2] += v;
      e[3]++;
      sums.set(k, e);
    }
    const last = Math.max(...sums.keys());
    const rows = [...sums.entries()].filter(([k, e]) => k < last && e[1] > 0 && e[3] > 0).sort((x, y) => x[0] - y[0]);
    const snapshot = engine.evaluate()[0] as DerivedSnapshot;
    expect(snapshot.rows).toBe(rows.length);
    expect(snapshot.counts.incompleteBuckets).toBe(0);
    const meanA = rows.reduce((acc, [, e]) => acc + e[0] / e[1], 0) / rows.length;
    const meanB = rows.reduce((acc, [, e]) => acc + e[2] / e[3], 0) / rows.length;
    expect(relative(snapshot.value as number, meanA - meanB)).toBeLessThan(1e-12);
  });

  it('1-2-5 series bounds', () => {
    expect([seriesAtMost(0.101), seriesAtMost(0.3), seriesAtMost(1), seriesAtMost(7), seriesAtMost(0.0999999)]).toEqual([0.1, 0.2, 1, 5, 0.05]);
    expect([seriesAtLeast(0.15), seriesAtLeast(0.375), seriesAtLeast(1.5), seriesAtLeast(2), seriesAtLeast(0.2000001)]).toEqual([0.2, 0.5, 2, 2, 0.5]);
  });

  it('a window longer than maxBuckets is kept whole by merging pairs of rows: same means, width doubled', () => {
    const columns = correlatedRows(new SeededRandom(12), 1024);
    const engine = new DerivedEngine(specs([{ name: 'L', expression: 'a - b + 0.5 * c' }]), { maxBuckets: 64 });
    feedTogether(engine, columns, 0, 1);
    const snapshot = engine.evaluate()[0] as DerivedSnapshot;
    // 1023 final rows (the last bucket is open) -> merged 4 times (64 * 2^4 = 1024): width 16 s.
    expect(snapshot.counts.merges).toBe(4);
    expect(snapshot.bucketSeconds).toBe(16);
    // The mean of merged pairs is the mean of the rows merged; only the open tail is missing.
    const means = columns.map((column) => {
      let sum = 0;
      const used = snapshot.rows * 16;
      for (let i = 0; i < used; i++) sum += column[i] as number;
      return sum / used;
    });
    expect(relative(snapshot.value as number, (means[0] as number) - (means[1] as number) + 0.5 * (means[2] as number))).toBeLessThan(1e-12);
    expect(snapshot.notes.join(' ')).toMatch(/merged in pairs 4 time/);
  });
});

describe('DerivedEngine estimators', () => {
  interface Fixture {
    gumH2: { observations: { V: number[]; I_mA: number[]; phi: number[] }; approach1: Record<'R' | 'X' | 'Z' | 'uR' | 'uX' | 'uZ' | 'rRX' | 'rRZ' | 'rXZ', number> };
  }
  const h2 = readFixture<Fixture>('derived-propagation.json').gumH2;

  it('five sets of simultaneous observations: the default falls back to independent rows and says so; GUM H.2 approach 1 (Table H.3) is reproduced', () => {
    // JCGM 100:2008 H.2 (R, X, Z from V, I, phi; Table H.2 data): expected values recomputed from the
    // raw data by test/fixtures/reference/scripts/derived-references.py (published digits from
    // memory, DERIVED-REFERENCES.md section 1: u(R) 0.071, u(X) 0.295, u(Z) 0.236, r -0.588,
    // -0.485, 0.993).
    const channels = [{ name: 'V' }, { name: 'I_mA' }, { name: 'phi' }];
    const engine = new DerivedEngine(
      specs(
        [
          { name: 'R', expression: 'V / (I_mA / 1000) * cos(phi)' },
          { name: 'X', expression: 'V / (I_mA / 1000) * sin(phi)' },
          { name: 'Z', expression: 'V / (I_mA / 1000)' },
        ],
        channels,
      ),
    );
    const { V, I_mA, phi } = h2.observations;
    for (let k = 0; k < 5; k++) {
      engine.add(0, k, V[k] as number);
      engine.add(1, k, I_mA[k] as number);
      engine.add(2, k, phi[k] as number);
    }
    // The last set closes when a later sample arrives: one more time step closes bucket 4.
    for (let c = 0; c < 3; c++) engine.add(c, 5, 0);
    const [r, x, z] = engine.evaluate() as [DerivedSnapshot, DerivedSnapshot, DerivedSnapshot];
    expect(r.rows).toBe(5);
    expect(r.estimator).toBe('iid');
    expect(r.notes.join(' ')).toMatch(/treated as independent observations \(GUM 4\.2\)/);
    expect(r.dof).toBe(4);
    expect(r.dofMethod).toBe('observations');
    const a1 = h2.approach1;
    // Same formula, same data: agreement to round-off (1e-12 relative).
    expect(relative(r.value as number, a1.R)).toBeLessThan(1e-12);
    expect(relative(x.value as number, a1.X)).toBeLessThan(1e-12);
    expect(relative(z.value as number, a1.Z)).toBeLessThan(1e-12);
    expect(relative(r.standardUncertainty as number, a1.uR)).toBeLessThan(1e-10);
    expect(relative(x.standardUncertainty as number, a1.uX)).toBeLessThan(1e-10);
    expect(relative(z.standardUncertainty as number, a1.uZ)).toBeLessThan(1e-10);
    expect(Math.abs((r.correlation.X as number) - a1.rRX)).toBeLessThan(1e-10);
    expect(Math.abs((r.correlation.Z as number) - a1.rRZ)).toBeLessThan(1e-10);
    expect(Math.abs((x.correlation.Z as number) - a1.rXZ)).toBeLessThan(1e-10);
    // The published rounded values (from memory), at their printed precision.
    expect(Math.abs((r.standardUncertainty as number) - 0.071)).toBeLessThan(0.0005);
    expect(Math.abs((z.standardUncertainty as number) - 0.236)).toBeLessThan(0.0005);
  });

  it("estimator 'iid' on many rows: covariance of the means = sample covariance / m (GUM 5.2.3 eq. (17)), nu = m - 1", () => {
    const columns = correlatedRows(new SeededRandom(13), 600);
    const engine = new DerivedEngine(specs([{ name: 'L', expression: 'a - b + 0.5 * c' }]), { estimator: 'iid' });
    feedTogether(engine, columns);
    const snapshot = engine.evaluate()[0] as DerivedSnapshot;
    const m = snapshot.rows;
    expect(m).toBe(599);
    const z = new Float64Array(m);
    for (let i = 0; i < m; i++) z[i] = ((columns[0] as Float64Array)[i] as number) - ((columns[1] as Float64Array)[i] as number) + 0.5 * ((columns[2] as Float64Array)[i] as number);
    const mean = z.reduce((s, v) => s + v, 0) / m;
    const variance = z.reduce((s, v) => s + (v - mean) ** 2, 0) / (m - 1);
    expect(snapshot.estimator).toBe('iid');
    expect(snapshot.dof).toBe(m - 1);
    // For a linear model u^2 = s^2(z) / m exactly (GUM H.2.4, approach 2, gives the same).
    expect(relative(snapshot.standardUncertainty as number, Math.sqrt(variance / m))).toBeLessThan(1e-10);
  });

  it('a derived result that cannot be evaluated at the means says why; the others are unaffected', () => {
    const engine = new DerivedEngine(specs([{ name: 'ratio', expression: 'a / (b - b)' }, { name: 'sum', expression: 'a + b' }], [{ name: 'a' }, { name: 'b' }]));
    const random = new SeededRandom(1);
    for (let i = 0; i < 200; i++) {
      engine.add(0, i, random.normal());
      engine.add(1, i, random.normal());
    }
    const [ratio, sum] = engine.evaluate() as [DerivedSnapshot, DerivedSnapshot];
    expect(ratio.ready).toBe(false);
    expect(ratio.value).toBeNull();
    expect(ratio.notes.join(' ')).toMatch(/cannot be evaluated at the channel means: division by zero/);
    expect(sum.ready).toBe(true);
    expect(sum.correlation).toEqual({});
  });

  it('results that are exact multiples of one another have correlation -1 or +1 (GUM eq. (14))', () => {
    const columns = correlatedRows(new SeededRandom(14), 300);
    const engine = new DerivedEngine(specs([{ name: 'p', expression: 'a - b' }, { name: 'q', expression: '2 * (b - a)' }, { name: 'r', expression: '3 * a - 3 * b' }]));
    feedTogether(engine, columns.slice(0, 2));
    const [p] = engine.evaluate() as [DerivedSnapshot];
    expect(p.correlation.q).toBeCloseTo(-1, 12);
    expect(p.correlation.r).toBeCloseTo(1, 12);
  });
});
