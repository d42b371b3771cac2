// Verdict figures (issue: the verdict on the signals real rigs produce). Warm-up families through
// the whole channel pipeline: when steady state is declared, whether the mean at the end of the
// record is within U of the truth, and U against what the kept samples support.
// Run: npm run bench:verdict   (SEEDS=20 by default)
import { ChannelPipeline } from '../dist/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../dist/engine/channel-options.js';
import { warmupFamilies, warmupSeries, transientMean } from '../dist/sim/warmup-families.js';
import { header, line } from './harness.js';
import { SeededRandom } from '../dist/core/random/seeded-random.js';
import * as F from '../dist/sim/signal-families.js';

const SEEDS = Number(process.env.SEEDS ?? 20);

export function runWarmup(family, seed) {
  const x = warmupSeries(family, seed);
  const p = new ChannelPipeline('bench', { ...DEFAULT_CHANNEL_OPTIONS });
  let steadySince = -1;
  let withdrawals = 0;
  for (let i = 0; i < x.length; i++) {
    for (const e of p.push(x[i], i * 0.1)) {
      if (e.kind === 'steady' || e.kind === 'stationarity-regained') steadySince = e.at;
      if (e.kind === 'steady-withdrawn' || e.kind === 'stationarity-lost') { steadySince = -1; withdrawals++; }
    }
  }
  const s = p.snapshot();
  const start = s.window.startIndex;
  const uIdeal = family.sigmaLr / Math.sqrt(family.N - start);
  return {
    steadyBy60: steadySince >= 0 && steadySince <= 0.6 * family.N,
    steadyAtEnd: s.state === 'steady' || s.state === 'precise',
    within: (s.state === 'steady' || s.state === 'precise') && s.expandedUncertainty !== null && Math.abs(s.mean - family.level) <= s.expandedUncertainty,
    widthRatio: s.expandedUncertainty / ((s.coverageFactor ?? 1.96) * uIdeal),
    bias: transientMean(family.A, family.T, start, family.N) / s.expandedUncertainty,
    cut: start / family.N,
    withdrawals,
  };
}

function quantile(values, q) {
  const sorted = [...values].sort((a, b) => a - b);
  return sorted.length ? sorted[Math.min(sorted.length - 1, Math.floor(q * sorted.length))] : Number.NaN;
}

if (import.meta.url === `file://${process.argv[1]}`) {
  header(`verdict on exponential warm-ups, ${SEEDS} seeds per family`);
  let total = 0;
  let passed = 0;
  for (const family of warmupFamilies()) {
    const runs = [];
    for (let seed = 0; seed < SEEDS; seed++) runs.push(runWarmup(family, 1000 + seed * 7));
    const steady = runs.filter((r) => r.steadyBy60).length;
    const within = runs.filter((r) => r.within).length;
    const narrow = runs.filter((r) => r.widthRatio <= 2).length;
    const ok = steady >= 0.9 * SEEDS && within >= 0.9 * SEEDS && narrow >= 0.9 * SEEDS;
    total++;
    if (ok) passed++;
    line(family.name, `${steady}/${within}/${narrow}`, '', `${ok ? 'met' : 'MISSED'}; cut p50 ${quantile(runs.map((r) => r.cut), 0.5).toFixed(2)}, |bias|/U p90 ${quantile(runs.map((r) => Math.abs(r.bias)), 0.9).toFixed(2)}, U/U(kept) p90 ${quantile(runs.map((r) => r.widthRatio), 0.9).toFixed(2)}, withdrawals ${runs.reduce((a, r) => a + r.withdrawals, 0)}`);
  }
  line('families meeting all three goals', `${passed}/${total}`, '', '(steady by 60 %, |mean - truth| <= U, U <= 2 U(kept), each in >= 90 % of runs)');
}

// False stationarity-lost events per million monitored samples at the default budget (goal <= 1),
// on stationary families: SAMPLES samples each, ALARM_SEEDS seeds.
const SAMPLES = Number(process.env.SAMPLES ?? 5_000_000);
const ALARM_SEEDS = Number(process.env.ALARM_SEEDS ?? 2);
const stationary = {
  'AR(1) phi 0': (r, n) => F.ar1(r, 0, n),
  'AR(1) phi 0.5': (r, n) => F.ar1(r, 0.5, n),
  'AR(1) phi 0.9': (r, n) => F.ar1(r, 0.9, n),
  'AR(1) phi 0.99': (r, n) => F.ar1(r, 0.99, n),
  'AR(1) phi 0.9, t(3) innovations': (r, n) => F.ar1(r, 0.9, n, { innovations: 't3' }),
  'ARMA(1,1) 0.8 / 0.4': (r, n) => F.arma11(r, 0.8, 0.4, n),
  'AR(2) r 0.9, omega pi/8': (r, n) => F.ar2Complex(r, 0.9, Math.PI / 8, n),
  'limit cycle, period 50': (r, n) => F.limitCycle(r, n, { amplitude: 2, period: 50, phi: 0.5 }),
  'quantised, step 3.3 sigma': (r, n) => F.quantise(F.ar1(r, 0.5, n, { sigma: 0.3 }), 1, 0.3),
  'quantised, step 2.2 sigma': (r, n) => F.quantise(F.ar1(r, 0.9, n, { sigma: 0.2 }), 0.5, 0.1),
};
if (import.meta.url === `file://${process.argv[1]}`) {
  header(`false alarms at the default budget: ${SAMPLES / 1e6} million samples x ${ALARM_SEEDS} seeds per family`);
  for (const [name, generate] of Object.entries(stationary)) {
    let lost = 0;
    let monitored = 0;
    const causes = {};
    for (let seed = 0; seed < ALARM_SEEDS; seed++) {
      const x = generate(new SeededRandom(55_000 + seed), SAMPLES);
      const p = new ChannelPipeline('bench', DEFAULT_CHANNEL_OPTIONS);
      let steadyAt = -1;
      for (let i = 0; i < x.length; i++) {
        for (const e of p.push(x[i], i * 0.1)) {
          if (e.kind === 'steady' && steadyAt < 0) steadyAt = i;
          if (e.kind === 'stationarity-lost') {
            lost++;
            causes[e.cause] = (causes[e.cause] ?? 0) + 1;
          }
        }
      }
      if (steadyAt >= 0) monitored += SAMPLES - steadyAt;
    }
    const rate = (lost / monitored) * 1e6;
    line(name, rate.toFixed(2), 'per million', `${lost} in ${(monitored / 1e6).toFixed(1)} M ${JSON.stringify(causes)}; goal <= 1: ${rate <= 1 ? 'goal met' : 'GOAL MISSED'}`);
  }
}
