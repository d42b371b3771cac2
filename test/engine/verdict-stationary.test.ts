import { describe, expect, it } from 'vitest';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import * as F from '../../src/sim/signal-families.js';
import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';

// Stationary records with about 100 effective samples: the verdict must not be refused. Over 100
// seeded records per family, steady at the end in at least 90. Then false alarms: one per 10^6
// samples is the detectors' default budget (README); on 5 million stationary samples of each family,
// quantised readings included, at most 5 stationarity-lost events. The data are stationary by
// construction, so the checks need no outside reference.

const stationary: { name: string; n: number; generate: (random: SeededRandom, n: number) => Float64Array }[] = [
  { name: 'AR(1) phi = 0', n: 100, generate: (r, n) => F.ar1(r, 0, n) },
  { name: 'AR(1) phi = 0.5', n: 300, generate: (r, n) => F.ar1(r, 0.5, n) },
  { name: 'AR(1) phi = 0.9', n: 1900, generate: (r, n) => F.ar1(r, 0.9, n) },
  { name: 'AR(1) phi = 0.99', n: 19_900, generate: (r, n) => F.ar1(r, 0.99, n) },
  { name: 'AR(1) phi = 0.9, Student-t(3) innovations', n: 1900, generate: (r, n) => F.ar1(r, 0.9, n, { innovations: 't3' }) },
  { name: 'ARMA(1,1) phi = 0.8, theta = 0.4', n: 1000, generate: (r, n) => F.arma11(r, 0.8, 0.4, n) },
  { name: 'AR(2) complex roots r = 0.9, omega = pi/8', n: 250, generate: (r, n) => F.ar2Complex(r, 0.9, Math.PI / 8, n) },
  { name: 'limit cycle, period 50, on AR(1) phi = 0.5', n: 600, generate: (r, n) => F.limitCycle(r, n, { amplitude: 2, period: 50, phi: 0.5 }) },
  { name: 'quantised AR(1) phi = 0.5, step 3.3 sigma', n: 600, generate: (r, n) => F.quantise(F.ar1(r, 0.5, n, { sigma: 0.3 }), 1, 0.3) },
];

describe('stationary records with about 100 effective samples are called steady', () => {
  stationary.forEach((family, index) => {
    it(`${family.name} (n = ${family.n}): steady at the end in >= 90 of 100 records`, () => {
      let steady = 0;
      for (let r = 0; r < 100; r++) {
        const x = family.generate(new SeededRandom(40_000 + 1000 * index + r), family.n);
        const pipeline = new ChannelPipeline('stationary', DEFAULT_CHANNEL_OPTIONS);
        for (let i = 0; i < x.length; i++) pipeline.push(x[i] as number, i * 0.1);
        if (pipeline.state === 'steady') steady++;
      }
      console.log(`${family.name}: steady in ${steady} of 100`);
      expect(steady).toBeGreaterThanOrEqual(90);
    }, 240_000);
  });
});

const SAMPLES = 5_000_000;

describe('false alarms on stationary families at the default budget (one per 10^6 samples)', () => {
  const families = [
    ...stationary.filter((f) => !f.name.startsWith('AR(1) phi = 0.99')),
    { name: 'AR(1) phi = 0.99', generate: (r: SeededRandom, n: number) => F.ar1(r, 0.99, n) },
    { name: 'quantised AR(1) phi = 0.9, step 2.2 sigma', generate: (r: SeededRandom, n: number) => F.quantise(F.ar1(r, 0.9, n, { sigma: 0.2 }), 0.5, 0.1) },
  ];
  families.forEach((family, index) => {
    it(`${family.name}: at most 5 stationarity-lost events in 5 million samples`, () => {
      const x = family.generate(new SeededRandom(77_000 + index), SAMPLES);
      const pipeline = new ChannelPipeline('alarms', DEFAULT_CHANNEL_OPTIONS);
      let lost = 0;
      let steadyAt = -1;
      for (let i = 0; i < x.length; i++) {
        for (const e of pipeline.push(x[i] as number, i * 0.1)) {
          if (e.kind === 'steady' && steadyAt < 0) steadyAt = i;
          if (e.kind === 'stationarity-lost') lost++;
        }
      }
      console.log(`${family.name}: ${lost} false alarms in ${((SAMPLES - steadyAt) / 1e6).toFixed(2)} million monitored samples`);
      expect(steadyAt).toBeGreaterThanOrEqual(0);
      expect(lost).toBeLessThanOrEqual(5);
    }, 240_000);
  });
});
