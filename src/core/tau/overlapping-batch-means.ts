import { type TauEstimate, tauFloor } from './tau-estimate.js';

/**
 * Variance of a windowed mean by overlapping batch means (OBM).
 *
 * Every window of b consecutive samples is a batch (n - b + 1 of them, overlapping), and
 *   sigma2_OBM = n b / ((n - b)(n - b + 1)) * sum_j (Ybar_j(b) - Ybar)^2,
 *   Var(mean) = sigma2_OBM / n,
 * which has about 1.5 times the degrees of freedom of non-overlapping batch means of the same size,
 * nu = 1.5 (n / b - 1) (M. S. Meketon & B. Schmeiser (1984), "Overlapping batch means: something for
 * nothing?", Proc. 1984 Winter Simulation Conference, 227-230; the scaling as in J. M. Flegal &
 * G. L. Jones (2010), "Batch means and spectral variance estimators in Markov chain Monte Carlo",
 * Ann. Statist. 38(2), 1034-1070; both from memory). OBM is the Bartlett-window spectral estimator
 * in another form.
 * Choices: b = floor(sqrt(n)) (Flegal & Jones's rule); the batch sums slide with one addition and
 *   one subtraction, values shifted by the first sample so an offset costs no digits.
 * Cost: O(n) over the window's values (a snapshot-time estimator, not maintained per sample).
 */
export function overlappingBatchMeans(values: ArrayLike<number>, sampleVariance: number, batchSize?: number): TauEstimate {
  const n = values.length;
  const b = batchSize ?? Math.floor(Math.sqrt(n));
  if (!(sampleVariance > 0) || n < 8 || b < 1 || b >= n / 2) {
    return { method: 'obm', tauInt: 1, varianceOfMean: n > 0 ? sampleVariance / n : 0, dof: Math.max(0, n - 1), window: b, reliable: false, note: !(sampleVariance > 0) ? 'constant window: no variation to estimate' : 'too few samples for two batches' };
  }
  const shift = values[0] as number;
  let total = 0;
  for (let i = 0; i < n; i++) total += (values[i] as number) - shift;
  const mean = total / n;
  let batch = 0;
  for (let i = 0; i < b; i++) batch += (values[i] as number) - shift;
  let squares = (batch / b - mean) ** 2;
  for (let j = 1; j <= n - b; j++) {
    batch += (values[j + b - 1] as number) - (values[j - 1] as number);
    squares += (batch / b - mean) ** 2;
  }
  const sigma2 = ((n * b) / ((n - b) * (n - b + 1))) * squares;
  const tauInt = Math.max(sigma2 / sampleVariance, tauFloor(n));
  const batches = n / b;
  const reliable = batches >= 8;
  return {
    method: 'obm',
    tauInt,
    varianceOfMean: (sampleVariance * tauInt) / n,
    dof: Math.max(1, 1.5 * (batches - 1)),
    window: b,
    reliable,
    ...(reliable ? {} : { note: 'fewer than eight batch lengths in the window' }),
  };
}
