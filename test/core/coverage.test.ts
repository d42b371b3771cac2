import { describe, expect, it } from 'vitest';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import * as F from '../../src/sim/signal-families.js';
import { coverageFactor } from '../../src/core/uncertainty/coverage-factor.js';
import { feed } from '../helpers/feed.js';

// Coverage of the 95 % interval mean +/- U (default `auto` estimator) over seeded replicates whose
// true mean is 0, at about 100 effective samples. With 1000 replicates the Monte Carlo standard
// error of a coverage near 0.95 is sqrt(0.95 * 0.05 / 1000) = 0.0069, so the band 0.93-0.97 is about
// three standard errors wide on each side. The naive interval (s / sqrt(n), nu = n - 1) is printed
// beside it (common practice: it ignores the autocorrelation). The truth is built into the data
// (each family's process has mean 0), so the checks need no outside reference; tau_int of each
// family from ARMA theory (Brockwell & Davis 1991, from memory) only sizes the records.

const REPLICATES = 1000;

interface Outcome { coverage: number; naive: number; meanU: number; trueSd: number; longMemory: number; pendingLongMemory: number; lines: number }

function study(n: number, generate: (random: SeededRandom, n: number) => Float64Array, seedBase: number): Outcome {
  let covered = 0;
  let naiveCovered = 0;
  let sumU = 0;
  let sumSquares = 0;
  let longMemory = 0;
  let pendingLongMemory = 0;
  let lines = 0;
  for (let r = 0; r < REPLICATES; r++) {
    const x = generate(new SeededRandom(seedBase + r), n);
    const pipeline = feed(x);
    const s = pipeline.summary();
    const mean = s.mean as number;
    const U = s.expandedUncertainty as number;
    if (Math.abs(mean) <= U) covered++;
    let variance = 0;
    let m = 0;
    for (const v of x) m += v;
    m /= n;
    for (const v of x) variance += (v - m) ** 2;
    const naiveU = (coverageFactor(0.95, n - 1) as number) * Math.sqrt(variance / (n - 1) / n);
    if (Math.abs(mean) <= naiveU) naiveCovered++;
    sumU += U;
    sumSquares += mean * mean;
    if (s.estimator === 'beran') longMemory++;
    if (s.verdict.pending.some((p) => p.condition === 'long-memory')) pendingLongMemory++;
    if (pipeline.snapshotKeyEvents >= 0 && s.estimator === 'ar' && (pipeline.snapshot().spectrum?.lines.length ?? 0) > 0) lines++;
  }
  return { coverage: covered / REPLICATES, naive: naiveCovered / REPLICATES, meanU: sumU / REPLICATES, trueSd: Math.sqrt(sumSquares / REPLICATES), longMemory, pendingLongMemory, lines };
}

const families: { name: string; n: number; generate: (random: SeededRandom, n: number) => Float64Array }[] = [
  { name: 'AR(1) phi = 0', n: 100, generate: (r, n) => F.ar1(r, 0, n) },
  { name: 'AR(1) phi = 0.5', n: 300, generate: (r, n) => F.ar1(r, 0.5, n) },
  { name: 'AR(1) phi = 0.9', n: 1900, generate: (r, n) => F.ar1(r, 0.9, n) },
  { name: 'AR(1) phi = 0.99', n: 19_900, generate: (r, n) => F.ar1(r, 0.99, n) },
  { name: 'AR(1) phi = 0.9, Student-t(3) innovations', n: 1900, generate: (r, n) => F.ar1(r, 0.9, n, { innovations: 't3' }) },
  { name: 'ARMA(1,1) phi = 0.8, theta = 0.4 (tau_int 9.8)', n: 1000, generate: (r, n) => F.arma11(r, 0.8, 0.4, n) },
  { name: 'AR(2) complex roots r = 0.9, omega = pi/8 (tau_int 2.5)', n: 250, generate: (r, n) => F.ar2Complex(r, 0.9, Math.PI / 8, n) },
  { name: 'AR(2) complex roots r = 0.95, omega = pi/5, at n_eff near 400', n: 2000, generate: (r, n) => F.ar2Complex(r, 0.95, Math.PI / 5, n) },
];

describe('coverage of mean +/- U over stationary families (default auto estimator, 1000 replicates each)', () => {
  families.forEach((family, index) => {
    it(`${family.name}: coverage between 0.93 and 0.97`, () => {
      const result = study(family.n, family.generate, 70_000 + 1000 * index);
      console.log(`coverage ${family.name}, n = ${family.n}: plateau ${result.coverage.toFixed(3)}, naive s/sqrt(n) ${result.naive.toFixed(3)}; U / (1.96 sd of the means) ${(result.meanU / (1.96 * result.trueSd)).toFixed(2)}`);
      expect(result.coverage).toBeGreaterThanOrEqual(0.93);
      expect(result.coverage).toBeLessThanOrEqual(0.97);
      expect(result.longMemory).toBe(0);
    }, 240_000);
  });

  it('a limit cycle (period 50, amplitude 2) on AR(1) noise: U no wider than 1.3 times the true one, and the cycle is found', () => {
    const result = study(2000, (r, n) => F.limitCycle(r, n, { amplitude: 2, period: 50, phi: 0.5 }), 90_000);
    const trueU = 1.96 * result.trueSd;
    console.log(`coverage limit cycle: plateau ${result.coverage.toFixed(3)}, naive ${result.naive.toFixed(3)}; mean U ${result.meanU.toPrecision(3)} against the true ${trueU.toPrecision(3)} (${(result.meanU / trueU).toFixed(2)}x); cycle found in ${result.lines} of ${REPLICATES}`);
    expect(result.meanU / trueU).toBeLessThanOrEqual(1.3);
    expect(result.coverage).toBeGreaterThanOrEqual(0.93);
    expect(result.lines).toBeGreaterThanOrEqual(0.95 * REPLICATES);
  }, 240_000);

  it('fractional Gaussian noise (H = 0.8): no tight U; the verdict says the mean has long memory', () => {
    // Var(mean of n) = n^(2H - 2) exactly for unit-variance fractional Gaussian noise (Beran 1994).
    const result = study(16_384, (r, n) => F.fractionalGaussianNoise(r, 0.8, n), 95_000);
    console.log(`coverage fGn H = 0.8, n = 16384: plateau ${result.coverage.toFixed(3)} (Beran's law in ${result.longMemory}), naive ${result.naive.toFixed(3)}; verdict names long memory in ${result.pendingLongMemory} of ${REPLICATES}`);
    expect(result.pendingLongMemory).toBeGreaterThanOrEqual(0.95 * REPLICATES);
    expect(result.coverage).toBeGreaterThanOrEqual(0.9);
  }, 240_000);
});
