// Study: warm-up truncation methods on exponential warm-up families, simulated live.
import { SeededRandom } from '../../dist/core/random/seeded-random.js';
import * as F from '../../dist/sim/signal-families.js';
import { fitAutoregression } from '../../dist/core/tau/autoregressive-spectrum.js';
import { laggedProductSums } from '../../dist/core/acf/direct-autocovariance.js';
import { heidelbergerWelch } from '../../dist/core/stationarity/heidelberger-welch.js';
import { mser } from '../../dist/core/stationarity/mser.js';
import { coverageFactor } from '../../dist/core/uncertainty/coverage-factor.js';

const SEEDS = Number(process.env.SEEDS ?? 20);
const METHOD = process.env.METHOD ?? 'minvar';
const RETRUNC = process.env.RETRUNC !== '0';
const NMIN = Number(process.env.NMIN ?? 50);
const CANDS = Number(process.env.CANDS ?? 32);
const MARGIN = Number(process.env.MARGIN ?? 1);
const MAXCUT = Number(process.env.MAXCUT ?? 0.75);
const MAXFRAC = Number(process.env.MAXFRAC ?? 0.75);

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

function obmVar(x, from, to, b) {
  const n = to - from;
  let mean = 0;
  for (let i = from; i < to; i++) mean += x[i];
  mean /= n;
  let w = 0;
  for (let i = from; i < from + b; i++) w += x[i];
  let sq = (w / b - mean) ** 2;
  for (let j = from + 1; j <= to - b; j++) { w += x[j + b - 1] - x[j - 1]; sq += (w / b - mean) ** 2; }
  return (b / ((n - b) * (n - b + 1))) * sq; // variance of the mean
}
const FULL = process.env.FULL !== '0';
const UPPER = process.env.UPPER !== '0';
const DELTA = Number(process.env.DELTA ?? 0.2);
const THRESH = Number(process.env.THRESH ?? 16);
function expFit(x, from, to, tau) {
  const len = to - from;
  const b = Math.max(1, Math.ceil(len / 128), Math.ceil(2 * tau));
  const K = Math.floor(len / b);
  if (K < 16) return null;
  const y = new Float64Array(K), t = new Float64Array(K);
  for (let k = 0; k < K; k++) { let s = 0; for (let i = 0; i < b; i++) s += x[from + k * b + i]; y[k] = s / b; t[k] = k * b + (b - 1) / 2; }
  let ym = 0; for (const v of y) ym += v; ym /= K;
  let rss0 = 0; for (const v of y) rss0 += (v - ym) ** 2;
  const grid = []; for (let T = b / 2; T <= 4 * len; T *= 1.15) grid.push(T);
  const fits = grid.map((T) => {
    let se = 0, see = 0, sye = 0;
    for (let k = 0; k < K; k++) { const e = Math.exp(-t[k] / T); se += e; see += e * e; sye += e * y[k]; }
    const em = se / K; const sxx = see - K * em * em; if (!(sxx > 1e-12)) return { T, rss: rss0, A: 0, mu: ym };
    const A = (sye - em * ym * K) / sxx; const mu = ym - A * em;
    let rss = 0; for (let k = 0; k < K; k++) rss += (y[k] - mu - A * Math.exp(-t[k] / T)) ** 2;
    return { T, rss, A, mu };
  });
  let best = fits[0]; for (const f of fits) if (f.rss < best.rss) best = f;
  const s2 = best.rss / (K - 3);
  const delta = (rss0 - best.rss) / s2;
  // Upper end of the profile interval for T.
  let up = best; for (const f of fits) if (f.T > up.T && f.rss <= best.rss + 4 * s2) up = f;
  return { best, up, delta, b, s2 };
}
// Returns { cut } relative to window start, or null.
function propose(x, from, to) {
  const n = to - from;
  if (METHOD === 'exp') {
    const F0 = FULL ? 0 : from;
    const tail = arOf(x, from + Math.floor(n / 2), to);
    const fit = expFit(x, F0, to, tail.tau);
    if (fit && fit.delta > THRESH) {
      const { A, T } = UPPER ? fit.up : fit.best;
      // smallest cut (absolute, >= from) with |bias| <= DELTA * u(c)
      for (let c = from; c < to - 0.1 * n; c += fit.b) {
        const bias = Math.abs(A) * T * (Math.exp(-(c - F0) / T) - Math.exp(-(to - F0) / T)) / (to - c);
        const u = Math.sqrt(tail.s0 / (to - c));
        if (bias <= DELTA * u) return c - from;
      }
      return null;
    }
    // no transient found: fall through to the OBM criterion
  }
  if (METHOD === 'mser') {
    const tail = arOf(x, from + Math.floor(n / 2), to);
    const m = Math.max(5, Math.ceil(2 * tail.tau));
    if (n < 10 * m) return null;
    const r = mser(x.subarray(from, to), m);
    if (r.tooShort) return null;
    return r.truncation;
  }
  let best = -Infinity, cut = 0;
  for (let c = 0; c <= CANDS * MAXFRAC; c++) {
    const start = Math.floor((c * n) / CANDS);
    let crit;
    if (METHOD === 'obm' || METHOD === 'exp') {
      crit = -obmVar(x, from + start, to, Math.max(1, Math.floor((n - start) / Number(process.env.B ?? 16))));
    } else {
      const e = arOf(x, from + start, to);
      crit = METHOD === 'neff' ? (n - start) / e.tau : -e.s0 / (n - start);
    }
    if (crit > best) { best = crit; cut = start; }
  }
  return cut;
}

