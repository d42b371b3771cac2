// Precision engine benchmark: per-sample cost of each estimator's maintained sums against a naive
// recompute-from-scratch baseline measured in the same run, the whole channel pipeline, a snapshot,
// the on-demand FFT autocovariance, memory per channel, and `plateau analyze` on a 1,000,000-row file.
// Run: npm run bench   (figures go to stdout; goals from the issue are printed beside them)
import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { SeededRandom, ar1Series } from '../dist/core/random/seeded-random.js';
import { ShiftedMoments } from '../dist/core/window/shifted-moments.js';
import { BlockPyramid } from '../dist/core/window/block-pyramid.js';
import { LaggedProducts } from '../dist/core/acf/lagged-products.js';
import { AutocovarianceFft } from '../dist/core/acf/autocovariance-fft.js';
import { WindowedSeries } from '../dist/core/window/windowed-series.js';
import { ChannelPipeline } from '../dist/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../dist/engine/channel-options.js';
import { EstimatorSet } from '../dist/core/tau/estimator-set.js';
import { meanUncertainty } from '../dist/core/uncertainty/mean-uncertainty.js';
import { bestOf, nsPer, line, header, verdict } from './harness.js';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const N = 4_000_000;
const L = 64;
const W = 4096;
const x = ar1Series(new SeededRandom(1), 0.9, N);
const xMild = ar1Series(new SeededRandom(2), 0.5, N);

header('precision engine: per-sample update cost');

// Running moments (shifted, compensated) vs a naive two-pass recomputation of mean and variance over
// a sliding window of W samples at every sample.
const momentsMs = bestOf(5, () => {
  const m = new ShiftedMoments();
  for (let i = 0; i < N; i++) m.add(x[i]);
  return m;
});
const naiveCount = 20_000;
const naiveMomentsMs = bestOf(2, () => {
  let sink = 0;
  for (let i = W; i < W + naiveCount; i++) {
    let s = 0;
    for (let j = i - W; j < i; j++) s += x[j];
    const m = s / W;
    let q = 0;
    for (let j = i - W; j < i; j++) q += (x[j] - m) ** 2;
    sink += q;
  }
  return sink;
});
line('running mean/variance (shifted, compensated)', nsPer(momentsMs, N).toFixed(1), 'ns/sample', `baseline two-pass over W=${W}: ${nsPer(naiveMomentsMs, naiveCount).toFixed(0)} ns (ratio ${(nsPer(naiveMomentsMs, naiveCount) / nsPer(momentsMs, N)).toFixed(0)}x)`);

// Block pyramid vs naive batch means recomputed over every level at every sample.
const pyramidMs = bestOf(5, () => {
  const p = new BlockPyramid(N, false);
  for (let i = 0; i < N; i++) p.add(i, x[i]);
  return p;
});
const naiveBatchMs = bestOf(2, () => {
  let sink = 0;
  for (let i = W; i < W + naiveCount; i++) {
    for (let b = 2; b <= W / 2; b *= 2) {
      for (let j = i - W; j + b <= i; j += b) {
        let s = 0;
        for (let t = j; t < j + b; t++) s += x[t];
        sink += s;
      }
    }
  }
  return sink;
});
line('block pyramid (all dyadic levels)', nsPer(pyramidMs, N).toFixed(1), 'ns/sample', `baseline recompute all levels over W: ${nsPer(naiveBatchMs, naiveCount).toFixed(0)} ns (ratio ${(nsPer(naiveBatchMs, naiveCount) / nsPer(pyramidMs, N)).toFixed(0)}x)`);

const pyramidMomentsMs = bestOf(5, () => {
  const p = new BlockPyramid(N, false);
  const m = new ShiftedMoments();
  for (let i = 0; i < N; i++) {
    m.add(x[i]);
    p.add(i, x[i]);
  }
  return p;
});
const pmRate = N / pyramidMomentsMs / 1e3;
line('pyramid + running moments', pmRate.toFixed(1), 'M samples/s', `goal >= 50 M/s: ${verdict(pmRate >= 50)}`);

