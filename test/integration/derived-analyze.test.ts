import { describe, expect, it } from 'vitest';
import { compileDerivedSet } from '../../src/engine/derived/expression-model.js';
import { DerivedEngine, type DerivedSnapshot } from '../../src/engine/derived/derived-engine.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import { analyzeFile, channelOptionsFromFlags, runAnalyze, type AnalyzeReport } from '../../src/cli/analyze.js';
import { parseDeriveFlags } from '../../src/cli/analyze-derived.js';
import { UsageError } from '../../src/cli/cli-error.js';
import type { DerivedReportEntry } from '../../src/engine/derived/derived-record.js';
import { assertNoNonFinite, runCli, tempFile } from '../helpers/cli.js';
import { correlatedRows } from '../engine/derived/correlated-channels.js';

// `plateau analyze --derive NAME=EXPR` through the built command line (npm test builds dist/ first):
// the JSON `derived` array against the engine fed directly with the same samples. Three runs spawn
// the command (about 2 s each on this machine); the other cases call the same functions in-process.

const N = 2500;
const T0 = 1_764_000_000;
const [A, B, C] = correlatedRows(new SeededRandom(77), N);
const times = Array.from({ length: N }, (_, i) => T0 + i * 0.1);
const csv = ['time,a,b,c', ...times.map((t, i) => `${t},${A[i]},${B[i]},${C[i]}`)].join('\n');
const file = tempFile('derived.csv', `${csv}\n`);
const DERIVE = ['--derive', 'L=a - b + 0.5 * c', '--derive', 'N=a * (b - c)'];

function analyze(args: string[]): AnalyzeReport {
  const result = runCli(['analyze', file, '--json', ...args]);
  expect(result.stderr).toBe('');
  expect(result.status).toBe(0);
  const report = JSON.parse(result.stdout) as AnalyzeReport;
  assertNoNonFinite(report);
  return report;
}

/** The engine on the samples of the common part of the channel windows the report ends with. */
function direct(report: AnalyzeReport, estimator: 'batch-means' | 'iid'): DerivedSnapshot[] {
  const start = Math.max(...report.channels.map((c) => times[c.window.startIndex] as number));
  const specs = compileDerivedSet(
    [
      { name: 'L', expression: 'a - b + 0.5 * c' },
      { name: 'N', expression: 'a * (b - c)' },
    ],
    [{ name: 'a' }, { name: 'b' }, { name: 'c' }],
    'derived',
  ).map((compiled) => ({ compiled, target: null, confidence: 0.95 }));
  const engine = new DerivedEngine(specs, { startSeconds: start, estimator });
  for (let i = 0; i < N; i++) [A, B, C].forEach((column, c) => engine.add(c, times[i] as number, column[i] as number));
  return engine.evaluate();
}

