import { mser, batchSizeFromTau, type MserResult } from '../core/stationarity/mser.js';
import { heidelbergerWelch, type HeidelbergerWelchResult } from '../core/stationarity/heidelberger-welch.js';

/**
 * Where steady state begins in a window, or that it has not begun.
 *
 * The Heidelberger-Welch test on the whole window comes first: a window that is stationary from its
 * first sample is steady with nothing cut. Otherwise MSER (K. P. White Jr (1997), "An effective
 * truncation heuristic for bias reduction in simulation output", Simulation 69(6), 323-334; from
 * memory) proposes the truncation point, with its batches
 * sized from tau_int (core/stationarity/mser.ts explains why batches of 5 truncate too early on
 * strongly autocorrelated data); the Heidelberger-Welch stationarity test (P. Heidelberger &
 * P. D. Welch (1983), Operations Research 31(6), 1109-1144; as implemented by R coda) confirms that
 * the kept part is stationary, and may discard a further 10-40 % when it is not at first. Steady
 * state needs both, and at least MIN_EFFECTIVE effective samples in the kept part, so that the
 * first verdict does not rest on a handful of correlated samples.
 *
 * Cost: O(n) for MSER, O(n * order) for the test (an AR fit by Levinson-Durbin and five Cramer-von
 * Mises statistics); the pipeline runs it on a geometric schedule while the channel is warming.
 */
export interface WarmupVerdict {
  steady: boolean;
  /** Samples to drop from the front of the window (MSER truncation plus any Heidelberger-Welch discard). */
  truncation: number;
  mser: MserResult | null;
  heidelbergerWelch: HeidelbergerWelchResult | null;
  reason: string;
}

/**
 * Effective samples the kept part must hold before steady state is declared: a slow transient
 * (a time constant of several hundred samples) is indistinguishable from correlated noise in a
 * short record, so the first verdict waits for a record of this many effective samples.
 */
export const MIN_EFFECTIVE = 100;

export function detectWarmup(values: Float64Array, tauInt: number): WarmupVerdict {
  const batchSize = batchSizeFromTau(Math.max(1, tauInt));
  if (values.length < 10 * batchSize) {
    return { steady: false, truncation: 0, mser: null, heidelbergerWelch: null, reason: `fewer than ten batches of ${batchSize} samples` };
  }
  if (values.length / Math.max(1, tauInt) < MIN_EFFECTIVE) {
    return { steady: false, truncation: 0, mser: null, heidelbergerWelch: null, reason: `fewer than ${MIN_EFFECTIVE} effective samples` };
  }
  // A window that passes the stationarity test as it is keeps every sample: MSER always proposes a
  // cut, even on a stationary record, and a cut there would only throw data away.
  const whole = heidelbergerWelch(values);
  if (whole.stationary && whole.startIndex === 0) {
    return { steady: true, truncation: 0, mser: null, heidelbergerWelch: whole, reason: 'Heidelberger-Welch: stationary from the first sample' };
  }
  const proposal = mser(values, batchSize);
  if (proposal.tooShort) return { steady: false, truncation: 0, mser: proposal, heidelbergerWelch: null, reason: 'MSER: the run is too short to place the end of the warm-up' };
  const kept = values.subarray(proposal.truncation);
  if (kept.length / Math.max(1, tauInt) < MIN_EFFECTIVE) {
    return { steady: false, truncation: proposal.truncation, mser: proposal, heidelbergerWelch: null, reason: `fewer than ${MIN_EFFECTIVE} effective samples after the warm-up` };
  }
  const test = heidelbergerWelch(kept);
  if (!test.stationary || test.startIndex === null) {
    return { steady: false, truncation: proposal.truncation, mser: proposal, heidelbergerWelch: test, reason: 'Heidelberger-Welch: not stationary yet' };
  }
  const truncation = proposal.truncation + test.startIndex;
  if ((values.length - truncation) / Math.max(1, tauInt) < MIN_EFFECTIVE) {
    return { steady: false, truncation, mser: proposal, heidelbergerWelch: test, reason: `fewer than ${MIN_EFFECTIVE} effective samples after the warm-up` };
  }
  return { steady: true, truncation, mser: proposal, heidelbergerWelch: test, reason: 'MSER truncation confirmed by Heidelberger-Welch' };
}
