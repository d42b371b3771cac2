import { describe, expect, it } from 'vitest';
import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';
import { warmupFamilies, warmupSeries, transientMean, type WarmupFamily } from '../../src/sim/warmup-families.js';

// The verdict on a warm-up inside a growing window (src/sim/warmup-families.ts: exponential heating
// and cooling, time constants of a fifth to a twentieth of the record, AR(1) noise with phi 0, 0.5
// and 0.9, amplitudes set by when the rig settles, at 30 % or 45 % of the record). The truth is
// built into the data (level 10, the transient known), so the checks need no outside reference.
// Over 20 seeded runs per family: steady by 60 % of the record (and steady from then on) in at least
// 18, |mean - truth| <= U at the end in at least 18, and U no wider than twice what the kept samples
// support (k sigma_inf / sqrt(kept), sigma_inf the noise's true long-run deviation) in at least 18.

const SEEDS = 20;

function run(family: WarmupFamily, seed: number) {
  const x = warmupSeries(family, seed);
  const pipeline = new ChannelPipeline('warm-up', DEFAULT_CHANNEL_OPTIONS);
  let steadySince = -1;
  for (let i = 0; i < x.length; i++) {
    for (const e of pipeline.push(x[i] as number, i * 0.1)) {
      if (e.kind === 'steady' || e.kind === 'stationarity-regained') steadySince = e.at;
      if (e.kind === 'steady-withdrawn' || e.kind === 'stationarity-lost') steadySince = -1;
    }
  }
  const s = pipeline.snapshot();
  const steady = s.state === 'steady' || s.state === 'precise';
  const kept = family.N - s.window.startIndex;
  const supported = (s.coverageFactor ?? 1.96) * (family.sigmaLr / Math.sqrt(kept));
  return {
    steadyBy60: steadySince >= 0 && steadySince <= 0.6 * family.N,
    within: steady && s.expandedUncertainty !== null && Math.abs((s.mean as number) - family.level) <= s.expandedUncertainty,
    narrow: steady && s.expandedUncertainty !== null && s.expandedUncertainty <= 2 * supported,
    bias: transientMean(family.A, family.T, s.window.startIndex, family.N) / (s.expandedUncertainty ?? Number.NaN),
  };
}

describe('the verdict on exponential warm-ups inside a growing window (20 seeds per family)', () => {
  for (const tf of [5, 10, 20]) {
    it(`time constant N/${tf}: steady by 60 % of the record, mean within U of the truth, U within twice what the kept samples support, each in >= 18 of 20 runs`, () => {
      for (const family of warmupFamilies({ tfs: [tf] })) {
        const runs = Array.from({ length: SEEDS }, (_, i) => run(family, 1000 + 7 * i));
        const steady = runs.filter((r) => r.steadyBy60).length;
        const within = runs.filter((r) => r.within).length;
        const narrow = runs.filter((r) => r.narrow).length;
        const worstBias = Math.max(...runs.map((r) => Math.abs(r.bias)).filter(Number.isFinite));
        console.log(`${family.name}: steady by 60 % ${steady}/${SEEDS}, within U ${within}/${SEEDS}, U <= 2 U(kept) ${narrow}/${SEEDS}, largest |transient bias| / U ${worstBias.toFixed(2)}`);
        expect(steady, family.name).toBeGreaterThanOrEqual(18);
        expect(within, family.name).toBeGreaterThanOrEqual(18);
        expect(narrow, family.name).toBeGreaterThanOrEqual(18);
      }
    }, 240_000);
  }
});