// Lagged products: chunked dot products vs one read-modify-write per lag per sample, and vs a naive
// recompute of the autocovariance over the window at every sample.
const lagsMs = bestOf(5, () => {
  const l = new LaggedProducts(L, () => 0);
  for (let i = 0; i < N; i++) l.addNewest(x[i]);
  return l;
});
const perSampleLagsMs = bestOf(3, () => {
  const products = new Float64Array(L + 1);
  const recent = new Float64Array(2 * (L + 1));
  let p = 0;
  const span = L + 1;
  for (let i = 0; i < N; i++) {
    const d = x[i];
    recent[p] = d;
    recent[p + span] = d;
    const base = p + span;
    for (let k = 0; k <= L; k++) products[k] += d * recent[base - k];
    p = p + 1 === span ? 0 : p + 1;
  }
  return products;
});
const naiveAcfCount = 500;
const naiveAcfMs = bestOf(1, () => {
  let sink = 0;
  for (let i = W; i < W + naiveAcfCount; i++) {
    let s = 0;
    for (let j = i - W; j < i; j++) s += x[j];
    const m = s / W;
    for (let k = 0; k <= L; k++) {
      let c = 0;
      for (let j = i - W + k; j < i; j++) c += (x[j] - m) * (x[j - k] - m);
      sink += c;
    }
  }
  return sink;
});
line(`lagged products to L=${L} (chunked)`, nsPer(lagsMs, N).toFixed(1), 'ns/sample', `per-sample update loop: ${nsPer(perSampleLagsMs, N).toFixed(1)} ns (${(perSampleLagsMs / lagsMs).toFixed(2)}x); naive ACF recompute over W: ${(nsPer(naiveAcfMs, naiveAcfCount) / 1000).toFixed(0)} us`);

header('precision engine: whole channel pipeline (L = 64)');
for (const [label, window] of [
  ['growing window', { kind: 'growing', maxSamples: 1 << 23 }],
  [`sliding window W=${W}`, { kind: 'sliding', samples: W, maxSamples: W }],
]) {
  // phi = 0.5 keeps the window estimators within the 64 maintained lags (the goal's setting);
  // phi = 0.9 needs about 120 lags, which the pipeline then maintains by itself.
  for (const [series, seriesLabel] of [[xMild, 'phi 0.5, L = 64'], [x, 'phi 0.9, lags grown to the need']]) {
    for (const detectors of [false, true]) {
      let grown = L;
      const ms = bestOf(3, () => {
        const p = new ChannelPipeline('bench', { ...DEFAULT_CHANNEL_OPTIONS, window, maxLag: L, detectors });
        for (let i = 0; i < N; i++) p.push(series[i], i * 0.001);
        grown = p.series.maxLag;
        return p;
      });
      const rate = N / ms / 1e3;
      const goal = series === xMild && window.kind === 'growing' ? `goal >= 3 M/s: ${verdict(rate >= 3)}` : `(lags ${grown})`;
      line(`${label}, ${seriesLabel}, ${detectors ? 'with detectors' : 'precision engine'}`, rate.toFixed(2), 'M samples/s', goal);
    }
  }
}

