import { describe, expect, it } from 'vitest';
import { compileDerived, compileDerivedSet } from '../../../src/engine/derived/expression-model.js';
import { DerivedEngine, type DerivedSnapshot } from '../../../src/engine/derived/derived-engine.js';
import { derivedMonteCarlo, type DerivedMonteCarloResult } from '../../../src/engine/derived/derived-monte-carlo.js';
import { bootstrapCrossCheck, derivedBootstrapCheck, type BootstrapCheck } from '../../../src/engine/derived/bootstrap-cross-check.js';
import { derivedRecordCsv, derivedReportEntry, derivedVerdict } from '../../../src/engine/derived/derived-record.js';
import { stationaryBootstrapVarianceOfMean } from '../../../src/core/bootstrap/stationary-bootstrap.js';
import { SeededRandom, ar1Series } from '../../../src/core/random/seeded-random.js';
import { correlatedRows } from './correlated-channels.js';

/** The fields of a snapshot the Monte Carlo check reads (value, u and p of the first-order result). */
function firstOrder(value: number, standardUncertainty: number): DerivedSnapshot {
  return { value, standardUncertainty, confidence: 0.95 } as DerivedSnapshot;
}

describe('derivedMonteCarlo (JCGM 101:2008, adaptive, with the clause 8 validation)', () => {
  const loss = compileDerived({ name: 'loss', expression: 'x1^2 + x2^2' }, [{ name: 'x1' }, { name: 'x2' }], 'derived[0]');

  // JCGM 101:2008 9.4 (comparison loss; clause text from memory), x1 = 0.010, x2 = 0, u = 0.005
  // each: exact mean x1^2 + 2u^2 = 150e-6 and sd sqrt(4 x1^2 u^2 + 4 u^4 (1 + r^2)) = 111.80e-6
  // (r = 0) and 120.52e-6 (r = 0.9), DERIVED-REFERENCES.md section 3.3 (exact law, recomputed).
  // The first-order result (y = 100e-6, u = 2 x1 u = 100e-6 whatever r) is not validated.
  for (const [r, exactSd] of [
    [0, 111.8034e-6],
    [0.9, 120.52e-6],
  ] as const) {
    it(`9.4, x1 = 0.010, r = ${r}: Monte Carlo mean 150e-6 and sd ${(exactSd * 1e6).toFixed(2)}e-6 (exact), first order not validated`, () => {
      const u2 = 0.005 ** 2;
      const result = derivedMonteCarlo(
        { compiled: loss, means: Float64Array.of(0.01, 0), covariance: Float64Array.of(u2, r * u2, r * u2, u2) },
        firstOrder(100e-6, 100e-6),
        { random: new SeededRandom(94), maxTrials: 200_000 },
      ) as DerivedMonteCarloResult;
      // Monte Carlo error at 2e5 trials: the mean's se is sd / sqrt(M) = 0.25e-6; the sd's relative
      // se is about sqrt((kurtosis - 1) / (4 M)) < 0.3 % for this law (kurtosis below 10):
      // tolerances of 1.5e-6 on the mean (6 se) and 2 % on the sd (over 6 se).
      expect(Math.abs(result.value - 150e-6)).toBeLessThan(1.5e-6);
      expect(Math.abs(result.standardUncertainty / exactSd - 1)).toBeLessThan(0.02);
      expect(result.validated).toBe(false);
      expect(result.note).toMatch(/does not validate the first-order result at 2 significant digits \(clause 8\)/);
    });
  }

  it('a linear model of correlated inputs is validated, and the Monte Carlo u equals the first-order one', () => {
    const difference = compileDerived({ name: 'd', expression: 'a - b' }, [{ name: 'a' }, { name: 'b' }], 'derived[0]');
    // u^2 = 0.04 + 0.09 - 2 * 0.8 * 0.2 * 0.3 = 0.034 (GUM 5.2 eq. (16)).
    const u = Math.sqrt(0.034);
    const result = derivedMonteCarlo(
      { compiled: difference, means: Float64Array.of(10, 3), covariance: Float64Array.of(0.04, 0.048, 0.048, 0.09) },
      firstOrder(7, u),
      { random: new SeededRandom(7), maxTrials: 1_000_000 },
    ) as DerivedMonteCarloResult;
    expect(result.validated).toBe(true);
    // The adaptive rule runs at 3 significant digits (or to the cap): u within 1 % (the sd of a
    // normal sample of 1e6 has relative se 0.07 %).
    expect(Math.abs(result.standardUncertainty / u - 1)).toBeLessThan(0.01);
    expect(result.trials).toBeGreaterThanOrEqual(20_000);
  });
});

