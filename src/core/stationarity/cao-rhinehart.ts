/**
 * Cao-Rhinehart R statistic: an O(1)-per-sample steady-state indicator, the ratio of two
 * exponentially filtered variance estimates (one from deviations about a filtered mean, one from
 * successive differences). At steady state with independent noise R ~ 1; a trend or drift inflates
 * the first estimate and R grows.
 *
 * Method: S. Cao & R. R. Rhinehart (1995), "An efficient method for on-line identification of
 * steady state", J. Process Control 5(6), 363-374 (from memory); equations as confirmed by a stored
 * page of S. Cao & R. R. Rhinehart (1997), "Critical values for a steady-state identifier",
 * J. Process Control 7(2), 149-152 (REFERENCES.md 9.1). For sample X_i, filter factors
 * 0 < lambda < 1:
 *   v2_i  = lambda2 (X_i - Xf_(i-1))^2 + (1 - lambda2) v2_(i-1)   (deviation from the previous filtered value)
 *   Xf_i  = lambda1 X_i + (1 - lambda1) Xf_(i-1)
 *   d2_i  = lambda3 (X_i - X_(i-1))^2 + (1 - lambda3) d2_(i-1)
 *   R_i   = (2 - lambda1) v2_i / d2_i
 * Defaults lambda1 = 0.2, lambda2 = 0.1, lambda3 = 0.1 (the recommended values, from memory; also
 * the defaults of several public implementations).
 *
 * Feed it block means, not raw samples: the statistic assumes independent noise. For an AR(1) with
 * phi = 0.9 successive differences see only a fifth of the variance, so R sits near 3.3 (median,
 * measured in the tests; 95 % of updates above 1.72) on a perfectly stationary raw series. Means of
 * blocks several tau_int long are nearly independent, and R returns to ~1 (blocks of 100 samples,
 * 5 tau_int: median 1.04, 2.6 % of updates above 1.72).
 *
 * Choices:
 * - Initialisation: the first sample sets Xf and the previous value; v2 = d2 = 0. Both variance
 *   filters then start from zero with the same weights (lambda2 = lambda3), so their ratio is not
 *   biased by the start. R is returned from the `warmupSamples`-th sample on (default 10, the
 *   memory 1/lambda2 of the variance filters) and while d2 > 0; before that, null.
 * - Critical value: CAO_RHINEHART_CRITICAL_VALUE = 1.72, the 99 % quantile of R for iid N(0,1) data
 *   with the default lambdas from a Monte Carlo run (reference-values.json
 *   cao_rhinehart_R_simulated_quantiles: 20000 series of length 600, R at the last sample; 95 %:
 *   1.44). UNVERIFIED: it substitutes for the published table of Cao & Rhinehart (1997), which we
 *   have not read. R is evaluated every sample and successive values are strongly correlated, so
 *   use it with hysteresis (several consecutive exceedances) rather than as a per-sample alarm.
 *
 * Cost: O(1) time and memory per update (four numbers of state).
 */
export interface CaoRhinehartOptions {
  /** Filter factor of the mean (default 0.2). */
  lambda1?: number;
  /** Filter factor of the squared deviation from the filtered mean (default 0.1). */
  lambda2?: number;
  /** Filter factor of the squared successive difference (default 0.1). */
  lambda3?: number;
  /** Samples before R is reported (default 10). */
  warmupSamples?: number;
}

/** Plain-data state for persistence (JSON-safe). */
export interface CaoRhinehartState {
  version: 1;
  lambda1: number;
  lambda2: number;
  lambda3: number;
  warmupSamples: number;
  /** Samples seen since the last reset. */
  count: number;
  filteredValue: number;
  filteredSquaredDeviation: number;
  filteredSquaredDifference: number;
  previousValue: number;
}

/** Adopted critical value (Monte Carlo 99 % quantile for iid data, default lambdas; unverified, see above). */
export const CAO_RHINEHART_CRITICAL_VALUE = 1.72;

function checkLambda(name: string, value: number): number {
  if (!(value > 0 && value < 1)) throw new RangeError(`CaoRhinehartFilter ${name} must be in (0, 1)`);
  return value;
}

export class CaoRhinehartFilter {
  private lambda1: number;
  private lambda2: number;
  private lambda3: number;
  private warmupSamples: number;
  private count = 0;
  private filteredValue = 0;
  private filteredSquaredDeviation = 0;
  private filteredSquaredDifference = 0;
  private previousValue = 0;