header('precision engine: snapshot and on-demand FFT');
{
  const p = new ChannelPipeline('bench', { ...DEFAULT_CHANNEL_OPTIONS, window: { kind: 'sliding', samples: 65536, maxSamples: 65536 }, maxLag: L });
  for (let i = 0; i < 200_000; i++) p.push(xMild[i], i);
  // Every estimator (Geyer, Sokal, blocking, batch means, iid) with u, nu, k and U, from the
  // maintained sums; a sample is pushed between reads so no cache can answer.
  const set = new EstimatorSet();
  const reps = 2000;
  const pushOnly = bestOf(3, () => {
    for (let r = 0; r < reps; r++) p.push(xMild[r], 200_000 + r);
  });
  const ms = bestOf(3, () => {
    let s;
    for (let r = 0; r < reps; r++) {
      p.push(xMild[r], 200_000 + r);
      const result = set.run(p.series, L, null);
      s = Object.values(result.estimates).map((e) => meanUncertainty(e, 0.95));
    }
    return s;
  });
  const us = ((ms - pushOnly) * 1000) / reps;
  line('all estimators with u, nu, k, U from maintained sums (phi 0.5)', us.toFixed(1), 'us', `goal < 50 us: ${verdict(us < 50)}`);
  const full = bestOf(3, () => {
    p.push(xMild[0], 300_000);
    return p.snapshot();
  });
  line('whole snapshot with the window tests and Allan deviation (W=65536)', full.toFixed(1), 'ms', '(on demand: API detail, records, analyze)');
  const q = new ChannelPipeline('bench', { ...DEFAULT_CHANNEL_OPTIONS, window: { kind: 'sliding', samples: 65536, maxSamples: 65536 }, maxLag: L });
  for (let i = 0; i < 200_000; i++) q.push(x[i], i);
  const setFft = new EstimatorSet();
  let at = 200_000;
  const msFft = bestOf(3, () => {
    q.push(x[at % N], at++);
    return setFft.run(q.series, L, null);
  });
  line('all estimators when Sokal needs the FFT fallback (phi 0.9, W=65536)', msFft.toFixed(2), 'ms', '(window beyond the maintained lags)');
}
{
  const fft = new AutocovarianceFft();
  const window = x.subarray(0, 65536);
  const ms = bestOf(10, () => fft.compute(window, 65535));
  line('FFT autocovariance of a 65,536-sample window', ms.toFixed(2), 'ms', `goal < 10 ms: ${verdict(ms < 10)}`);
}

header('the verdict: cost of the new estimators, the spectral diagnosis and the warm-up search');
{
  const p = new ChannelPipeline('bench', { ...DEFAULT_CHANNEL_OPTIONS, window: { kind: 'sliding', samples: 65536, maxSamples: 65536 }, maxLag: L, detectors: false });
  for (let i = 0; i < 100_000; i++) p.push(xMild[i], i);
  const set = new EstimatorSet();
  const reps = 2000;
  const ar = bestOf(3, () => { let e; for (let r = 0; r < reps; r++) e = set.estimate(p.series, 'ar', null); return e; });
  line('autoregressive S(0) from the maintained lags (L = 64), per estimate', ((ar * 1000) / reps).toFixed(1), 'us', '(the auto rule; every precision check)');
  const obm = bestOf(3, () => set.estimate(p.series, 'obm', null));
  line('overlapping batch means over W = 65,536, per estimate', (obm * 1000).toFixed(0), 'us', '(snapshot only: O(n))');
  const lug = bestOf(3, () => { let e; for (let r = 0; r < reps; r++) e = set.estimate(p.series, 'lugsail', null); return e; });
  line('lugsail batch means from the pyramid, per estimate', ((lug * 1000) / reps).toFixed(2), 'us');
  const { PeriodogramWorkspace } = await import('../dist/core/spectrum/periodogram.js');
  const { diagnoseSpectrum } = await import('../dist/core/spectrum/spectral-diagnosis.js');
  const workspace = new PeriodogramWorkspace();
  const values = p.series.values();
  const diag = bestOf(5, () => diagnoseSpectrum(workspace.compute(values), p.series.autocovariance(), values.length, p.series.variance, values));
  line('spectral diagnosis of 65,536 samples (periodogram, lines, long memory)', diag.toFixed(2), 'ms', `amortised ${((diag * 1e6) / 32768).toFixed(1)} ns/sample (refreshed every 32,768 samples)`);
  const { BlockHistory } = await import('../dist/core/window/block-history.js');
  const { fitTransient } = await import('../dist/core/stationarity/transient-fit.js');
  const history = new BlockHistory(512);
  for (let i = 0; i < 1_000_000; i++) history.push(x[i] + 5 * Math.exp(-i / 50_000));
  const fit = bestOf(5, () => { let f; for (let r = 0; r < 100; r++) f = fitTransient({ means: history.means(), blockSize: history.blockSize, origin: 0, longRunVariance: 100, tauInt: 19 }); return f; });
  line('warm-up transient fit over 512 history blocks, per check', ((fit * 1000) / 100).toFixed(0), 'us', `at a check every 1/16 of a 100,000-sample window: ${(((fit / 100) * 1e6) / 6250).toFixed(1)} ns/sample`);
  const warm = ar1Series(new SeededRandom(8), 0.9, 400_000).map((v, i) => v + 40 * Math.exp(-i / 20_000));
  const withWarmup = bestOf(3, () => {
    const q2 = new ChannelPipeline('bench', { ...DEFAULT_CHANNEL_OPTIONS, maxLag: L });
    for (let i = 0; i < warm.length; i++) q2.push(warm[i], i * 0.001);
    return q2;
  });
  line('pipeline with detectors on a 400,000-sample record with a warm-up', (warm.length / withWarmup / 1e3).toFixed(2), 'M samples/s', '(the warm-up search and checks included)');
}

