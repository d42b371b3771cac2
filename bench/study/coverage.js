// Study: coverage of mean +/- U per estimator over the signal families (detectors off).
import { SeededRandom } from '../../dist/core/random/seeded-random.js';
import * as F from '../../dist/sim/signal-families.js';
import { ChannelPipeline } from '../../dist/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../dist/engine/channel-options.js';
import { coverageFactor } from '../../dist/core/uncertainty/coverage-factor.js';

const R = Number(process.env.R ?? 400);
const only = process.env.ONLY;
const families = {
  'ar1-0': { n: 100, gen: (r, n) => F.ar1(r, 0, n), truth: 0 },
  'ar1-0.5': { n: 300, gen: (r, n) => F.ar1(r, 0.5, n) },
  'ar1-0.9': { n: 1900, gen: (r, n) => F.ar1(r, 0.9, n) },
  'ar1-0.99': { n: 19900, gen: (r, n) => F.ar1(r, 0.99, n) },
  'ar1-t3-0.9': { n: 1900, gen: (r, n) => F.ar1(r, 0.9, n, { innovations: 't3' }) },
  'arma11': { n: 1000, gen: (r, n) => F.arma11(r, 0.8, 0.4, n) },
  'ar2': { n: 1000, gen: (r, n) => F.ar2Complex(r, 0.9, Math.PI / 8, n) },
  'cycle': { n: 2000, gen: (r, n) => F.limitCycle(r, n, { amplitude: 2, period: 50, phi: 0.5 }) },
  'fgn-0.8': { n: 4096, gen: (r, n) => F.fractionalGaussianNoise(r, 0.8, n) },
  'quant': { n: 1000, gen: (r, n) => F.quantise(F.ar1(r, 0.5, n, { sigma: 0.3 }), 1, 0.3) , truth: null},
};
const names = ['geyer', 'sokal', 'blocking', 'batch-means', 'iid', ...(process.env.EXTRA ? process.env.EXTRA.split(',') : [])];
for (const [name, fam] of Object.entries(families)) {
  if (only && !only.split(',').includes(name)) continue;
  const covered = Object.fromEntries(names.map((e) => [e, 0]));
  const widths = Object.fromEntries(names.map((e) => [e, 0]));
  const means = [];
  const snaps = [];
  for (let rep = 0; rep < R; rep++) {
    const x = fam.gen(new SeededRandom(1000 + rep), fam.n);
    const p = new ChannelPipeline('s', { ...DEFAULT_CHANNEL_OPTIONS, detectors: false });
    for (let i = 0; i < x.length; i++) p.push(x[i], i);
    const s = p.snapshot();
    means.push(s.mean);
    snaps.push(s);
  }
  // Truth: 0 except quantised (true mean of the quantised process estimated by the grand mean).
  const truth = fam.truth === null ? means.reduce((a, b) => a + b, 0) / R : 0;
  const sdTrue = Math.sqrt(means.reduce((a, m) => a + (m - truth) ** 2, 0) / R);
  for (const s of snaps) {
    for (const e of names) {
      const est = s.estimators[e];
      if (!est) continue;
      const k = coverageFactor(0.95, est.dof) ?? Infinity;
      const U = k * est.standardUncertainty;
      if (Math.abs(s.mean - truth) <= U) covered[e]++;
      widths[e] += est.standardUncertainty / R;
    }
  }
  console.log(`${name.padEnd(12)} n=${fam.n} sd(mean) MC=${sdTrue.toPrecision(3)} ` + names.map((e) => `${e} ${(covered[e] / R).toFixed(3)} (u/sd ${(widths[e] / sdTrue).toFixed(2)})`).join(' | '));
}
