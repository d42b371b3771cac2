// Derived-result figures (issue 6): the cost of keeping the cross-covariance of p channels per
// sample (p = 3, 10, 30), of one snapshot, and of one Monte Carlo propagation with the adaptive rule
// of JCGM 101 7.9.4.
// Run: npm run build && node bench/derived.js   (suggested script: "bench:derived")
import { SeededRandom, ar1Series } from '../dist/core/random/seeded-random.js';
import { compileDerivedSet } from '../dist/engine/derived/expression-model.js';
import { DerivedEngine } from '../dist/engine/derived/derived-engine.js';
import { derivedMonteCarlo } from '../dist/engine/derived/derived-monte-carlo.js';
import { monteCarloPropagation } from '../dist/core/propagation/monte-carlo-propagation.js';
import { TimeBucketedCovariance } from '../dist/core/multivariate/time-bucketed-covariance.js';
import { bestOf, header, line, nsPer } from './harness.js';

const ROWS = Number(process.env.ROWS ?? 20_000);
const RUNS = Number(process.env.RUNS ?? 3);

function channelsOf(p) {
  const random = new SeededRandom(600 + p);
  return Array.from({ length: p }, () => ar1Series(random, 0.7, ROWS));
}

function specsFor(p) {
  const channels = Array.from({ length: p }, (_, i) => ({ name: `rig.ch${i}` }));
  const expression = channels.map((c) => c.name).join(' + ');
  return compileDerivedSet([{ name: 'sum', expression }], channels, 'derived').map((compiled) => ({ compiled, target: { value: 0.001, relative: true, on: 'U' }, confidence: 0.95 }));
}

header(`cross-covariance of p channels: ${ROWS} rows per channel, AR(1) phi = 0.7, best of ${RUNS}`);
for (const p of [3, 10, 30]) {
  const data = channelsOf(p);
  const specs = specsFor(p);
  // Channels sampled together at 10 Hz (one sample per channel per bucket).
  let engine;
  const together = bestOf(RUNS, () => {
    engine = new DerivedEngine(specs);
    for (let i = 0; i < ROWS; i++) {
      const t = 1_764_000_000 + i * 0.1;
      for (let c = 0; c < p; c++) engine.add(c, t, data[c][i]);
    }
  });
  const snapshot = engine.evaluate()[0];
  line(`p = ${p}: engine, channels sampled together, per sample`, nsPer(together, ROWS * p).toFixed(0), 'ns', `rows ${snapshot.rows} (bucket ${snapshot.bucketSeconds} s after ${snapshot.counts.merges} merges), ${nsPer(together, ROWS).toFixed(0)} ns per row`);
  // Unsynchronised phases (each channel offset by a fraction of the interval): buckets of 2 intervals.
  const apart = bestOf(RUNS, () => {
    const e = new DerivedEngine(specs);
    for (let i = 0; i < ROWS; i++) for (let c = 0; c < p; c++) e.add(c, 1_764_000_000 + i * 0.1 + (0.09 * c) / p, data[c][i]);
  });
  line(`p = ${p}: engine, channels out of phase, per sample`, nsPer(apart, ROWS * p).toFixed(0), 'ns', '');
  // The TimeBucketedCovariance alone (rows as given), for comparison.
  const alone = bestOf(RUNS, () => {
    const tbc = new TimeBucketedCovariance(p, { bucketSeconds: 1, maxBuckets: 16_386, openBuckets: 1 });
    for (let i = 0; i < ROWS; i++) {
      for (let c = 0; c < p; c++) tbc.add(c, i + 0.5, data[c][i]);
      tbc.flush();
    }
  });
  line(`p = ${p}: TimeBucketedCovariance alone, per sample`, nsPer(alone, ROWS * p).toFixed(0), 'ns', '');
  // One snapshot (the engine caches it until a row is added: force a fresh one each time).
  const fresh = new DerivedEngine(specs);
  for (let i = 0; i < ROWS; i++) for (let c = 0; c < p; c++) fresh.add(c, i, data[c][i]);
  // Each call opens a bucket far ahead, which closes the previous one: a new row, so no cache hit.
  let extra = 1;
  const snapshotMs = bestOf(RUNS * 5, () => {
    for (let c = 0; c < p; c++) fresh.add(c, ROWS + 1e6 * extra, data[c][extra % ROWS]);
    extra++;
    fresh.evaluate();
  });
  line(`p = ${p}: one snapshot (propagation, budget, target)`, (snapshotMs * 1000).toFixed(0), 'us', '');
}

header('one Monte Carlo propagation (JCGM 101 7.9.4, blocks of 10^4 trials), heat duty m_dot cp (T_in - T_out)');
{
  const [heat] = compileDerivedSet([{ name: 'q', expression: 'm * 3.6 * (t_in - t_out)' }], [{ name: 'm' }, { name: 't_in' }, { name: 't_out' }], 'derived');
  const means = Float64Array.of(0.82, 42, 35.7);
  const sd = [0.0004, 0.004, 0.004];
  const r = [
    [1, 0.2, 0.1],
    [0.2, 1, 0.8],
    [0.1, 0.8, 1],
  ];
  const covariance = new Float64Array(9);
  for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) covariance[i * 3 + j] = r[i][j] * sd[i] * sd[j];
  const distribution = { compiled: heat, means, covariance };
  for (const digits of [1, 2]) {
    let result;
    const ms = bestOf(RUNS, () => {
      result = monteCarloPropagation({ inputs: [{ kind: 'multivariate-normal', mean: means, covariance }], model: heat.model, confidence: 0.95, random: new SeededRandom(1), adaptive: { significantDigits: digits, maxTrials: 5_000_000 } });
    });
    line(`adaptive rule at n_dig = ${digits}`, ms.toFixed(0), 'ms', `${result.trials} trials, converged ${result.converged}, ${nsPer(ms, result.trials).toFixed(0)} ns per trial`);
  }
  const c = heat.sensitivities({ m: 0.82, t_in: 42, t_out: 35.7 });
  let u2 = 0;
  for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) u2 += c[i] * c[j] * covariance[i * 3 + j];
  const snapshot = { value: 0.82 * 3.6 * 6.3, standardUncertainty: Math.sqrt(u2), confidence: 0.95 };
  for (const cap of [200_000, 1_000_000]) {
    let result;
    const ms = bestOf(RUNS, () => {
      result = derivedMonteCarlo(distribution, snapshot, { random: new SeededRandom(2), maxTrials: cap });
    });
    line(`derived check (adaptive at n_dig 3, validation at 2), cap ${cap}`, ms.toFixed(0), 'ms', `${result.trials} trials, validated ${result.validated}`);
  }
}