header('precision engine: memory');
{
  const series = new WindowedSeries({ maxSamples: W, maxLag: L, preallocate: true });
  for (let i = 0; i < 3 * W; i++) series.push(x[i], i);
  const windowBytes = series.ring.capacity * 16 + series.pyramid.byteLength;
  const fixedBytes = series.lags.byteLength + 2048; // products and chunk buffers, plus objects and scalars (estimate)
  const perSample = windowBytes / W;
  line(`bytes per windowed sample at W=${W}`, perSample.toFixed(2), 'B', `goal <= 24: ${verdict(perSample <= 24)}`);
  line('fixed bytes per channel (lag buffers + objects, estimated)', fixedBytes, 'B', `goal <= 16384: ${verdict(fixedBytes <= 16384)}`);
  line(`bytes per channel at W=${W}`, windowBytes + fixedBytes, 'B');
}

header('plateau analyze: 1,000,000 rows x 4 channels');
{
  const dir = mkdtempSync(join(tmpdir(), 'plateau-bench-'));
  const file = join(dir, 'million.csv');
  const rows = 1_000_000;
  const a = ar1Series(new SeededRandom(3), 0.9, rows);
  const b = ar1Series(new SeededRandom(4), 0.5, rows);
  const c = ar1Series(new SeededRandom(5), 0.0, rows);
  const d = ar1Series(new SeededRandom(6), 0.95, rows);
  const parts = ['time,inlet_degC,outlet_degC,flow_kg_s,dp_kPa\n'];
  for (let i = 0; i < rows; i++) parts.push(`${(i * 0.01).toFixed(2)},${(20 + 0.05 * a[i]).toFixed(4)},${(35 + 0.03 * b[i]).toFixed(4)},${(1.2 + 0.002 * c[i]).toFixed(5)},${(50 + 0.1 * d[i]).toFixed(3)}\n`);
  writeFileSync(file, parts.join(''));
  const t0 = performance.now();
  const r = spawnSync(process.execPath, [join(root, 'bin', 'plateau.js'), 'analyze', file, '--json'], { encoding: 'utf8', maxBuffer: 1 << 26 });
  const seconds = (performance.now() - t0) / 1000;
  rmSync(dir, { recursive: true, force: true });
  if (r.status !== 0) throw new Error(`analyze failed: ${r.stderr}`);
  line('analyze wall time (process start to exit)', seconds.toFixed(2), 's', `goal < 5 s: ${verdict(seconds < 5)}`);
}
