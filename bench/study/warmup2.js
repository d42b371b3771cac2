// Study v2: transient fit over the full history + HW/OBM fallback, simulated live.
import { SeededRandom } from '../../dist/core/random/seeded-random.js';
import * as F from '../../dist/sim/signal-families.js';
import { fitAutoregression } from '../../dist/core/tau/autoregressive-spectrum.js';
import { laggedProductSums } from '../../dist/core/acf/direct-autocovariance.js';
import { heidelbergerWelch } from '../../dist/core/stationarity/heidelberger-welch.js';
import { spectrum0Ar } from '../../dist/core/stationarity/spectrum0-ar.js';
import { coverageFactor } from '../../dist/core/uncertainty/coverage-factor.js';

const env = (k, d) => (process.env[k] === undefined ? d : Number(process.env[k]));
const SEEDS = env('SEEDS', 20), NMIN = env('NMIN', 50), DELTA = env('DELTA', 0.3), THRESH = env('THRESH', 16);
const STEP = env('STEP', 16), UPPER = env('UPPER', 1), B = env('B', 16), KMAX = env('KMAX', 256);

function arOf(x, from, to) {
  const n = to - from;
  const seg = new Float64Array(n);
  let mean = 0;
  for (let i = from; i < to; i++) mean += x[i];
  mean /= n;
  for (let i = 0; i < n; i++) seg[i] = x[from + i] - mean;
  const p = Math.min(n - 2, Math.floor(10 * Math.log10(n)));
  const g = laggedProductSums(seg, p);
  for (let k = 0; k <= p; k++) g[k] /= n;
  const fit = fitAutoregression(g, n);
  const s2 = (g[0] * n) / (n - 1);
  return { mean, s0: fit ? fit.spectrumAtZero : s2, tau: fit ? fit.spectrumAtZero / s2 : 1, dof: fit ? 2 / fit.logSpectrumVariance : n - 1, s2 };
}

// Block means of x[0..to) (full history), at most KMAX blocks.
function history(x, to) {
  const b = Math.max(1, Math.ceil(to / KMAX));
  const K = Math.floor(to / b);
  const y = new Float64Array(K);
  for (let k = 0; k < K; k++) { let s = 0; for (let i = 0; i < b; i++) s += x[k * b + i]; y[k] = s / b; }
  return { y, b, K };
}

// Fit mu + A exp(-t/T) to block means; sigma2 per block from s0 (long-run variance).
function transientFit(h, s0) {
  const { y, b, K } = h;
  if (K < 16) return null;
  let ym = 0; for (const v of y) ym += v; ym /= K;
  let rss0 = 0; for (const v of y) rss0 += (v - ym) ** 2;
  const sigma2 = s0 / b;
  let best = null, fits = [];
  for (let T = b / 2; T <= 4 * K * b; T *= 1.12) {
    const r = Math.exp(-b / T);
    let e = Math.exp(-(b - 1) / 2 / T), se = 0, see = 0, sye = 0;
    for (let k = 0; k < K; k++) { se += e; see += e * e; sye += e * y[k]; e *= r; }
    const em = se / K, sxx = see - K * em * em;
    if (!(sxx > 1e-12)) continue;
    const A = (sye - em * ym * K) / sxx, mu = ym - A * em;
    const rss = rss0 - A * A * sxx;
    const f = { T, A, mu, rss };
    fits.push(f);
    if (!best || rss < best.rss) best = f;
  }
  if (!best) return null;
  const delta = (rss0 - best.rss) / sigma2;
  let up = best; for (const f of fits) if (f.T > up.T && f.rss <= best.rss + 3.84 * sigma2) up = f;
  return { best, up, delta, significant: delta > THRESH, sigma2 };
}

function biasAt(fit, c, n) {
  const { A, T } = UPPER ? fit.up : fit.best;
  return Math.abs(A) * T * (Math.exp(-c / T) - Math.exp(-n / T)) / (n - c);
}

function admissibleCut(fit, s0, from, n, step) {
  for (let c = from; c < n - 64; c += step) if (biasAt(fit, c, n) <= DELTA * Math.sqrt(s0 / (n - c))) return c;
  return null;
}

function obmVar(x, from, to, b) {
  const n = to - from;
  let mean = 0; for (let i = from; i < to; i++) mean += x[i]; mean /= n;
  let w = 0; for (let i = from; i < from + b; i++) w += x[i];
  let sq = (w / b - mean) ** 2;
  for (let j = from + 1; j <= to - b; j++) { w += x[j + b - 1] - x[j - 1]; sq += (w / b - mean) ** 2; }
  return (b / ((n - b) * (n - b + 1))) * sq;
}
function obmCut(x, from, to) {
  const n = to - from; let best = Infinity, cut = 0;
  for (let c = 0; c <= 24; c++) { const s = Math.floor((c * n) / 32); const v = obmVar(x, from + s, to, Math.max(1, Math.floor((n - s) / B))); if (v < best) { best = v; cut = s; } }
  return cut;
}