describe('bootstrap cross-check (stationary bootstrap, Politis & Romano 1994; block length Politis & White 2004/2009)', () => {
  const phi = 0.5;
  const n = 4000;
  const series = ar1Series(new SeededRandom(401), phi, n);
  // AR(1) with unit innovations: variance 1 / (1 - phi^2), long-run variance 1 / (1 - phi)^2, so
  // u(mean) = 1 / ((1 - phi) sqrt(n)) (common practice).
  const trueU = 1 / ((1 - phi) * Math.sqrt(n));

  it('the bootstrap standard error of the mean matches its exact stationary-bootstrap value (closed form of Politis & Romano 1994, checked by simulation in DERIVED-REFERENCES.md 5)', () => {
    const check = bootstrapCrossCheck('x', series, { standardUncertainty: trueU, dof: null }) as BootstrapCheck;
    const exact = Math.sqrt(stationaryBootstrapVarianceOfMean(series, check.blockLength));
    // R = 1000 replicates: relative se of a standard deviation 1 / sqrt(2 x 999) = 2.2 %; 4 se = 9 %.
    expect(Math.abs((check.mean?.standardError as number) / exact - 1)).toBeLessThan(0.09);
    expect(check.agrees).toBe(true);
    expect(check.note).toMatch(/^bootstrap and analytic uncertainty of the mean agree/);
  });

  it('an analytic u that ignores the autocorrelation (s / sqrt(n)) is flagged as disagreeing', () => {
    let mean = 0;
    for (const v of series) mean += v / n;
    let s2 = 0;
    for (const v of series) s2 += (v - mean) ** 2 / (n - 1);
    const check = bootstrapCrossCheck('x', series, { standardUncertainty: Math.sqrt(s2 / n), dof: n - 1 }) as BootstrapCheck;
    expect(check.agrees).toBe(false);
    expect(check.note).toMatch(/DISAGREE/);
  });

  it('with spikes the median and trimmed mean are far less uncertain than the mean (common practice)', () => {
    const random = new SeededRandom(402);
    const spiky = ar1Series(random, 0.3, 3000).map((v) => (random.uniform() < 0.01 ? v + 60 : v));
    const check = bootstrapCrossCheck('spiky', spiky, null) as BootstrapCheck;
    expect(check.agrees).toBeNull();
    expect(check.median?.standardError as number).toBeLessThan(0.5 * (check.mean?.standardError as number));
    expect(check.trimmedMean?.standardError as number).toBeLessThan(0.5 * (check.mean?.standardError as number));
  });

  it('a long window is reduced to block means first (bounded work), and says so', () => {
    const long = ar1Series(new SeededRandom(403), phi, 20_000);
    const check = bootstrapCrossCheck('long', long, { standardUncertainty: 1 / ((1 - phi) * Math.sqrt(20_000)), dof: null }, { replicates: 300 }) as BootstrapCheck;
    expect(check.aggregation).toBe(3);
    expect(check.values).toBe(6666);
    expect(check.note).toMatch(/run on 6666 means of 3 consecutive samples/);
    expect(check.agrees).toBe(true);
  });

  it('a derived result: the bootstrap of its linearised series agrees with the batch-means u_c', () => {
    const columns = correlatedRows(new SeededRandom(404), 3000);
    const spec = compileDerivedSet([{ name: 'L', expression: 'a - b + 0.5 * c' }], [{ name: 'a' }, { name: 'b' }, { name: 'c' }], 'derived').map((compiled) => ({ compiled, target: null, confidence: 0.95 }));
    const engine = new DerivedEngine(spec);
    for (let i = 0; i < 3000; i++) for (let c = 0; c < 3; c++) engine.add(c, i, (columns[c] as Float64Array)[i] as number);
    const snapshot = engine.evaluate()[0] as DerivedSnapshot;
    const check = derivedBootstrapCheck(engine, snapshot) as BootstrapCheck;
    expect(check.values).toBe(snapshot.rows);
    expect(check.median).toBeNull();
    expect(check.agrees).toBe(true);
    // The linearised series' mean is the estimate (linear model): same value to round-off.
    expect(Math.abs((check.mean?.estimate as number) - (snapshot.value as number))).toBeLessThan(1e-12);
  });
});

describe('derived record entries', () => {
  it('verdict, GUM statement and the CSV export of the entries', () => {
    const columns = correlatedRows(new SeededRandom(405), 1000);
    const spec = compileDerivedSet([{ name: 'rig.q', unit: 'kW', expression: 'a - b' }], [{ name: 'a' }, { name: 'b' }], 'derived').map((compiled) => ({ compiled, target: { value: 0.05, relative: false, on: 'U' as const }, confidence: 0.95 }));
    const engine = new DerivedEngine(spec);
    for (let i = 0; i < 1000; i++) for (let c = 0; c < 2; c++) engine.add(c, i, (columns[c] as Float64Array)[i] as number);
    const snapshot = engine.evaluate()[0] as DerivedSnapshot;
    expect(snapshot.target?.reached).toBe(true);
    const warming = derivedVerdict(snapshot, true, { a: 'steady', b: 'warming' }, true);
    expect(warming).toEqual({ atTarget: false, inputStates: { a: 'steady', b: 'warming' }, waitingFor: ['b is warming'] });
    const verdict = derivedVerdict(snapshot, true, { a: 'steady', b: 'precise' }, true);
    expect(verdict.atTarget).toBe(true);
    const entry = derivedReportEntry(engine, snapshot, verdict, { monteCarloTrials: 0 });
    expect(entry.statement).toMatch(/^rig\.q = \(1\.\d+ ± 0\.\d+\) kW, where the number following ± is the expanded uncertainty/);
    const csv = derivedRecordCsv([entry]).split('\r\n');
    expect(csv[0]).toBe('name,unit,value,standardUncertainty,dof,coverageFactor,expandedUncertainty,confidence,estimator,rows,multivariateEss,atTarget,monteCarloLow,monteCarloHigh,monteCarloValidated,bootstrapAgrees,budget,statement,combinedStandardUncertainty,combinedDof,combinedCoverageFactor,combinedExpandedUncertainty,decisionRule,lowerLimit,upperLimit,guardBand,conformity,conformanceProbability,provisional,caution');
    expect(csv[1]).toMatch(new RegExp(`^rig\\.q,kW,${String(snapshot.value).replace('.', '\\.')},`));
    expect(csv).toHaveLength(3); // header, one row, the final CRLF
  });
});
