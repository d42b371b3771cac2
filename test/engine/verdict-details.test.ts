import { describe, expect, it } from 'vitest';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import * as F from '../../src/sim/signal-families.js';
import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../src/engine/channel-options.js';
import { formatSamples } from '../../src/engine/warmup-detector.js';

// Smaller promises of the verdict, each on data whose truth is built in.

function stream(x: ArrayLike<number>, options: Partial<ChannelOptions> = {}) {
  const pipeline = new ChannelPipeline('probe', { ...DEFAULT_CHANNEL_OPTIONS, ...options });
  const kinds: string[] = [];
  for (let i = 0; i < x.length; i++) for (const e of pipeline.push(x[i] as number, i * 0.1)) kinds.push(e.kind);
  return { pipeline, kinds };
}

describe('the detectors take their long-run variance from the auto rule, whatever the reported estimator', () => {
  for (const estimator of ['iid', 'batch-means', 'sokal'] as const) {
    it(`--estimator ${estimator}: no stationarity-lost on stationary AR(1) phi = 0.9 (three records of 300,000 samples)`, () => {
      for (const seed of [1, 2, 3]) {
        const { kinds, pipeline } = stream(F.ar1(new SeededRandom(600 + seed), 0.9, 300_000), { estimator });
        expect(kinds.filter((k) => k === 'stationarity-lost')).toEqual([]);
        expect(pipeline.state).toBe('steady');
        expect(pipeline.snapshot().estimator).toBe(estimator);
      }
    });
  }
});

describe('the averaging limit is reported only where the Allan deviation stops falling', () => {
  it('never on plain short-memory series (ARMA(1,1), AR(1) phi = 0.9, AR(2) complex roots: 10 records of 65,536 each)', () => {
    const families = [
      (r: SeededRandom) => F.arma11(r, 0.8, 0.4, 65_536),
      (r: SeededRandom) => F.ar1(r, 0.9, 65_536),
      (r: SeededRandom) => F.ar2Complex(r, 0.9, Math.PI / 8, 65_536),
    ];
    let limits = 0;
    families.forEach((generate, f) => {
      for (let seed = 0; seed < 10; seed++) {
        const { pipeline, kinds } = stream(generate(new SeededRandom(800 + 100 * f + seed)));
        if (kinds.includes('averaging-limit') || pipeline.snapshot().averagingLimit) limits++;
      }
    });
    expect(limits).toBe(0);
  });

  it('on a random walk added to white noise (the Allan deviation turns up), within the record', () => {
    const r = new SeededRandom(91);
    const x = new Float64Array(65_536);
    let walk = 0;
    for (let i = 0; i < x.length; i++) {
      walk += 0.01 * r.normal();
      x[i] = r.normal() + walk;
    }
    expect(stream(x, { detectors: false }).pipeline.snapshot().averagingLimit).not.toBeNull();
  });
});

describe('readings on a lattice', () => {
  it('the step is reported, with the resolution component it implies, when it is coarse against the noise', () => {
    const x = F.quantise(F.ar1(new SeededRandom(12), 0.5, 5000, { sigma: 0.03 }), 0.1, 0);
    const s = stream(x).pipeline.snapshot();
    expect(s.resolution?.step).toBeCloseTo(0.1, 9);
    expect(s.resolution?.coarse).toBe(true);
    expect(s.notes.join(' ')).toMatch(/lattice of step 0\.100 .*u = 0\.0289/);
  });

  it('fine data are not taken for a lattice', () => {
    expect(stream(F.ar1(new SeededRandom(13), 0.5, 5000)).pipeline.snapshot().resolution).toBeNull();
  });
});

