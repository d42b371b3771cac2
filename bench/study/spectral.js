import { SeededRandom } from '../../dist/core/random/seeded-random.js';
import * as F from '../../dist/sim/signal-families.js';
import { PeriodogramWorkspace } from '../../dist/core/spectrum/periodogram.js';
import { findSpectralLine } from '../../dist/core/spectrum/spectral-line.js';
import { localWhittle } from '../../dist/core/spectrum/local-whittle.js';
import { fitAutoregression } from '../../dist/core/tau/autoregressive-spectrum.js';
import { AutocovarianceFft } from '../../dist/core/acf/autocovariance-fft.js';

const R = Number(process.env.R ?? 200);
const fams = {
  'ar1-0': [4000, (r, n) => F.ar1(r, 0, n)],
  'ar1-0.9': [4000, (r, n) => F.ar1(r, 0.9, n)],
  'ar1-0.99': [20000, (r, n) => F.ar1(r, 0.99, n)],
  'ar1-0.999': [20000, (r, n) => F.ar1(r, 0.999, n)],
  'arma11': [4000, (r, n) => F.arma11(r, 0.8, 0.4, n)],
  'ar2-0.9': [4000, (r, n) => F.ar2Complex(r, 0.9, Math.PI / 8, n)],
  'ar2-0.98': [4000, (r, n) => F.ar2Complex(r, 0.98, Math.PI / 8, n)],
  'cycle': [4000, (r, n) => F.limitCycle(r, n, { amplitude: 2, period: 50, phi: 0.5 })],
  'cycle-small': [4000, (r, n) => F.limitCycle(r, n, { amplitude: 0.3, period: 37.3, phi: 0.5 })],
  'fgn-0.7': [4096, (r, n) => F.fractionalGaussianNoise(r, 0.7, n)],
  'fgn-0.8': [4096, (r, n) => F.fractionalGaussianNoise(r, 0.8, n)],
  'fgn-0.8-big': [32768, (r, n) => F.fractionalGaussianNoise(r, 0.8, n)],
  'quant': [4000, (r, n) => F.quantise(F.ar1(r, 0.5, n, { sigma: 0.3 }), 1, 0.3)],
};
const pw = new PeriodogramWorkspace();
const acf = new AutocovarianceFft();

const exps = (process.env.BW ?? '0.65').split(',').map(Number);
for (const [name, [n, gen]] of Object.entries(fams)) {
  let lines = 0; const periods = [];
  const dsRaw = [], dsPre = {}; let lmRaw = 0; const lmPre = {};
  for (const e of exps) { dsPre[e] = []; lmPre[e] = 0; }
  for (let rep = 0; rep < R; rep++) {
    const x = gen(new SeededRandom(5000 + rep), n);
    const p = pw.compute(x);
    const line = findSpectralLine(p);
    if (line) { lines++; periods.push(line.period.toFixed(1) + '/' + line.amplitude.toFixed(2)); }
    const g = acf.compute(x, 64);
    const fit = fitAutoregression(g, n, Infinity, process.env.BIC ? Math.log(n) : 2);
    const shape = (lambda) => { let re = 1, im = 0; fit.coefficients.forEach((c, k) => { re -= c * Math.cos((k + 1) * lambda); im += c * Math.sin((k + 1) * lambda); }); return 1 / (re * re + im * im); };
    const raw = localWhittle(p);
    dsRaw.push(raw.d); if (raw.d - 3 * raw.standardError > 0) lmRaw++;
    for (const e of exps) { const pre = localWhittle(p, shape, e); dsPre[e].push(pre.d); if (pre.d - 3 * pre.standardError > 0) lmPre[e]++; }
  }
  const med = (a) => { const s = [...a].sort((x, y) => x - y); return s[Math.floor(s.length / 2)].toFixed(3); };
  console.log(`${name.padEnd(12)} lines ${lines}/${R} ${periods.slice(0, 3).join(' ')} | raw d ${med(dsRaw)} LM ${lmRaw} | ` + exps.map((e) => `pre(${e}) d ${med(dsPre[e])} LM ${lmPre[e]}`).join(' | '));
}
