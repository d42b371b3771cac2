import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';
import { monteCarloPropagation, validateFirstOrder, type MonteCarloResult } from '../../core/propagation/monte-carlo-propagation.js';
import type { SeededRandom } from '../../core/random/seeded-random.js';
import type { DerivedInputDistribution, DerivedSnapshot } from './derived-engine.js';

/**
 * The Monte Carlo cross-check of a derived result (JCGM 101:2008, GUM Supplement 1), run on demand
 * (records, `plateau analyze`): the channel means are drawn from a multivariate normal distribution
 * with the estimated means and covariance of the means (JCGM 101 6.4.8), pushed through the
 * compiled model trial by trial, with the adaptive stopping rule of 7.9.4 and a cap on the trials;
 * the probabilistically symmetric and shortest 95 % (or other) intervals come from the model values
 * (7.7). The first-order result is then validated as in clause 8 (validateFirstOrder, from memory):
 * |y - U - y_low| and |y + U - y_high| against the numerical tolerance delta of u at n_dig =
 * `significantDigits` (default 2).
 * Choice: the adaptive rule runs at n_dig + 1, so that the Monte Carlo ends are stable to a tenth
 * of the delta the validation uses (JCGM 101 8.2 asks the Monte Carlo results to be more precise
 * than the validation tolerance; from memory). Run at n_dig itself, the ends scatter by about
 * delta / 2 and a perfectly linear model fails the validation several percent of the time (seen
 * on a linear 3-input model: 5.2e-5 against delta = 5e-5). The cap usually ends the run first
 * (n_dig + 1 needs about 100 times the trials of n_dig); at 10^6 trials the ends of a normal output
 * scatter by about 0.003 u against delta = 0.005 u to 0.05 u at n_dig = 2, at 2 x 10^5 by 0.006 u.
 * Choice: the inputs are normal with the estimated covariance, which does not carry the
 * uncertainty of that covariance estimate (finite degrees of freedom); the first-order interval is
 * therefore compared at the normal coverage factor z_p, like with like, and not at the reported
 * t-based k. A disagreement then points at the non-linearity of the model at this uncertainty (JCGM
 * 101 9.4 is the textbook case), not at the degrees of freedom.
 * Cost: the model runs through mathjs at about 0.5 microseconds per trial for a 3-4 input model
 * (expression-model.ts), so 10^5 trials take about 0.05 s and the default cap of 10^6 about 0.5 s
 * plus the sort; memory 8 bytes per trial.
 */
export interface DerivedMonteCarloOptions {
  random: SeededRandom;
  /** n_dig of the validation (default 2); the adaptive rule runs at n_dig + 1. */
  significantDigits?: number;
  /** Cap on the trials (default 10^6). */
  maxTrials?: number;
}

/** The core result's interval and counts, plus the clause 8 validation against the first-order result. */
export interface DerivedMonteCarloResult
  extends Pick<MonteCarloResult, 'value' | 'standardUncertainty' | 'low' | 'high' | 'shortestLow' | 'shortestHigh' | 'confidence' | 'trials' | 'converged'> {
  significantDigits: number;
  /** JCGM 101 clause 8 against y +- z_p u; null when the first-order result has no uncertainty. */
  validated: boolean | null;
  lowDifference: number | null;
  highDifference: number | null;
  tolerance: number | null;
  note: string;
}

export const DEFAULT_MONTE_CARLO_TRIALS = 1_000_000;

export function derivedMonteCarlo(distribution: DerivedInputDistribution, snapshot: DerivedSnapshot, options: DerivedMonteCarloOptions): DerivedMonteCarloResult | { error: string } {
  const digits = options.significantDigits ?? 2;
  const maxTrials = options.maxTrials ?? DEFAULT_MONTE_CARLO_TRIALS;
  const confidence = snapshot.confidence;
  let result;
  try {
    result = monteCarloPropagation({
      inputs: [{ kind: 'multivariate-normal', mean: distribution.means, covariance: distribution.covariance }],
      model: distribution.compiled.model,
      confidence,
      random: options.random,
      adaptive: { significantDigits: digits + 1, maxTrials },
    });
  } catch (err) {
    return { error: `Monte Carlo propagation failed: ${(err as Error).message}` };
  }
  const out: DerivedMonteCarloResult = {
    value: result.value,
    standardUncertainty: result.standardUncertainty,
    low: result.low,
    high: result.high,
    shortestLow: result.shortestLow,
    shortestHigh: result.shortestHigh,
    confidence,
    trials: result.trials,
    converged: result.converged,
    significantDigits: digits,
    validated: null,
    lowDifference: null,
    highDifference: null,
    tolerance: null,
    note: '',
  };
  const notes: string[] = [];
  if (result.nonFiniteTrials > 0) notes.push(`${result.nonFiniteTrials} of ${result.trials} trials gave no finite value and were left out`);
  if (result.converged === false) notes.push(`the adaptive rule at ${digits + 1} significant digits stopped at the cap of ${maxTrials} trials`);
  const y = snapshot.value;
  const u = snapshot.standardUncertainty;
  if (y !== null && u !== null && u > 0) {
    const z = normalQuantile((1 + confidence) / 2, 0, 1);
    const check = validateFirstOrder({ value: y, expandedUncertainty: z * u }, { low: result.low, high: result.high }, digits, u);
    out.validated = check.validated;
    out.lowDifference = check.lowDifference;
    out.highDifference = check.highDifference;
    out.tolerance = check.tolerance;
    notes.unshift(
      check.validated
        ? `Monte Carlo (JCGM 101, ${result.trials} trials) validates the first-order result at ${digits} significant digits (clause 8)`
        : `Monte Carlo (JCGM 101, ${result.trials} trials) does not validate the first-order result at ${digits} significant digits (clause 8): the ends differ by ${fmt(check.lowDifference)} and ${fmt(check.highDifference)}, tolerance ${fmt(check.tolerance)}; the model is not linear enough over this uncertainty: prefer the Monte Carlo interval [${fmt(result.low)}, ${fmt(result.high)}]`,
    );
  } else notes.unshift('the first-order result has no uncertainty to validate');
  out.note = notes.join('; ');
  return out;
}

function fmt(v: number): string {
  return Number(v.toPrecision(4)).toString();
}
