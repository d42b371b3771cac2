import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { minimumEss, multivariateBatchMeans, multivariateEss } from '../../../src/core/multivariate/multivariate-batch-means.js';
import { sampleCovariance } from '../../../src/core/multivariate/sample-covariance.js';
import { cholesky } from '../../../src/core/multivariate/cholesky.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import { ROOT, readFixture, relativeDifference, sharedReferenceAvailable } from '../../helpers/reference.js';

interface Case {
  batchSize: number;
  lugsail: boolean;
  lugsailRatio: number;
  lugsailUsed: boolean;
  batches: number;
  covariance: number[];
  multivariateEss: number;
}
interface Fixture {
  input: { csv: string; rows: number; columns: number; A: number[]; sigmaInnovations: number[] };
  expected: { means: number[]; sampleCovariance: number[]; cases: Case[]; minimumEss: Record<string, number> };
  theory: { stationaryCovariance: number[]; longRunCovariance: number[]; firstMomentSum: number[] };
  tolerance: { relative: number };
}

const fixture = readFixture<Fixture>('multivariate-batch-means-var1.json');

function readSeries(): { rows: Float64Array; n: number; p: number } {
  const text = readFileSync(join(ROOT, 'test', 'fixtures', 'reference', fixture.input.csv), 'utf8');
  const lines = text.trim().split('\n').slice(1);
  const p = fixture.input.columns;
  const rows = new Float64Array(lines.length * p);
  lines.forEach((line, t) => line.split(',').forEach((cell, i) => (rows[t * p + i] = Number(cell))));
  return { rows, n: lines.length, p };
}

const series = readSeries();

