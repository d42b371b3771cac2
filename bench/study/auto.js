import { SeededRandom } from '../../dist/core/random/seeded-random.js';
import * as F from '../../dist/sim/signal-families.js';
import { ChannelPipeline } from '../../dist/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../dist/engine/channel-options.js';
const R = Number(process.env.R ?? 300);
const only = process.env.ONLY;
const DET = process.env.DET === '1';
const fams = {
  'ar1-0': [100, (r, n) => F.ar1(r, 0, n)],
  'ar1-0.5': [300, (r, n) => F.ar1(r, 0.5, n)],
  'ar1-0.9': [1900, (r, n) => F.ar1(r, 0.9, n)],
  'ar1-0.99': [19900, (r, n) => F.ar1(r, 0.99, n)],
  't3-0.9': [1900, (r, n) => F.ar1(r, 0.9, n, { innovations: 't3' })],
  'arma11': [1000, (r, n) => F.arma11(r, 0.8, 0.4, n)],
  'ar2': [1000, (r, n) => F.ar2Complex(r, 0.9, Math.PI / 8, n)],
  'ar2-0.95': [2000, (r, n) => F.ar2Complex(r, 0.95, Math.PI / 5, n)],
  'cycle': [2000, (r, n) => F.limitCycle(r, n, { amplitude: 2, period: 50, phi: 0.5 })],
  'cycle-w': [2000, (r, n) => F.limitCycle(r, n, { amplitude: 1, period: 23.7, phi: 0 })],
  'fgn': [4096, (r, n) => F.fractionalGaussianNoise(r, 0.8, n)],
  'fgn-16k': [16384, (r, n) => F.fractionalGaussianNoise(r, 0.8, n)],
};
for (const [name, [n, gen]] of Object.entries(fams)) {
  if (only && !only.split(',').includes(name)) continue;
  const snaps = [];
  let t0 = Date.now();
  for (let rep = 0; rep < R; rep++) {
    const x = gen(new SeededRandom(3000 + rep), n);
    const p = new ChannelPipeline('s', { ...DEFAULT_CHANNEL_OPTIONS, detectors: DET });
    for (let i = 0; i < n; i++) p.push(x[i], i);
    snaps.push(p.snapshot());
  }
  const sd = Math.sqrt(snaps.reduce((a, s) => a + s.mean ** 2, 0) / R);
  const cov = snaps.filter((s) => Math.abs(s.mean) <= s.expandedUncertainty).length / R;
  const naive = snaps.filter((s) => Math.abs(s.mean) <= 1.96 * s.estimators.iid.standardUncertainty).length / R;
  const u = snaps.reduce((a, s) => a + s.standardUncertainty, 0) / R;
  const methods = {}; for (const s of snaps) methods[s.estimator] = (methods[s.estimator] ?? 0) + 1;
  const lm = snaps.filter((s) => s.spectrum?.longMemory?.detected).length;
  const lines = snaps.filter((s) => (s.spectrum?.lines.length ?? 0) > 0).length;
  const ready = snaps.filter((s) => s.verdict.ready).length;
  const steady = snaps.filter((s) => s.state === 'steady' || s.state === 'precise').length;
  const lim = snaps.filter((s) => s.averagingLimit).length;
  console.log(`${name.padEnd(9)} n=${n} cov ${cov.toFixed(3)} naive ${naive.toFixed(3)} u/sd ${(u / sd).toFixed(2)} ${JSON.stringify(methods)} LM ${lm} lines ${lines} steady ${steady} ready ${ready} avlim ${lim} (${Date.now() - t0} ms)`);
}
