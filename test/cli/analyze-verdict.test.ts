import { describe, expect, it } from 'vitest';
import { runCli, tempFile } from '../helpers/cli.js';
import { digitsAgreeing } from '../helpers/reference.js';
import { GENERATED, FROM_SHARED, HAVE_SHARED_NIST } from '../helpers/nist-strd.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import * as F from '../../src/sim/signal-families.js';

// `plateau analyze --warmup none` takes every sample as given: the certified NIST StRD univariate
// statistics (mean, s with divisor n - 1, lag-1 autocorrelation) come out of the command line
// (certified values and data: test/helpers/nist-strd.ts).

const datasets = [...GENERATED, ...FROM_SHARED];
const haveShared = HAVE_SHARED_NIST;

describe('plateau analyze --warmup none reproduces the NIST StRD certified values', () => {
  if (!haveShared) it.skip('PiDigits, Lottery, Lew, Mavro, Michelso: skipped because ../shared/reference/nist-strd is absent', () => {});
  for (const data of datasets) {
    it(`${data.name}: mean, s and r(1) to the certified values, every sample kept, a sane nu and k`, () => {
      const file = tempFile(`${data.name}.csv`, `value\n${data.values.map((v) => String(v)).join('\n')}\n`);
      const result = runCli(['analyze', file, '--json', '--warmup', 'none']);
      expect(result.status).toBe(0);
      const channel = JSON.parse(result.stdout).channels[0];
      expect(channel.n).toBe(data.values.length);
      expect(channel.excluded).toBe(0);
      expect(digitsAgreeing(channel.mean, data.mean)).toBeGreaterThanOrEqual(data.minDigits.mean);
      expect(digitsAgreeing(channel.sd, data.sd)).toBeGreaterThanOrEqual(data.minDigits.sd);
      if (data.values.length > 3) expect(digitsAgreeing(channel.acf[0], data.r1)).toBeGreaterThanOrEqual(data.minDigits.r1);
      // An anticorrelated series never gets fewer degrees of freedom than independent samples would
      // (GUM 4.2.3: n - 1), so k stays near 2 instead of the 163 a lag window's nu = 0.5 gave.
      if (data.r1 < -0.1) {
        expect(channel.dof).toBeGreaterThanOrEqual(data.values.length - 1);
        if (data.values.length > 100) {
          expect(channel.coverageFactor).toBeLessThan(2.1);
          expect(channel.notes.join(' ')).toMatch(/anticorrelated/);
        }
      }
    });
  }
});

describe('plateau analyze: the verdict explains itself', () => {
  it('a warm-up inside the record: steady with the warm-up cut, the estimator and its reason, the verdict in the table and in JSON', () => {
    // A cooling transient of 30 noise deviations, time constant 1000 samples, on AR(1) noise.
    const x = F.exponentialWarmup(F.ar1(new SeededRandom(5), 0.5, 30_000), 40, 60, 1000);
    const file = tempFile('cooling.csv', `t,oil_degC\n${Array.from(x, (v, i) => `${(i / 10).toFixed(1)},${v}`).join('\n')}\n`);
    const json = JSON.parse(runCli(['analyze', file, '--json']).stdout).channels[0];
    expect(json.state).toBe('steady');
    expect(json.verdict.ready).toBe(true);
    expect(json.window.startIndex).toBeGreaterThan(3000);
    expect(json.stationarity.warmupMethod).toBe('transient-fit');
    expect(Math.abs(json.mean - 40)).toBeLessThan(json.expandedUncertainty);
    expect(json.estimator).toBe('ar');
    expect(json.estimatorReason).toMatch(/autoregressive/);
    const table = runCli(['analyze', file]).stdout;
    expect(table).toMatch(/oil_degC\s+ready\s+steady/);
    expect(table).toContain('Estimators:');
  });

  it('a record still warming: the table says what the channel waits for, with the samples it still needs', () => {
    const x = F.exponentialWarmup(F.ar1(new SeededRandom(6), 0.5, 6000), 40, 60, 1500);
    const file = tempFile('warming.csv', `oil_degC\n${Array.from(x).join('\n')}\n`);
    const result = runCli(['analyze', file, '--json']);
    const json = JSON.parse(result.stdout).channels[0];
    expect(json.verdict.ready).toBe(false);
    expect(json.verdict.pending[0].condition).toBe('warm-up');
    expect(json.verdict.pending[0].message).toMatch(/warm-up still decaying .*more samples/);
    expect(json.verdict.pending[0].samplesToGo).toBeGreaterThan(0);
    const table = runCli(['analyze', file]).stdout;
    expect(table).toMatch(/waiting: warm-up/);
    expect(table).toMatch(/Not ready yet:\n {2}- oil_degC: warm-up: warm-up still decaying/);
  });

  it('--warmup N cuts the first N samples; a bad value is one line naming the option', () => {
    const x = F.ar1(new SeededRandom(7), 0.5, 3000);
    const file = tempFile('fixed.csv', `v\n${Array.from(x).join('\n')}\n`);
    const json = JSON.parse(runCli(['analyze', file, '--json', '--warmup', '500']).stdout).channels[0];
    expect(json.window.startIndex).toBe(500);
    expect(json.n).toBe(2500);
    const bad = runCli(['analyze', file, '--warmup', 'soon']);
    expect(bad.status).toBe(2);
    expect(bad.stderr.trim()).toBe('plateau: --warmup soon: expected auto, none or a whole number of samples');
  });

  it('an unsteady channel whose U is under a loose target: the table never calls the target met, and gives no time to it', () => {
    // Invented series: AR(1) noise, then a step of 6 and a ramp from sample 5000 on.
    const x = F.ar1(new SeededRandom(11), 0.3, 8000);
    for (let i = 5000; i < 8000; i++) (x as Float64Array)[i] = (x[i] as number) + 6 + (i - 5000) * 0.004;
    const file = tempFile('ramp.csv', `oil_degC\n${Array.from(x).join('\n')}\n`);
    const json = JSON.parse(runCli(['analyze', file, '--json', '--target', '50']).stdout).channels[0];
    expect(json.state).toBe('unsteady');
    expect(json.target.reached).toBe(true); // U itself is under 50 ...
    const table = runCli(['analyze', file, '--target', '50']).stdout;
    const row = table.split('\n').find((line) => line.startsWith('oil_degC')) as string;
    expect(row).toMatch(/not judged \(unsteady\)$/); // ... but an unsteady mean is not judged against it
    expect(row).not.toMatch(/\bmet\b|reached/);
    const tight = JSON.parse(runCli(['analyze', file, '--json', '--target', '0.01']).stdout).channels[0];
    expect(tight.target.reached).toBe(false);
    expect(tight.target.samplesToTarget).toBeNull();
    expect(tight.target.secondsToTarget).toBeNull();
    expect(tight.target.progress).toBe(0);
  });
});