function significantFit(x, from, to) {
  const tail = arOf(x, from + Math.floor((to - from) / 2), to);
  const fit = expFit(x, FULL ? 0 : from, to, tail.tau);
  if (!(fit && fit.delta > THRESH)) return null;
  if (!FULL) return fit;
  // Significant over the full history: does its bias bound allow the current start?
  const { A, T } = UPPER ? fit.up : fit.best;
  const bias = Math.abs(A) * T * (Math.exp(-from / T) - Math.exp(-to / T)) / (to - from);
  return bias <= DELTA * Math.sqrt(tail.s0 / (to - from)) ? null : fit;
}
function confirm(x, from, to) {
  if (METHOD === 'exp' && significantFit(x, from, to)) return { ok: false, why: 'exp' };
  const e = arOf(x, from, to);
  if ((to - from) / e.tau < NMIN) return { ok: false, why: 'neff' };
  const hw = heidelbergerWelch(x.subarray(from, to));
  if (!hw.stationary) return { ok: false, why: 'hw' };
  return { ok: true, extra: hw.startIndex };
}

function live(x) {
  let start = 0, steadyAt = -1, n = 256, moves = 0, losses = 0, why = '', lastWhy = '';
  const N = x.length;
  for (;;) {
    if (n > N) n = N;
    const whole = heidelbergerWelch(x.subarray(start, n));
    const pre = METHOD === 'exp' ? significantFit(x, start, n) : null;
    let cut = null;
    if (!pre && whole.stationary && whole.startIndex === 0) cut = 0; else cut = propose(x, start, n);
    let ok = false;
    if (cut !== null) {
      if (cut > 0) cut = Math.min(Math.floor(MARGIN * cut), Math.floor(MAXCUT * (n - start)));
      const c = confirm(x, start + cut, n);
      lastWhy = c.why;
      if (c.ok) { ok = true; if (cut + c.extra > 0 && steadyAt >= 0) moves++; start += cut + c.extra; }
    }
    if (ok && steadyAt < 0) steadyAt = n;
    if (!ok && steadyAt >= 0 && (!RETRUNC || pre)) { steadyAt = -1; losses++; why = `lost at ${n} cut ${cut} ${lastWhy}`; }
    if (n === N) break;
    n = Math.min(N, n + Math.max(64, Math.floor(n / 8)));
  }
  return { start, steadyAt, moves, losses, why };
}

const phis = (process.env.PHIS ?? '0,0.5,0.9').split(',').map(Number);
const tfr = (process.env.TF ?? '5,10,20').split(',').map(Number);
const sfr = process.env.AMP ? process.env.AMP.split(',').map((v) => -Number(v)) : (process.env.SF ?? '0.3,0.45').split(',').map(Number);
const N = Number(process.env.N ?? 20000);
let allOk = 0, allRuns = 0;
for (const phi of phis) for (const tf of tfr) for (const s of sfr) for (const sign of [1, -1]) {
  const T = N / tf;
  const sigmaLr = 1 / (1 - phi);
  const uFinal = sigmaLr / Math.sqrt(N * (1 - s));
  const A = s < 0 ? sign * -s / Math.sqrt(1 - phi * phi) : s === 0 ? 0 : sign * uFinal * Math.exp((s * N) / T);
  let declared = 0, covered = 0, narrow = 0, moves = 0; const ratios = [], starts = [], biases = [];
  for (let seed = 0; seed < SEEDS; seed++) {
    const x = F.exponentialWarmup(F.ar1(new SeededRandom(900 + seed * 7 + Math.round(phi * 100)), phi, N), 10, A, T);
    const r = live(x);
    if (r.steadyAt >= 0 && r.steadyAt <= 0.6 * N) declared++; else if (process.env.DEBUG) console.log('  seed', seed, 'steadyAt', r.steadyAt, 'losses', r.losses, 'start', r.start, r.why);
    moves += r.moves;
    if (r.steadyAt < 0) continue;
    const e = arOf(x, r.start, N);
    const k = coverageFactor(0.95, e.dof);
    const U = k * Math.sqrt(e.s0 / (N - r.start));
    const Uideal = 1.96 * sigmaLr / Math.sqrt(N - r.start);
    if (Math.abs(e.mean - 10) <= U) covered++;
    if (U <= 2 * Uideal) narrow++;
    ratios.push(U / Uideal); starts.push(r.start / N);
    let b = 0; for (let i = r.start; i < N; i++) b += A * Math.exp(-i / T); b /= (N - r.start); biases.push(Math.abs(b) / U);
  }
  const ok = declared >= 0.9 * SEEDS && covered >= 0.9 * SEEDS && narrow >= 0.9 * SEEDS;
  allOk += ok ? 1 : 0; allRuns++;
  const med = (a) => a.length ? [...a].sort((p, q) => p - q)[Math.floor(a.length / 2)].toFixed(2) : '-';
  console.log(`phi ${phi} T=N/${tf} s=${s} ${sign > 0 ? 'cool' : 'heat'} A/sd=${(A * Math.sqrt(1 - phi * phi)).toFixed(1)}: declared<=60% ${declared}/${SEEDS}, |err|<=U ${covered}, U<=2Uideal ${narrow}, U/Uideal med ${med(ratios)}, cut med ${med(starts)}, bias/U med ${med(biases)} p90 ${biases.length ? [...biases].sort((p,q)=>p-q)[Math.floor(0.9*biases.length)].toFixed(2) : '-'}, moves ${moves} ${ok ? '' : ' <-- FAIL'}`);
}
console.log(`${METHOD}: ${allOk}/${allRuns} families pass`);
