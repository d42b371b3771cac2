// Verdict figures (issue: the verdict on the signals real rigs produce). Warm-up families through
// the whole channel pipeline: when steady state is declared, whether the mean at the end of the
// record is within U of the truth, and U against what the kept samples support.
// Run: npm run bench:verdict   (SEEDS=20 by default)
import { ChannelPipeline } from '../dist/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../dist/engine/channel-options.js';
import { warmupFamilies, warmupSeries, transientMean } from '../dist/sim/warmup-families.js';
import { header, line } from './harness.js';

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