describe('the verdict names what is pending, with numbers', () => {
  it('a target not met on a steady channel: the samples still needed', () => {
    const { pipeline } = stream(F.ar1(new SeededRandom(14), 0.5, 20_000), { target: { value: 0.01, relative: false, on: 'U' } });
    const verdict = pipeline.summary().verdict;
    expect(verdict.ready).toBe(false);
    const target = verdict.pending.find((p) => p.condition === 'target');
    expect(target?.samplesToGo).toBeGreaterThan(100_000);
    expect(target?.secondsToGo).toBeCloseTo((target?.samplesToGo as number) / 10, 0);
    expect(target?.message).toMatch(/target U <= 0\.0100 not met yet: about .* more samples/);
  });

  it('numbers in the words carry the channel\'s unit as people write it, once it is known; the statistics do not change', () => {
    const { pipeline } = stream(F.ar1(new SeededRandom(14), 0.5, 20_000), { target: { value: 0.01, relative: false, on: 'U' } });
    const before = pipeline.summary();
    pipeline.setUnitLabel('°C');
    const after = pipeline.summary();
    expect(after.verdict.pending.find((p) => p.condition === 'target')?.message).toMatch(/target U <= 0\.0100 °C not met yet/);
    expect(after.expandedUncertainty).toBe(before.expandedUncertainty);
    expect(after.mean).toBe(before.mean);
  });

  it('long memory: not ready, and said so, with the Hurst exponent', () => {
    const { pipeline } = stream(F.fractionalGaussianNoise(new SeededRandom(15), 0.85, 32_768), { detectors: false });
    const pending = pipeline.summary().verdict.pending.find((p) => p.condition === 'long-memory');
    expect(pending?.message).toMatch(/Hurst exponent 0\.[89]/);
  });

  it('a break: the cause, the change point and, for a trend, the slope with its uncertainty', () => {
    const x = F.ar1(new SeededRandom(16), 0, 120_000).map((v, i) => (i >= 60_000 ? v + 2e-4 * (i - 60_000) : v));
    const { pipeline } = stream(x);
    expect(pipeline.state).toBe('unsteady');
    const pending = pipeline.summary().verdict.pending[0];
    expect(pending?.condition).toBe('break');
    expect(pending?.message).toMatch(/stationarity lost: trend from sample (59|60)\d{3}, slope 0\.000(1|2)\d* ± .* per sample/);
    pipeline.setUnitLabel('kPa');
    expect(pipeline.summary().verdict.pending[0]?.message).toMatch(/slope 0\.000(1|2)\d* ± \S+ kPa per sample/);
  });
});

describe('reading never changes the state (results and checkpoints do not depend on how often anyone reads)', () => {
  it('snapshots and summaries after every sample, every 1000th sample, or never: identical events and checkpoints', () => {
    const x = F.ar1(new SeededRandom(17), 0.95, 60_000).map((v, i) => v + 30 * Math.exp(-i / 2000) + (i > 45_000 ? 3 : 0));
    const runWith = (every: number) => {
      const pipeline = new ChannelPipeline('probe', { ...DEFAULT_CHANNEL_OPTIONS, target: { value: 0.5, relative: false, on: 'U' } });
      const events: unknown[] = [];
      for (let i = 0; i < x.length; i++) {
        events.push(...pipeline.push(x[i] as number, i * 0.1));
        if (every > 0 && i % every === 0) {
          pipeline.summary();
          if (i % 997 === 0) pipeline.snapshot();
        }
      }
      return { events, state: pipeline.saveState(), maxLag: pipeline.series.maxLag };
    };
    const never = runWith(0);
    for (const every of [1, 1000]) {
      const read = runWith(every);
      expect(read.events).toEqual(never.events);
      expect(read.maxLag).toBe(never.maxLag);
      expect(structuredClone(read.state)).toEqual(structuredClone(never.state));
    }
  });
});

describe('sample counts in the verdict\'s words', () => {
  it('are grouped by thin spaces, two significant figures from 1000 on, and say unbounded for no finite count', () => {
    expect(formatSamples(0)).toBe('0');
    expect(formatSamples(999.4)).toBe('999');
    expect(formatSamples(1000)).toBe('1\u202f000');
    expect(formatSamples(12_345)).toBe('12\u202f000');
    expect(formatSamples(1_234_567)).toBe('1\u202f200\u202f000');
    expect(formatSamples(Number.POSITIVE_INFINITY)).toBe('unbounded');
    expect(formatSamples(Number.NaN)).toBe('unbounded');
  });
});
