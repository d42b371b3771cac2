import { describe, expect, it } from 'vitest';
import { assertNoNonFinite, runCli, tempFile } from '../helpers/cli.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';

// `plateau analyze FILE --config CFG` applies the configuration's channel settings as `plateau run` does (units,
// Type B components, limits with the decision rule, combined target, stopping rule) and its derived results over the
// file's columns. Invented rig: "oven OV-3", a reference thermometer and a sensor under test read once a second.
// The checks compare the output with the formulas applied to the output's own Type A numbers (invented data is never a
// check value).

function csv(): string {
  const random = new SeededRandom(303);
  const lines = ['time,ov3.ref,ov3.dut'];
  let a = 0;
  let b = 0;
  for (let i = 0; i < 1500; i++) {
    a = 0.5 * a + 0.01 * random.normal();
    b = 0.5 * b + 0.01 * random.normal();
    lines.push(`${1_764_000_000 + i},${(120 + a).toFixed(5)},${(120.03 + b).toFixed(5)}`);
  }
  return `${lines.join('\n')}\n`;
}

const CONFIG = `
subscriptions:
  - topic: lab/ov3/+
    format: number
    channel: "ov3.{2}"
channels:
  defaults:
    unit: degC
    warmup: none
    typeB:
      - { name: reference certificate, kind: certificate, expanded: 0.02, coverageFactor: 2, shared: ov3-ref-cert }
      - { name: oven uniformity, kind: stability, halfWidth: 0.0173205 }
    dominanceFraction: 0.2
  groups:
    - match: ov3.dut
      conformity: { lower: 119.95, upper: 120.05, rule: guarded, guardFactor: 1 }
derived:
  - name: ov3.error
    unit: degC
    expression: "ov3.dut - ov3.ref + lag_corr"
    conformity: { lower: -0.1, upper: 0.1, rule: non-binary }
    constants:
      - { name: lag_corr, value: 0.002, kind: normal, standardUncertainty: 0.001, dof: 10 }
  - name: ov3.elsewhere
    expression: "ov3.missing * 2"
`;

/** u^2 of the oven uniformity: (a / sqrt 3)^2 with a = 0.0173205 (GUM 4.3.7). */
const U2 = 0.0173205 ** 2 / 3;

describe('plateau analyze --config', () => {
  const data = tempFile('ov3.csv', csv());
  const config = tempFile('ov3.yaml', CONFIG);

  it('--json: per channel the unit, combined {u_c, nu_eff, k, U, budget} and conformity; per derived result the same, with the constant and the shared certificate cancelling', () => {
    const result = runCli(['analyze', data, '--config', config, '--json', '--monte-carlo-trials', '0']);
    expect(result.stderr).toBe('');
    expect(result.status).toBe(0);
    const report = JSON.parse(result.stdout);
    assertNoNonFinite(report);
    const dut = report.channels.find((c: { name: string }) => c.name === 'ov3.dut');
    expect(dut.unit).toBe('degC');
    const uA = dut.standardUncertainty as number;
    // certificate 0.02 / 2 = 0.01 (GUM 4.3.3), uniformity 0.0173205 / sqrt 3 = 0.01 (GUM 4.3.7)
    expect(dut.combined.standardUncertainty).toBeCloseTo(Math.sqrt(uA * uA + 1e-4 + U2), 12);
    expect(dut.combined.budget.map((b: { component: string }) => b.component)).toEqual(['Type A: scatter of the readings (autocorrelation-aware)', 'reference certificate', 'oven uniformity']);
    expect(dut.combined.expandedUncertainty).toBeCloseTo(dut.combined.coverageFactor * dut.combined.standardUncertainty, 12);
    expect(dut.combined.stopping.fraction).toBe(0.2);
    expect(dut.conformity).toMatchObject({ rule: 'guarded', lower: 119.95, upper: 120.05 });
    expect(dut.conformity.guardBand).toBeCloseTo(dut.combined.expandedUncertainty, 12);
    const inAcceptance = dut.combined.value >= 119.95 + dut.conformity.guardBand && dut.combined.value <= 120.05 - dut.conformity.guardBand;
    expect(dut.conformity.verdict).toBe(inAcceptance ? 'pass' : 'fail');
    expect(dut.conformity.probability).toBeGreaterThan(0);
    const ref = report.channels.find((c: { name: string }) => c.name === 'ov3.ref');
    expect(ref.conformity).toBeNull();

    expect(report.derived.map((d: { name: string }) => d.name)).toEqual(['ov3.error']);
    expect(report.notes.join(' ')).toMatch(/derived\[1\] ov3.elsewhere: left out, its input ov3.missing is not a column/);
    const error = report.derived[0];
    const typeA = error.standardUncertainty as number;
    // the shared certificate cancels (its covariance term -2 (0.01)^2 shown); the two uniformity terms and the constant remain
    expect(error.combined.standardUncertainty).toBeCloseTo(Math.sqrt(typeA * typeA + 2 * U2 + 1e-6), 12);
    const covariance = error.combined.budget.filter((b: { evaluation: string; shared: string | null }) => b.evaluation === 'covariance' && b.shared === 'ov3-ref-cert');
    expect(covariance).toHaveLength(1);
    expect(covariance[0].contribution).toBeCloseTo(-2e-4, 12);
    expect(error.combined.budget.find((b: { quantity: string }) => b.quantity === 'lag_corr').contribution).toBeCloseTo(0.001, 12);
    expect(error.value).toBeCloseTo(error.budget[0].mean - error.budget[1].mean + 0.002, 9);
    expect(error.conformity.rule).toBe('non-binary');
    expect(error.inputs).toEqual(['ov3.dut', 'ov3.ref']);
  });

  it('the table shows u_c, U_c and the conformity outcome, and the budgets', () => {
    const result = runCli(['analyze', data, '--config', config, '--monte-carlo-trials', '0']);
    expect(result.status).toBe(0);
    const header = result.stdout.split('\n').find((line) => line.startsWith('channel'));
    expect(header).toMatch(/u_c +U_c +conformity/);
    expect(result.stdout).toMatch(/ov3\.dut: Type A: scatter of the readings \(autocorrelation-aware\) [0-9.e-]+ \([0-9.]+ %\); reference certificate/);
    expect(result.stdout).toMatch(/ov3\.dut .*(pass|fail), p_c/);
  });

  it('a channel flag given with --config overrides the configuration for every channel', () => {
    const result = runCli(['analyze', data, '--config', config, '--json', '--confidence', '0.99', '--monte-carlo-trials', '0']);
    const report = JSON.parse(result.stdout);
    expect(report.channels.map((c: { confidence: number }) => c.confidence)).toEqual([0.99, 0.99]);
    expect(report.channels[0].combined.confidence).toBe(0.99);
  });

  it('a bad configuration: exit status 2, one line per problem naming the key path', () => {
    const bad = tempFile('bad.yaml', CONFIG.replace('halfWidth: 0.0173205', 'halfWidth: -1').replace('lower: 119.95, upper: 120.05', 'lower: 121, upper: 120'));
    const result = runCli(['analyze', data, '--config', bad]);
    expect(result.status).toBe(2);
    expect(result.stderr).toContain('channels.defaults.typeB[1].halfWidth: expected a number at least 0, got -1');
    expect(result.stderr).toContain('channels.groups[0].conformity.lower: the lower limit 121 lies above the upper limit 120');
  });
});