describe('plateau analyze --derive', () => {
  it('--json has a top-level derived array whose contract fields equal the engine on the same samples', () => {
    const report = analyze([...DERIVE, '--monte-carlo-trials', '0']);
    expect(report.derived.map((d) => d.name)).toEqual(['L', 'N']);
    const expected = direct(report, 'batch-means');
    report.derived.forEach((entry, i) => {
      const engine = expected[i] as DerivedSnapshot;
      for (const key of ['name', 'value', 'standardUncertainty', 'dof', 'coverageFactor', 'expandedUncertainty', 'budget', 'correlation', 'rows', 'estimator', 'independent'] as const) {
        expect(entry[key], `${entry.name}.${key}`).toEqual(engine[key]);
      }
      expect(entry.estimator).toBe('batch-means');
      expect(entry.budget.map((b) => b.channel)).toEqual(['a', 'b', 'c']);
      expect(Object.keys(entry.correlation)).toEqual([i === 0 ? 'N' : 'L']);
      expect(entry.statement).toMatch(new RegExp(`^${entry.name} = \\(`));
      expect(entry.monteCarlo).toBeNull();
      expect(typeof entry.bootstrap?.agrees).toBe('boolean');
    });
  });

  it('--estimator iid treats the rows as independent (GUM 4.2, eq. (17)): nu = rows - 1; the Monte Carlo check runs with its trial cap', () => {
    const report = analyze([...DERIVE, '--estimator', 'iid', '--monte-carlo-trials', '20000']);
    const l = report.derived[0] as DerivedReportEntry;
    const expected = direct(report, 'iid')[0] as DerivedSnapshot;
    expect(l.estimator).toBe('iid');
    expect(l.dof).toBe(l.rows - 1);
    expect(l.standardUncertainty).toEqual(expected.standardUncertainty);
    const mc = l.monteCarlo;
    expect(mc !== null && 'trials' in mc ? mc.trials : 0).toBe(20_000);
    expect(mc !== null && 'validated' in mc ? typeof mc.validated : 'none').toBe('boolean');
  });

  it('a bad --derive is one line on stderr with exit status 2', () => {
    const result = runCli(['analyze', file, '--derive', 'Q=a / zz']);
    expect(result.status).toBe(2);
    expect(result.stdout).toBe('');
    const lines = result.stderr.trimEnd().split('\n');
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/^plateau: --derive "Q=a \/ zz": unknown symbol 'zz' \(known channels: a, b, c;/);
  });

  // In-process from here: the same functions the command runs.
  it('with very few samples the default estimator falls back to independent rows and says so', async () => {
    const few = tempFile('few.csv', `${['time,a,b,c', ...times.slice(0, 20).map((t, i) => `${t},${A[i]},${B[i]},${C[i]}`)].join('\n')}\n`);
    const report = await analyzeFile(few, channelOptionsFromFlags({}), {}, parseDeriveFlags(['L=a - b + 0.5 * c'], 0));
    const l = report.derived[0] as DerivedReportEntry;
    expect(l.estimator).toBe('iid');
    expect(l.rows).toBe(19);
    expect(l.dof).toBe(18);
    expect(l.notes.join(' ')).toMatch(/fewer than 8: the rows are treated as independent observations \(GUM 4\.2\)/);
  });

  it('without a time column the rows are indexed by row number: one row per CSV row, a relative target with rows but no seconds to go', async () => {
    const plain = tempFile('plain.csv', `${['a,b,c', ...times.slice(0, 600).map((_, i) => `${A[i]},${B[i]},${C[i]}`)].join('\n')}\n`);
    const report = await analyzeFile(plain, channelOptionsFromFlags({ 'target-rel': '0.0001' }), {}, parseDeriveFlags(['L=a - b + 0.5 * c'], 0));
    const l = report.derived[0] as DerivedReportEntry;
    expect(l.bucketSeconds).toBe(1);
    expect(l.target?.reached).toBe(false);
    expect(l.target?.samplesToTarget as number).toBeGreaterThan(0);
    expect(l.target?.secondsToTarget).toBeNull();
    expect(l.rowRate).toBeNull();
  });

  it('the table shows the derived results, their budgets and correlations', async () => {
    let text = '';
    expect(await runAnalyze([file, ...DERIVE, '--monte-carlo-trials', '0'], { out: (t) => (text += t) })).toBe(0);
    expect(text).toMatch(/derived +rows +value +U +k +u +nu +u if uncorrelated +estimator +Monte Carlo +target/);
    expect(text).toMatch(/Uncertainty budgets \(share of u_c\^2, covariance terms included\):\n {2}L: a -?\d+\.\d %, b -?\d+\.\d %, c -?\d+\.\d %\n {4}r\(L, N\) = -?\d\.\d{3}/);
  });

  it.each([
    [['--derive', 'Q=a * (b - c'], /^--derive "Q=a \* \(b - c": syntax error at character \d+/],
    [['--derive', 'a - b'], /^--derive "a - b": expected NAME=EXPRESSION/],
    [['--derive', 'a=b * 2'], /^--derive "a=b \* 2": 'a' is already a channel name/],
    [['--derive', 'Q=a', '--monte-carlo-trials', '5'], /^--monte-carlo-trials 5: expected a whole number of trials/],
  ])('a bad request %j is a one-line usage error (exit status 2)', async (args, message) => {
    const error = await runAnalyze([file, ...(args as string[])], { out: () => {} }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(UsageError);
    expect((error as Error).message).not.toContain('\n');
    expect((error as Error).message).toMatch(message as RegExp);
  });
});