  /** @throws RangeError when a lambda is outside (0, 1) or warmupSamples is not an integer >= 2. */
  constructor(options: CaoRhinehartOptions = {}) {
    this.lambda1 = checkLambda('lambda1', options.lambda1 ?? 0.2);
    this.lambda2 = checkLambda('lambda2', options.lambda2 ?? 0.1);
    this.lambda3 = checkLambda('lambda3', options.lambda3 ?? 0.1);
    this.warmupSamples = options.warmupSamples ?? 10;
    if (!Number.isInteger(this.warmupSamples) || this.warmupSamples < 2) {
      throw new RangeError('CaoRhinehartFilter warmupSamples must be an integer >= 2');
    }
  }

  /**
   * Adds one value (a block mean) and returns R, or null during warm-up or while the successive
   * differences are all zero (a constant input).
   * @throws RangeError for a non-finite value (it would poison the filters).
   */
  update(x: number): number | null {
    if (!Number.isFinite(x)) throw new RangeError('CaoRhinehartFilter.update requires a finite value');
    this.count++;
    if (this.count === 1) {
      this.filteredValue = x;
      this.previousValue = x;
      return null;
    }
    const deviation = x - this.filteredValue;
    this.filteredSquaredDeviation = this.lambda2 * deviation * deviation + (1 - this.lambda2) * this.filteredSquaredDeviation;
    this.filteredValue = this.lambda1 * x + (1 - this.lambda1) * this.filteredValue;
    const difference = x - this.previousValue;
    this.filteredSquaredDifference = this.lambda3 * difference * difference + (1 - this.lambda3) * this.filteredSquaredDifference;
    this.previousValue = x;
    return this.ratio();
  }

  /** The current R (null during warm-up or for a constant input). */
  ratio(): number | null {
    if (this.count < this.warmupSamples || !(this.filteredSquaredDifference > 0)) return null;
    return ((2 - this.lambda1) * this.filteredSquaredDeviation) / this.filteredSquaredDifference;
  }

  /** Forgets all samples (keeps the lambdas). */
  reset(): void {
    this.count = 0;
    this.filteredValue = 0;
    this.filteredSquaredDeviation = 0;
    this.filteredSquaredDifference = 0;
    this.previousValue = 0;
  }

  state(): CaoRhinehartState {
    return {
      version: 1,
      lambda1: this.lambda1,
      lambda2: this.lambda2,
      lambda3: this.lambda3,
      warmupSamples: this.warmupSamples,
      count: this.count,
      filteredValue: this.filteredValue,
      filteredSquaredDeviation: this.filteredSquaredDeviation,
      filteredSquaredDifference: this.filteredSquaredDifference,
      previousValue: this.previousValue,
    };
  }

  /**
   * Replaces this filter's state (lambdas included) by a saved one, so that it continues exactly as
   * the saved filter would. @throws RangeError for an invalid state (this filter is then unchanged).
   */
  restore(saved: CaoRhinehartState): void {
    if (saved === null || typeof saved !== 'object' || saved.version !== 1) {
      throw new RangeError('CaoRhinehartFilter.restore: unknown state version');
    }
    const check = new CaoRhinehartFilter({
      lambda1: saved.lambda1, lambda2: saved.lambda2, lambda3: saved.lambda3, warmupSamples: saved.warmupSamples,
    });
    const numbers = [saved.filteredValue, saved.filteredSquaredDeviation, saved.filteredSquaredDifference, saved.previousValue];
    if (!Number.isInteger(saved.count) || saved.count < 0 || !numbers.every(Number.isFinite)
      || saved.filteredSquaredDeviation < 0 || saved.filteredSquaredDifference < 0) {
      throw new RangeError('CaoRhinehartFilter.restore: invalid state');
    }
    this.lambda1 = check.lambda1;
    this.lambda2 = check.lambda2;
    this.lambda3 = check.lambda3;
    this.warmupSamples = check.warmupSamples;
    this.count = saved.count;
    this.filteredValue = saved.filteredValue;
    this.filteredSquaredDeviation = saved.filteredSquaredDeviation;
    this.filteredSquaredDifference = saved.filteredSquaredDifference;
    this.previousValue = saved.previousValue;
  }

  /** A new filter continuing exactly from a saved state. @throws RangeError for an invalid state. */
  static fromState(saved: CaoRhinehartState): CaoRhinehartFilter {
    const filter = new CaoRhinehartFilter();
    filter.restore(saved);
    return filter;
  }
}