function live(x) {
  const N = x.length;
  let start = 0, steadyAt = -1, n = 256, moves = 0, losses = 0, why = '';
  for (;;) {
    if (n > N) n = N;
    const h = history(x, n);
    if (steadyAt < 0) {
      const hwWhole = heidelbergerWelch(x.subarray(start, n));
      const s0 = hwWhole.secondHalfSpectrum ?? arOf(x, start + ((n - start) >> 1), n).s0;
      const fit = transientFit(h, s0);
      let cut = null;
      if (fit && fit.significant) { const c = admissibleCut(fit, s0, start, n, h.b); cut = c === null ? null : c - start; why = 'exp'; }
      else if (hwWhole.stationary && hwWhole.startIndex === 0) cut = 0;
      else cut = obmCut(x, start, n);
      if (cut !== null) {
        const e = arOf(x, start + cut, n);
        if ((n - start - cut) / e.tau >= NMIN) {
          const hw = heidelbergerWelch(x.subarray(start + cut, n));
          if (hw.stationary) { start += cut + hw.startIndex; steadyAt = n; }
          else why = 'hw';
        } else why = 'neff';
      }
    } else {
      const e = arOf(x, start, n);
      const fit = transientFit(h, e.s0);
      if (fit && fit.significant) {
        const c = admissibleCut(fit, e.s0, start, n, h.b);
        if (c === null) { steadyAt = -1; losses++; why = `lost at ${n}`; }
        else if (c > start) { start = c; moves++; }
      }
    }
    if (n === N) break;
    n = Math.min(N, n + Math.max(64, Math.floor(n / STEP)));
  }
  return { start, steadyAt, moves, losses, why };
}

const phis = (process.env.PHIS ?? '0,0.5,0.9').split(',').map(Number);
const tfr = (process.env.TF ?? '5,10,20').split(',').map(Number);
const amps = (process.env.AMP ?? '0.5,3,30').split(',').map(Number);
const N = env('N', 20000);
let pass = 0, total = 0;
for (const phi of phis) for (const tf of tfr) for (const a of amps) for (const sign of (a === 0 ? [1] : [1, -1])) {
  const T = N / tf, sigmaLr = 1 / (1 - phi), sdx = 1 / Math.sqrt(1 - phi * phi);
  const A = sign * a * sdx;
  let declared = 0, covered = 0, narrow = 0, moves = 0, steadyEnd = 0; const ratios = [], starts = [], biases = [];
  for (let seed = 0; seed < SEEDS; seed++) {
    const x = F.exponentialWarmup(F.ar1(new SeededRandom(900 + seed * 7 + Math.round(phi * 100)), phi, N), 10, A, T);
    const r = live(x);
    if (r.steadyAt >= 0 && r.steadyAt <= 0.6 * N) declared++; else if (process.env.DEBUG) console.log('  seed', seed, r);
    moves += r.moves;
    if (r.steadyAt < 0) continue;
    steadyEnd++;
    const e = arOf(x, r.start, N);
    const U = coverageFactor(0.95, e.dof) * Math.sqrt(e.s0 / (N - r.start));
    const Uideal = 1.96 * sigmaLr / Math.sqrt(N - r.start);
    if (Math.abs(e.mean - 10) <= U) covered++;
    if (U <= 2 * Uideal) narrow++;
    let b = 0; for (let i = r.start; i < N; i++) b += A * Math.exp(-i / T); b /= (N - r.start);
    ratios.push(U / Uideal); starts.push(r.start / N); biases.push(Math.abs(b) / U);
  }
  const q = (a, p) => a.length ? [...a].sort((u, v) => u - v)[Math.min(a.length - 1, Math.floor(p * a.length))].toFixed(2) : '-';
  const ok = declared >= 0.9 * SEEDS && covered >= 0.9 * SEEDS && narrow >= 0.9 * SEEDS;
  pass += ok; total++;
  // feasibility: transient at 0.6N relative to final U with a cut at 0.5N
  console.log(`phi ${phi} T=N/${tf} A/sd=${(sign * a).toFixed(1)}: steady<=60% ${declared}/${SEEDS} (at end ${steadyEnd}), |err|<=U ${covered}, U<=2Ui ${narrow}, U/Ui ${q(ratios, .5)}, cut ${q(starts, .5)} [${q(starts, .1)}-${q(starts, .9)}], bias/U ${q(biases, .5)} p90 ${q(biases, .9)}, moves ${moves}${ok ? '' : '  <-- FAIL'}`);
}
console.log(`${pass}/${total} pass`);