describe('multivariateBatchMeans', () => {
  it('reads the committed VAR(1) series whole', () => {
    expect(series.n).toBe(fixture.input.rows);
  });

  // Source: test/fixtures/reference/scripts/multivariate_batch_means_var1.py, a numpy
  // re-implementation of mcmcse 1.5-0 mcse.multi(method = "bm", r, size = b) (R mcmcse is not in
  // Debian). Same double-precision arithmetic in a different summation order: 1e-10 relative.
  for (const expected of fixture.expected.cases) {
    const label = `b = ${expected.batchSize}${expected.lugsail ? `, lugsail r = ${expected.lugsailRatio}` : ''}`;
    it(`matches the numpy mcmcse re-implementation (${label})`, () => {
      const result = multivariateBatchMeans(series.rows, series.n, series.p, {
        batchSize: expected.batchSize,
        lugsail: expected.lugsail,
        lugsailRatio: expected.lugsailRatio,
      });
      expect(result.batches).toBe(expected.batches);
      expect(result.lugsailUsed).toBe(expected.lugsailUsed);
      expect(relativeDifference(result.covariance, expected.covariance)).toBeLessThan(fixture.tolerance.relative);
      const meanCovariance = expected.covariance.map((v) => v / series.n);
      expect(relativeDifference(result.meanCovariance, meanCovariance)).toBeLessThan(fixture.tolerance.relative);
      expect(relativeDifference(result.means, fixture.expected.means)).toBeLessThan(1e-14);
      expect(result.positiveDefinite).toBe(true);
      const lambda = sampleCovariance(series.rows, series.n, series.p).covariance;
      const ess = multivariateEss(series.n, lambda, result.covariance, series.p);
      expect(ess).not.toBeNull();
      expect(Math.abs((ess as number) - expected.multivariateEss) / expected.multivariateEss).toBeLessThan(fixture.tolerance.relative);
    });
  }

  it('sample covariance (divisor n - 1) matches numpy.cov on the committed series', () => {
    const lambda = sampleCovariance(series.rows, series.n, series.p).covariance;
    expect(relativeDifference(lambda, fixture.expected.sampleCovariance)).toBeLessThan(1e-12);
  });

  it('default batch size is floor(sqrt(n)) (mcmcse size = "sqroot")', () => {
    const result = multivariateBatchMeans(series.rows, series.n, series.p);
    expect(result.batchSize).toBe(Math.floor(Math.sqrt(series.n)));
    expect(result.batches).toBe(Math.floor(series.n / result.batchSize));
    expect(result.lugsailUsed).toBe(false);
  });

  // Statistical check against the model: the committed series is one VAR(1) path of n = 5000 with
  // b = 70 (a = 71 batches). Sigma-hat is then close to a Wishart matrix with a - 1 degrees of
  // freedom, sd(Sigma_ij) = sqrt((Sigma_ij^2 + Sigma_ii Sigma_jj) / (a - 1)); the batch-means bias is
  // about -Gamma_1 (a + 1) / (a b) (Gamma_1 = sum_k |k| R(k), from the script). Tolerance: the bias
  // plus 4 sd (a 4-sd miss has probability below 1e-4 per element for a normal estimate).
  it('is within 4 Wishart sd of the VAR(1) long-run covariance (I - A)^-1 Sigma_e (I - A)^-T (theory from the script)', () => {
    const b = 70;
    const result = multivariateBatchMeans(series.rows, series.n, series.p, { batchSize: b });
    const a = result.batches;
    const sigma = fixture.theory.longRunCovariance;
    const gamma1 = fixture.theory.firstMomentSum;
    const p = series.p;
    for (let i = 0; i < p; i++) {
      for (let j = 0; j < p; j++) {
        const k = i * p + j;
        const expected = (sigma[k] as number) - ((gamma1[k] as number) * (a + 1)) / (a * b);
        const sd = Math.sqrt(((sigma[k] as number) ** 2 + (sigma[i * p + i] as number) * (sigma[j * p + j] as number)) / (a - 1));
        expect(Math.abs((result.covariance[k] as number) - expected)).toBeLessThan(4 * sd);
      }
    }
  });

  // Statistical check with many replicates (seeded, generated here): the mean of Sigma-hat over R
  // independent VAR(1) paths must equal E[Sigma_b] = Sigma - Gamma_1 (a + 1) / (a b) (batch means
  // with n = a b: a Var(batch mean) - a Var(mean), with Var(mean of m rows) = Sigma / m -
  // Gamma_1 / m^2 up to O(rho^m) terms), and the lugsail mean must equal
  // 2 E[Sigma_b] - E[Sigma_(b/3)] = Sigma + Gamma_1 / b to first order (r = 3, c = 1/2 over-corrects
  // by design; r = 2 would cancel the bias). Tolerance: 4 standard errors of the replicate mean (the
  // sample sd over replicates / sqrt(R)), plus 0.5 % of sqrt(Sigma_ii Sigma_jj) for the terms left
  // out. R = 300 paths of n = 4900 take about 1 s. A numpy run of the same check with R = 2000
  // (not committed) gave a mean 1.7 standard errors below the formula for Sigma_11.
  it('replicate mean of Sigma-hat equals Sigma - Gamma_1 (a + 1) / (a b), lugsail 2 Sigma_b - Sigma_(b/3) its counterpart (VAR(1) theory)', () => {
    const p = 3;
    const n = 4900;
    const b = 70;
    const replicates = 300;
    const A = fixture.input.A;
    const chol = cholesky(fixture.input.sigmaInnovations, p);
    expect(chol).not.toBeNull();
    const L = (chol as { factor: Float64Array }).factor;
    const stationary = cholesky(fixture.theory.stationaryCovariance, p) as { factor: Float64Array };
    const random = new SeededRandom(9);
    const rows = new Float64Array(n * p);
    const plainSum = new Float64Array(p * p);
    const plainSquares = new Float64Array(p * p);
    const lugsailSum = new Float64Array(p * p);
    const lugsailSquares = new Float64Array(p * p);
    const y = new Float64Array(p);
    const next = new Float64Array(p);
    const z = new Float64Array(p);
    for (let r = 0; r < replicates; r++) {
      for (let i = 0; i < p; i++) z[i] = random.normal();
      for (let i = 0; i < p; i++) {
        let s = 0;
        for (let k = 0; k <= i; k++) s += (stationary.factor[i * p + k] as number) * (z[k] as number);
        y[i] = s;
      }
      for (let t = 0; t < n; t++) {
        for (let i = 0; i < p; i++) rows[t * p + i] = y[i] as number;
        for (let i = 0; i < p; i++) z[i] = random.normal();
        for (let i = 0; i < p; i++) {
          let s = 0;
          for (let k = 0; k < p; k++) s += (A[i * p + k] as number) * (y[k] as number);
          for (let k = 0; k <= i; k++) s += (L[i * p + k] as number) * (z[k] as number);
          next[i] = s;
        }
        y.set(next);
      }
      const plain = multivariateBatchMeans(rows, n, p, { batchSize: b }).covariance;
      const lugsail = multivariateBatchMeans(rows, n, p, { batchSize: b, lugsail: true });
      for (let k = 0; k < p * p; k++) {
        plainSum[k] = (plainSum[k] as number) + (plain[k] as number);
        plainSquares[k] = (plainSquares[k] as number) + (plain[k] as number) ** 2;
        lugsailSum[k] = (lugsailSum[k] as number) + (lugsail.covariance[k] as number);
        lugsailSquares[k] = (lugsailSquares[k] as number) + (lugsail.covariance[k] as number) ** 2;
      }
    }
    const sigma = fixture.theory.longRunCovariance;
    const gamma1 = fixture.theory.firstMomentSum;
    const expectedPlain = (k: number, batch: number, batches: number) => (sigma[k] as number) - ((gamma1[k] as number) * (batches + 1)) / (batches * batch);
    const small = Math.floor(b / 3);
    for (let i = 0; i < p; i++) {
      for (let j = 0; j < p; j++) {
        const k = i * p + j;
        const slack = 0.005 * Math.sqrt((sigma[i * p + i] as number) * (sigma[j * p + j] as number));
        const plainMean = (plainSum[k] as number) / replicates;
        const plainSe = Math.sqrt(((plainSquares[k] as number) / replicates - plainMean ** 2) / (replicates - 1));
        expect(Math.abs(plainMean - expectedPlain(k, b, n / b))).toBeLessThan(4 * plainSe + slack);
        const lugsailMean = (lugsailSum[k] as number) / replicates;
        const lugsailSe = Math.sqrt(((lugsailSquares[k] as number) / replicates - lugsailMean ** 2) / (replicates - 1));
        const expectedLugsail = 2 * expectedPlain(k, b, n / b) - expectedPlain(k, small, Math.floor(n / small));
        expect(Math.abs(lugsailMean - expectedLugsail)).toBeLessThan(4 * lugsailSe + slack);
      }
    }
  });

  // Translation invariance at NIST StRD NumAcc4 scale (offset 1e7; common practice): the series is
  // made of multiples of 2^-10, so adding 1e7 (< 2^24) is exact and the covariance must not change
  // beyond round-off of the spread (1e-13 relative; without the shift by the first row the rounding
  // of a mean near 1e7, about 1e-9, reaches every deviation).
  it('is unchanged to 1e-13 when 1e7 is added to every value (exactly representable data)', () => {
    const n = 2000;
    const p = 2;
    const random = new SeededRandom(17);
    const small = new Float64Array(n * p);
    const large = new Float64Array(n * p);
    let x = 0;
    for (let t = 0; t < n; t++) {
      x = 0.8 * x + random.normal();
      for (let i = 0; i < p; i++) {
        small[t * p + i] = Math.round(1024 * (0.1 * x + 0.05 * random.normal())) / 1024;
        large[t * p + i] = 1e7 + (small[t * p + i] as number);
      }
    }
    for (const batchSize of [1, 30, 44]) {
      const a = multivariateBatchMeans(small, n, p, { batchSize }).covariance;
      const b = multivariateBatchMeans(large, n, p, { batchSize }).covariance;
      expect(relativeDifference(b, a)).toBeLessThan(1e-13);
    }
  });

  it('flags a non-positive-definite estimate when there are no more batches than channels', () => {
    const result = multivariateBatchMeans(series.rows, series.n, series.p, { batchSize: Math.floor(series.n / 3) });
    expect(result.batches).toBe(3);
    expect(result.positiveDefinite).toBe(false);
    expect(result.reliable).toBe(false);
    expect(result.note).toMatch(/at least 4/);
    // With n = a b exactly the a = 2 deviations sum to zero: rank 1, and mESS is undefined (null).
    const two = multivariateBatchMeans(series.rows, series.n, series.p, { batchSize: series.n / 2 });
    expect(two.positiveDefinite).toBe(false);
    const lambda = sampleCovariance(series.rows, series.n, series.p).covariance;
    expect(multivariateEss(series.n, lambda, two.covariance, series.p)).toBeNull();
  });

  it('a perfectly collinear channel is reported as not positive definite, not as NaN', () => {
    const n = 400;
    const rows = new Float64Array(n * 2);
    const random = new SeededRandom(3);
    for (let t = 0; t < n; t++) {
      const v = random.normal();
      rows[2 * t] = v;
      rows[2 * t + 1] = 2 * v;
    }
    const result = multivariateBatchMeans(rows, n, 2);
    expect(result.positiveDefinite).toBe(false);
    expect(Array.from(result.covariance).every(Number.isFinite)).toBe(true);
  });

  it('rejects programmer errors', () => {
    expect(() => multivariateBatchMeans(series.rows, 1, 3)).toThrow(RangeError);
    expect(() => multivariateBatchMeans(series.rows, series.n, series.p, { batchSize: 0 })).toThrow(RangeError);
    expect(() => multivariateBatchMeans(series.rows, series.n, series.p, { batchSize: series.n })).toThrow(RangeError);
  });
});

