// Detector figures (issue: steady state, stationarity breaks and the averaging limit).
// AR(1) phi = 0.9, unit innovations, over SEEDS seeds: false stationarity-lost events per million
// stationary samples at the default budget, detection delays for a step and a drift, the warm-up
// verdict on an exponential approach, and the detectors' cost against the precision engine alone.
// Run: npm run bench:detect
import { SeededRandom, ar1Series } from '../dist/core/random/seeded-random.js';
import { ChannelPipeline } from '../dist/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../dist/engine/channel-options.js';
import { WindowedSeries } from '../dist/core/window/windowed-series.js';
import { bestOf, line, header, verdict } from './harness.js';

const SEEDS = Number(process.env.SEEDS ?? 20);
const PHI = 0.9;
const options = { ...DEFAULT_CHANNEL_OPTIONS };

function run(values) {
  const pipeline = new ChannelPipeline('bench', options);
  const events = [];
  for (let i = 0; i < values.length; i++) {
    const raised = pipeline.push(values[i], i * 0.1);
    for (const event of raised) events.push(event);
  }
  return { pipeline, events };
}

function quantile(sorted, q) {
  if (sorted.length === 0) return Number.NaN;
  const position = (sorted.length - 1) * q;
  const low = Math.floor(position);
  const high = Math.ceil(position);
  return sorted[low] + (sorted[high] - sorted[low]) * (position - low);
}

header(`detectors: AR(1) phi = ${PHI}, ${SEEDS} seeds, false-alarm budget ${options.falseAlarmSamples} samples`);

// False alarms: 1,000,000 stationary samples per seed, counted after the channel first became steady.
{
  let falseAlarms = 0;
  let monitored = 0;
  const perCause = {};
  for (let seed = 0; seed < SEEDS; seed++) {
    const x = ar1Series(new SeededRandom(10_000 + seed), PHI, 1_000_000);
    const { events } = run(x);
    const steady = events.find((e) => e.kind === 'steady');
    if (!steady) continue;
    monitored += x.length - steady.at;
    for (const e of events) {
      if (e.kind === 'stationarity-lost') {
        falseAlarms++;
        perCause[e.cause] = (perCause[e.cause] ?? 0) + 1;
      }
    }
  }
  const rate = (falseAlarms / monitored) * 1e6;
  line('false stationarity-lost per million stationary samples', rate.toFixed(2), '', `${falseAlarms} in ${(monitored / 1e6).toFixed(1)} M samples ${JSON.stringify(perCause)}; goal <= 1: ${verdict(rate <= 1)}`);
}

function delays(build) {
  const found = [];
  let missed = 0;
  const causes = {};
  for (let seed = 0; seed < SEEDS; seed++) {
    const x = build(ar1Series(new SeededRandom(20_000 + seed), PHI, 120_000));
    const { events } = run(x);
    const hit = events.find((e) => e.kind === 'stationarity-lost' && e.at >= 50_000);
    if (!hit) {
      missed++;
      continue;
    }
    found.push(hit.at - 50_000);
    causes[hit.cause] = (causes[hit.cause] ?? 0) + 1;
  }
  found.sort((a, b) => a - b);
  return { median: quantile(found, 0.5), p90: quantile(found, 0.9), missed, causes };
}

{
  const step = delays((x) => x.map((v, i) => (i >= 50_000 ? v + 1.0 : v)));
  line('step +1.0 at sample 50,000: median delay', step.median.toFixed(0), 'samples', `p90 ${step.p90.toFixed(0)}, missed ${step.missed}, causes ${JSON.stringify(step.causes)}; goal median < 3000: ${verdict(step.median < 3000)}`);
  const drift = delays((x) => x.map((v, i) => (i >= 50_000 ? v + 1e-4 * (i - 50_000) : v)));
  line('drift 1e-4/sample from 50,000: median delay', drift.median.toFixed(0), 'samples', `p90 ${drift.p90.toFixed(0)}, missed ${drift.missed}, causes ${JSON.stringify(drift.causes)}; goal median < 15000: ${verdict(drift.median < 15000)}`);
}

// Warm-up: x_t = 5 exp(-t / 1000) + AR(1). Where the final window starts (after any extension of the
// warm-up), against the first sample where the remaining transient falls below u of the kept mean at
// the end of the record, and the transient bias left in the kept mean.
{
  const detected = [];
  const reference = [];
  const ratios = [];
  for (let seed = 0; seed < SEEDS; seed++) {
    const n = 60_000;
    const x = ar1Series(new SeededRandom(30_000 + seed), PHI, n).map((v, i) => v + 5 * Math.exp(-i / 1000));
    const { pipeline } = run(x);
    if (pipeline.state !== 'steady') continue;
    const snapshot = pipeline.snapshot();
    const u = snapshot.standardUncertainty;
    const start = snapshot.window.startIndex;
    detected.push(start);
    reference.push(Math.ceil(1000 * Math.log(5 / u)));
    let bias = 0;
    for (let i = start; i < n; i++) bias += 5 * Math.exp(-i / 1000);
    ratios.push(bias / (n - start) / u);
  }
  detected.sort((a, b) => a - b);
  reference.sort((a, b) => a - b);
  ratios.sort((a, b) => a - b);
  line('warm-up (tau 1000, offset 5): kept window starts, median', quantile(detected, 0.5).toFixed(0), 'sample', `p10 ${quantile(detected, 0.1).toFixed(0)}, p90 ${quantile(detected, 0.9).toFixed(0)} (${detected.length} of ${SEEDS} steady at the end)`);
  line('  sample where the transient falls below u, median', quantile(reference, 0.5).toFixed(0), 'sample');
  line('  remaining bias / u of the kept mean, median', quantile(ratios, 0.5).toFixed(2), '', `p90 ${quantile(ratios, 0.9).toFixed(2)} (below 1: no bias comparable to u)`);
}

// Cost: the whole pipeline against the precision engine alone (window sums only).
{
  const x = ar1Series(new SeededRandom(1), PHI, 2_000_000);
  const engineMs = bestOf(3, () => {
    const series = new WindowedSeries({ maxSamples: 1 << 22, maxLag: 64 });
    for (let i = 0; i < x.length; i++) series.push(x[i], i);
  });
  const pipelineMs = bestOf(3, () => run(x));
  line('per-sample cost, precision engine alone', ((engineMs * 1e6) / x.length).toFixed(0), 'ns');
  line('per-sample cost, engine + detectors + events', ((pipelineMs * 1e6) / x.length).toFixed(0), 'ns', `ratio ${(pipelineMs / engineMs).toFixed(2)}`);
}