describe('minimumEss', () => {
  const shared = sharedReferenceAvailable();
  // Source: DERIVED-REFERENCES.md section 4 (Vats, Flegal & Jones 2019; mcmcse minESS): 8123 at
  // p = 3 and 6146 at p = 1 for alpha = epsilon = 0.05. The integers are exact (rounded results).
  it.skipIf(!shared)(`is 8123 at p = 3 and 6146 at p = 1 (DERIVED-REFERENCES.md section 4)${shared ? '' : ' [skipped: ../shared/reference absent]'}`, () => {
    const text = readFileSync(join(ROOT, '..', 'shared', 'reference', 'DERIVED-REFERENCES.md'), 'utf8');
    expect(text).toMatch(/\*\*8123\*\* at p = 3/);
    expect(text).toMatch(/\*\*6146\*\* at p = 1/);
    expect(minimumEss(3, 0.05, 0.05)).toBe(8123);
    expect(minimumEss(1, 0.05, 0.05)).toBe(6146);
  });

  it('matches the numpy/scipy evaluation of the mcmcse minESS formula for p = 1, 2, 3, 5, 10, 30 (script)', () => {
    for (const [p, value] of Object.entries(fixture.expected.minimumEss)) {
      expect(minimumEss(Number(p))).toBe(Math.round(value));
    }
  });
});
