import { mser, batchSizeFromTau, type MserResult } from '../core/stationarity/mser.js';
import { heidelbergerWelch, type HeidelbergerWelchResult } from '../core/stationarity/heidelberger-welch.js';
import { fitTransient, admissibleStart, transientBias, warmupExplains, rampAndHoldRss, MIN_FIT_BLOCKS, type TransientFit, type TransientFitInput } from '../core/stationarity/transient-fit.js';
import { fitTwoLags } from '../core/stationarity/two-lag-fit.js';
import { autoregressiveSpectrumOfValues } from '../core/tau/autoregressive-spectrum.js';
import type { BlockHistory } from '../core/window/block-history.js';

/**
 * Where steady state begins in a window, or why it has not begun yet.
 *
 * The setting (`warmup` in the channel options, `--warmup` in analyze):
 *   auto   find the end of the warm-up and confirm steady state on the kept samples only;
 *   none   every sample is taken as given: no cut, steady once the window holds MIN_EFFECTIVE
 *          effective samples (the user vouches for the record, e.g. certified reference data);
 *   N      the first N samples since the window began are the warm-up: cut there, then steady
 *          once the rest holds MIN_EFFECTIVE effective samples.
 *
 * `auto`, each time the pipeline checks (a geometric schedule while warming):
 * 1. The transient fit (core/stationarity/transient-fit.ts) over the whole record since the window
 *    began, cut samples included: when a decaying exponential explains it significantly, the
 *    start is the earliest one at which the rest of the fitted transient biases the kept mean by
 *    at most BIAS_TOLERANCE standard uncertainties; none yet means the warm-up is still decaying.
 * 2. Otherwise the Heidelberger-Welch test of the whole window (P. Heidelberger & P. D. Welch
 *    (1983), Operations Research 31(6), 1109-1144, as coda's heidel.diag): stationary from its
 *    first sample, nothing is cut (a cut would only throw data away).
 * 3. Otherwise MSER (K. P. White Jr (1997), Simulation 69(6), 323-334) with batches of 2 tau_int
 *    proposes the cut (a warm-up that is not exponential: an overshoot, a ramp and hold).
 * The kept part is then confirmed on its own samples: at least MIN_EFFECTIVE effective samples by
 * its own autoregressive tau_int (the transient is not there to inflate it), and the
 * Heidelberger-Welch test on it (which may discard a further 10-40 %).
 * Why the record before the cut still counts: the first, visible part of a warm-up tells its time
 * constant; on the kept part alone a tail that has sunk into the noise is invisible, yet it biases
 * the mean (measured in bench/verdict.js: detection-only rules such as MSER or the truncation that
 * maximises the effective sample size left a bias of 0.3-0.7 U on exponential warm-ups with time
 * constants of a tenth of the record; the fit leaves below 0.15 U).
 * The S(0) that scales the fit is the spectral density at zero of the window's second half (the
 * Heidelberger-Welch computation's own), where a warm-up has usually ended.
 *
 * Cost: O(n * order) for each Heidelberger-Welch test and the autoregression of the kept part
 *   (order <= 10 log10 n), O(n) for MSER, O(K * 80) for the fit over K <= 512 history blocks.
 */
export type WarmupSetting = { mode: 'auto' } | { mode: 'none' } | { mode: 'fixed'; samples: number };

export interface WarmupPending {
  condition: 'warm-up' | 'effective-samples' | 'break';
  message: string;
  /** Samples still needed, when it can be said. */
  samplesToGo: number | null;
}

export interface TransientSummary {
  amplitude: number;
  timeConstant: number;
  level: number;
  /** Fall of the residual sum of squares against a constant, in block variances. */
  improvement: number;
  significant: boolean;
  /** Decayed within the record (a warm-up seen to settle, not a level still moving). */
  decays: boolean;
  /** Residual over noise variance of the fit (see core/stationarity/transient-fit.ts). */
  lackOfFit: number;
  /** A faster lag fitted with the main one (core/stationarity/two-lag-fit.ts), or null. */
  second: { timeConstant: number; amplitude: number } | null;
}

export interface WarmupVerdict {
  steady: boolean;
  /** Absolute index of the first kept sample (the proposal, when not steady yet). */
  start: number;
  method: 'transient-fit' | 'whole-window' | 'mser' | 'none' | 'fixed';
  reason: string;
  pending: WarmupPending | null;
  transient: TransientSummary | null;
  heidelbergerWelch: HeidelbergerWelchResult | null;
  mser: MserResult | null;
  /** Effective samples of the kept part (its own autoregressive tau_int). */
  effectiveSamples: number | null;
}

/** Effective samples the kept part must hold before steady state is declared. */
export const MIN_EFFECTIVE = 50;
/**
 * Largest transient bias left in the kept mean when steady state is declared, in standard
 * uncertainties of that mean.
 */
export const BIAS_TOLERANCE = 0.25;
/**
 * A steady window's start moves later only when the fitted transient's bias there exceeds this
 * many standard uncertainties (hysteresis: the time constant is underestimated early and grows as
 * the tail is seen, so a start that was just admissible would otherwise creep at every check).
 */
export const BIAS_TRIGGER = 0.6;
/**
 * Largest lack of fit (residual over noise variance of the block means, transient-fit.ts) at which
 * the exponential is taken as the warm-up's shape. Measured on the exponential families of the
 * studies (src/sim/warmup-families.ts, 36 families x 4 seeds, every 500 samples): median 0.98,
 * 99th percentile 2.0, largest 2.6. Ramps, S-curves and step-then-settle shapes read 4 to several
 * hundred; for them the fit's tail is a fiction that pushes the start late or withdraws a sound
 * verdict, so MSER places the cut instead. A ramp and hold under heavier noise can read below the
 * limit: a ramp-and-hold fit that beats the exponential by RAMP_MARGIN block variances says so.
 */
export const LACK_OF_FIT_LIMIT = 3;

/** Whether a fitted transient is the warm-up's shape: significant and no worse than exponential noise allows. */
export function transientSummary(fit: TransientFit): TransientSummary {
  return summary(fit);
}

export function fitDescribesWarmup(fit: TransientFit): boolean {
  // The ramp's O(K^2) fit last, and only for a fit that passes the cheap checks.
  return fit.significant && fit.lackOfFit <= LACK_OF_FIT_LIMIT && fit.rss <= rampAndHoldRss(fit.means) + RAMP_MARGIN * fit.noiseVariance;
}

/**
 * A ramp that ends and holds must fit better than the exponential by this many block variances (a
 * log-likelihood lead of 5, as for a break in transient-fit.ts warmupExplains) for the warm-up to
 * be taken as a ramp: near the noise the two trade places at random.
 */
const RAMP_MARGIN = 10;

export interface WarmupInput {
  /** The window's values, oldest first. */
  values: Float64Array;
  /** Absolute index of values[0]. */
  firstIndex: number;
  /** Every sample since the window began (block means). */
  history: BlockHistory;
  setting: WarmupSetting;
  /** Whether the window can be cut (growing) or only waits for the warm-up to slide out. */
  growing: boolean;
  /** The window's short-memory noise estimate (the autoregressive one): S(0) and tau_int. */
  noise: { longRunVariance: number; tauInt: number };
}

export function detectWarmup(input: WarmupInput): WarmupVerdict {
  const { values, firstIndex, setting } = input;
  const n = values.length;
  const next = firstIndex + n;
  const none: Omit<WarmupVerdict, 'steady' | 'start' | 'method' | 'reason' | 'pending'> = { transient: null, heidelbergerWelch: null, mser: null, effectiveSamples: null };
  if (setting.mode === 'none') return confirmCount(values, firstIndex, firstIndex, 'none', 'warm-up set to none: every sample is kept', none);
  if (setting.mode === 'fixed') {
    const start = input.history.start + setting.samples;
    if (start >= next) {
      return { ...none, steady: false, start, method: 'fixed', reason: `fixed warm-up of ${setting.samples} samples`, pending: { condition: 'warm-up', message: `fixed warm-up of ${setting.samples} samples: ${start - next} to go`, samplesToGo: start - next } };
    }
    return confirmCount(values.subarray(Math.max(0, start - firstIndex)), Math.max(firstIndex, start), firstIndex, 'fixed', `fixed warm-up of ${setting.samples} samples`, none);
  }

  const history = input.history;
  // The fit takes the same noise estimate as the steady window's recheck (recheckTransient), so the
  // two cannot disagree about one record and flap. It is cheap (the history's blocks): it runs
  // first, and the tests over the window's samples only where it leaves the question open.
  let fit = warmupFit({ means: history.means(), blockSize: history.blockSize, origin: history.start, longRunVariance: input.noise.longRunVariance, tauInt: input.noise.tauInt });
  let transient = fit ? summary(fit) : null;
  const needed = MIN_EFFECTIVE;
  let tau = Math.max(1, input.noise.tauInt);
  let minKept = Math.ceil(needed * tau);
  if (!fit) {
    // Too short a record to fit a warm-up (fewer than MIN_FIT_BLOCKS blocks of 4 tau_int): a slow
    // transient cannot be told from correlated noise yet, so steady state is not declared.
    const toGo = Math.max(1, MIN_FIT_BLOCKS * Math.max(history.blockSize, Math.ceil(4 * tau)) - history.length);
    return { ...none, steady: false, start: firstIndex, method: 'transient-fit', reason: 'too short to check for a warm-up', pending: { condition: 'effective-samples', message: `the record is too short to tell a warm-up from correlated noise: about ${formatSamples(toGo)} more samples`, samplesToGo: toGo } };
  }
  let whole: HeidelbergerWelchResult | null = null;
  let shaped = fitDescribesWarmup(fit);
  if (shaped) {
    // The window's own tau_int is inflated by the transient it holds; the fit's noise (its residual
    // S(0)) over the second half's spread gives the steady noise's.
    const tailVariance = variance(values.subarray(n >> 1));
    if (tailVariance > 0) tau = Math.max(1, Math.min(tau, fit.longRunVariance / tailVariance));
    minKept = Math.ceil(needed * tau);
  } else {
    whole = heidelbergerWelch(values);
    // tau_int for MSER's batches and the kept part from the second half, where a warm-up has
    // usually ended.
    const tailVariance = variance(values.subarray(n >> 1));
    const s0 = whole.secondHalfSpectrum !== null && whole.secondHalfSpectrum > 0 ? whole.secondHalfSpectrum : tailVariance;
    tau = tailVariance > 0 ? Math.max(1, s0 / tailVariance) : 1;
    minKept = Math.ceil(needed * tau);
  }
  let start: number;
  let method: WarmupVerdict['method'];
  let reason: string;
  let proposal: MserResult | null = null;
  if (shaped) {
    const admissible = admissibleStart(fit, firstIndex, next, BIAS_TOLERANCE, minKept);
    if (admissible === null) {
      if (!fit.decays) {
        return {
          ...none, transient, heidelbergerWelch: whole ?? null, steady: false, start: firstIndex, method: 'transient-fit', reason: 'the level is still moving',
          pending: { condition: 'warm-up', message: `the level is still moving across the whole record (fitted time constant ${formatSamples(fit.timeConstant)} samples, longer than a third of the record)`, samplesToGo: null },
        };
      }
      const toGo = samplesUntilAdmissible(fit, firstIndex, next, minKept);
      return {
        ...none, transient, heidelbergerWelch: whole ?? null, steady: false, start: firstIndex, method: 'transient-fit', reason: 'warm-up still decaying',
        pending: { condition: 'warm-up', message: `warm-up still decaying (time constant about ${formatSamples(fit.timeConstant)} samples)${toGo === null ? '' : `: about ${formatSamples(toGo)} more samples`}`, samplesToGo: toGo },
      };
    }
    if (!input.growing && admissible > firstIndex) {
      return { ...none, transient, heidelbergerWelch: whole ?? null, steady: false, start: admissible, method: 'transient-fit', reason: 'warm-up still in the sliding window', pending: { condition: 'warm-up', message: `the warm-up slides out of the window in about ${formatSamples(admissible - firstIndex)} samples`, samplesToGo: admissible - firstIndex } };
    }
    start = admissible;
    method = 'transient-fit';
    reason = `warm-up fitted (time constant about ${formatSamples(fit.timeConstant)} samples); the rest of it biases the mean by at most ${BIAS_TOLERANCE} u`;
  } else if (whole?.stationary && whole.startIndex === 0) {
    start = firstIndex;
    method = 'whole-window';
    reason = 'Heidelberger-Welch: stationary from the first sample';
  } else {
    const batch = batchSizeFromTau(tau);
    if (n < 10 * batch) return { ...none, transient, heidelbergerWelch: whole ?? null, steady: false, start: firstIndex, method: 'mser', reason: 'too short to place the end of the warm-up', pending: { condition: 'warm-up', message: `not stationary yet; ${10 * batch - n} more samples before the end of the warm-up can be placed`, samplesToGo: 10 * batch - n } };
    proposal = mser(values, batch);
    if (proposal.tooShort) return { ...none, transient, heidelbergerWelch: whole ?? null, mser: proposal, steady: false, start: firstIndex, method: 'mser', reason: 'MSER: the run is too short to place the end of the warm-up', pending: { condition: 'warm-up', message: 'not stationary yet: the end of the warm-up is not in sight', samplesToGo: null } };
    if (!input.growing && proposal.truncation > 0) return { ...none, transient, heidelbergerWelch: whole ?? null, mser: proposal, steady: false, start: firstIndex + proposal.truncation, method: 'mser', reason: 'warm-up still in the sliding window', pending: { condition: 'warm-up', message: `the warm-up slides out of the window in about ${formatSamples(proposal.truncation)} samples`, samplesToGo: proposal.truncation } };
    start = firstIndex + proposal.truncation;
    method = 'mser';
    reason = 'MSER truncation';
  }
  // The record kept must hold no transient of its own: a warm-up of another shape (an overshoot,
  // an S-curve) or with a second, slower lag usually ends in a first-order tail that MSER, or the
  // fit of the whole record dominated by the fast part, leaves in the kept mean. Fitted on the
  // record from the cut on, it moves the start as the whole-record fit would.
  if (method !== 'whole-window') {
    const tail = tailFit(history, start, input.noise);
    if (tail) {
      shaped = true;
      fit = tail;
      transient = summary(tail);
      const admissible = admissibleStart(tail, start, next, BIAS_TOLERANCE, minKept);
      if (admissible === null) {
        const toGo = tail.decays ? samplesUntilAdmissible(tail, start, next, minKept) : null;
        return { ...none, transient, heidelbergerWelch: whole ?? null, mser: proposal, steady: false, start, method, reason: 'the tail of the warm-up is still decaying', pending: { condition: 'warm-up', message: `the tail of the warm-up is still decaying (time constant about ${formatSamples(tail.timeConstant)} samples)${toGo === null ? '' : `: about ${formatSamples(toGo)} more samples`}`, samplesToGo: toGo } };
      }
      if (!input.growing && admissible > start) {
        return { ...none, transient, heidelbergerWelch: whole ?? null, mser: proposal, steady: false, start: admissible, method, reason: 'warm-up still in the sliding window', pending: { condition: 'warm-up', message: `the tail of the warm-up slides out of the window in about ${formatSamples(admissible - start)} samples`, samplesToGo: admissible - start } };
      }
      if (admissible > start) {
        start = admissible;
        reason += `; a slower tail fitted after the cut (time constant about ${formatSamples(tail.timeConstant)} samples) moves the start on`;
      }
    }
  }
  const kept = values.subarray(start - firstIndex);
  const keptEstimate = autoregressiveSpectrumOfValues(kept);
  const effective = kept.length / Math.max(keptEstimate.tauInt, 1e-12);
  const base = { transient, heidelbergerWelch: whole ?? null, mser: proposal, effectiveSamples: effective };
  if (effective < needed) {
    const toGo = Math.ceil((needed - effective) * Math.max(1, keptEstimate.tauInt));
    return { ...base, steady: false, start, method, reason, pending: { condition: 'effective-samples', message: `${Math.floor(effective)} effective samples after the warm-up, ${Math.round(needed)} needed to confirm steady state (about ${formatSamples(toGo)} more samples)`, samplesToGo: toGo } };
  }
  const test = heidelbergerWelch(kept);
  if (!test.stationary || test.startIndex === null) {
    return { ...base, heidelbergerWelch: test, steady: false, start, method, reason, pending: { condition: 'warm-up', message: 'the samples after the warm-up are not stationary yet (Heidelberger-Welch)', samplesToGo: null } };
  }
  start += test.startIndex;
  if (test.startIndex > 0) reason += `; Heidelberger-Welch discarded ${test.startIndex} more`;
  if (shaped && Math.abs(transientBias(fit, start, next)) > BIAS_TOLERANCE * Math.sqrt(fit.longRunVariance / (next - start))) {
    return { ...base, heidelbergerWelch: test, steady: false, start, method, reason, pending: { condition: 'warm-up', message: 'warm-up still decaying', samplesToGo: null } };
  }
  const keptEffective = test.startIndex > 0 ? ((next - start) / kept.length) * effective : effective;
  if (keptEffective < needed) {
    return { ...base, heidelbergerWelch: test, effectiveSamples: keptEffective, steady: false, start, method, reason, pending: { condition: 'effective-samples', message: `${Math.floor(keptEffective)} effective samples after the warm-up, ${Math.round(needed)} needed to confirm steady state`, samplesToGo: Math.ceil((needed - keptEffective) * Math.max(1, keptEstimate.tauInt)) } };
  }
  return { ...base, heidelbergerWelch: test, effectiveSamples: keptEffective, steady: true, start, method, reason, pending: null };
}

/**
 * Transient check of a steady growing window: when the record since the window began now shows a
 * significant transient that describes it (one or two lags; or, failing that, a first-order tail
 * of the record kept: tailFit), or a level still moving since it began, which no cut can settle,
 * whose remaining bias at the current start exceeds the
 * trigger (BIAS_TRIGGER by default; at least BIAS_TOLERANCE), the earliest admissible start
 * (later than the current one), or null when none leaves enough samples (the warm-up is not over
 * after all). Undefined when nothing changes.
 */
export function recheckTransient(history: BlockHistory, longRunVariance: number, tauInt: number, firstIndex: number, next: number, trigger = BIAS_TRIGGER): { start: number | null; fit: TransientFit } | undefined {
  const whole = warmupFit({ means: history.means(), blockSize: history.blockSize, origin: history.start, longRunVariance, tauInt });
  // The whole record's fit first; then the record kept on its own, where a warm-up of another
  // shape, or a second and slower lag, leaves a first-order tail the whole fit does not describe.
  return (whole && fitDescribesWarmup(whole) ? movedStart(whole, tauInt, firstIndex, next, trigger) : undefined)
    ?? (firstIndex > history.start ? movedStart(tailFit(history, firstIndex, { longRunVariance, tauInt }), tauInt, firstIndex, next, trigger) : undefined);
}

function movedStart(fit: TransientFit | null, tauInt: number, firstIndex: number, next: number, trigger: number): { start: number | null; fit: TransientFit } | undefined {
  if (!fit || !fitDescribesWarmup(fit)) return undefined;
  const s0 = fit.longRunVariance;
  if (Math.abs(transientBias(fit, firstIndex, next)) <= Math.max(trigger, BIAS_TOLERANCE) * Math.sqrt(s0 / (next - firstIndex))) return undefined;
  // Only a record that a warm-up explains at least as well as a late break moves the start or
  // withdraws the verdict; a break is the stationarity monitor's to name.
  if (!warmupExplains(fit)) return undefined;
  const minKept = Math.ceil(MIN_EFFECTIVE * Math.max(1, tauInt));
  const level = Math.max(trigger, BIAS_TOLERANCE);
  // The declaration's tolerance where it can be had, else the trigger's; and before the verdict is
  // withdrawn, the fastest decay the record still allows (hysteresis: a young fit overstates its
  // time constant as often as not, and a withdrawal should rest on more than that).
  const start = admissibleStart(fit, firstIndex, next, BIAS_TOLERANCE, minKept) ?? admissibleStart(fit, firstIndex, next, level, minKept) ?? admissibleStart(fit, firstIndex, next, level, minKept, 'fastest');
  return { start, fit };
}

/**
 * When the stationarity monitor alarms on a growing window: whether the record since the window
 * began is a warm-up still running (a significant fit that explains the record at least as well as
 * a step or a ramp would, core/stationarity/transient-fit.ts warmupExplains) rather than a break.
 */
export function alarmIsWarmup(history: BlockHistory, longRunVariance: number, tauInt: number): TransientFit | null {
  const fit = warmupFit({ means: history.means(), blockSize: history.blockSize, origin: history.start, longRunVariance, tauInt });
  return fit && fitDescribesWarmup(fit) && warmupExplains(fit) ? fit : null;
}

/**
 * The warm-up's fit: one exponential (core/stationarity/transient-fit.ts); where that is
 * significant but does not describe the record, two lags (core/stationarity/two-lag-fit.ts) when
 * they do; else the one exponential, which the caller then finds inadequate.
 */
function warmupFit(input: TransientFitInput): TransientFit | null {
  const one = fitTransient(input);
  if (!one?.significant || fitDescribesWarmup(one)) return one;
  const two = fitTwoLags(input);
  return two && fitDescribesWarmup(two) ? two : one;
}

/**
 * The exponential fitted to the record from `from` on (the history's blocks from the one holding
 * it), when it is significant and describes that record (fitDescribesWarmup); else null. Where the
 * record from `from` still holds more than one exponential (a fast lag and a slower one), the fit
 * is tried again from later starts, an eighth of the rest at a time up to half of it, so that the
 * slowest part, which biases the kept mean longest, is found on its own.
 * Cost: at most five fits, O(K * 80) each.
 */
function tailFit(history: BlockHistory, from: number, noise: { longRunVariance: number; tauInt: number }): TransientFit | null {
  const means = history.means();
  const end = history.start + means.length * history.blockSize;
  for (let j = 0; j <= 4; j++) {
    const at = from + Math.floor((j * (end - from)) / 8);
    const first = Math.max(0, Math.ceil((at - history.start) / history.blockSize));
    if (first >= means.length) return null;
    const tail = warmupFit({ means: means.subarray(first), blockSize: history.blockSize, origin: history.start + first * history.blockSize, longRunVariance: noise.longRunVariance, tauInt: noise.tauInt });
    if (!tail?.significant) return null;
    if (fitDescribesWarmup(tail)) return tail;
  }
  return null;
}

function confirmCount(kept: Float64Array, start: number, firstIndex: number, method: 'none' | 'fixed', reason: string, base: Omit<WarmupVerdict, 'steady' | 'start' | 'method' | 'reason' | 'pending'>): WarmupVerdict {
  void firstIndex;
  if (kept.length < 8) return { ...base, steady: false, start, method, reason, pending: { condition: 'effective-samples', message: 'fewer than eight samples', samplesToGo: 8 - kept.length } };
  const estimate = autoregressiveSpectrumOfValues(kept);
  const effective = kept.length / Math.max(estimate.tauInt, 1e-12);
  if (effective < MIN_EFFECTIVE) {
    const toGo = Math.ceil((MIN_EFFECTIVE - effective) * Math.max(1, estimate.tauInt));
    return { ...base, effectiveSamples: effective, steady: false, start, method, reason, pending: { condition: 'effective-samples', message: `${Math.floor(effective)} effective samples, ${MIN_EFFECTIVE} needed (about ${formatSamples(toGo)} more samples)`, samplesToGo: toGo } };
  }
  return { ...base, effectiveSamples: effective, steady: true, start, method, reason, pending: null };
}

/** Samples after `next` until some start leaves an admissible bias (doubling, then bisection); null beyond 64 time constants. */
function samplesUntilAdmissible(fit: TransientFit, from: number, next: number, minKept: number): number | null {
  const ok = (end: number) => admissibleStart(fit, from, end, BIAS_TOLERANCE, minKept) !== null;
  let step = Math.max(64, Math.ceil(fit.timeConstant / 8));
  const limit = 64 * fit.timeConstant + minKept;
  let high = next + step;
  while (!ok(high)) {
    if (high - next > limit) return null;
    step *= 2;
    high = next + step;
  }
  let low = next;
  while (high - low > Math.max(16, (high - next) / 64)) {
    const mid = Math.floor((low + high) / 2);
    if (ok(mid)) high = mid;
    else low = mid;
  }
  return high - next;
}

function summary(fit: TransientFit): TransientSummary {
  return { amplitude: fit.amplitude, timeConstant: fit.timeConstant, level: fit.level, improvement: fit.improvement, significant: fit.significant, decays: fit.decays, lackOfFit: fit.lackOfFit, second: fit.second ? { ...fit.second } : null };
}

function variance(values: Float64Array): number {
  const m = values.length;
  if (m < 2) return 0;
  let mean = 0;
  for (let i = 0; i < m; i++) mean += values[i] as number;
  mean /= m;
  let squares = 0;
  for (let i = 0; i < m; i++) squares += ((values[i] as number) - mean) ** 2;
  return squares / (m - 1);
}

/** A sample count in words: grouped digits, two significant figures above 1000. */
export function formatSamples(count: number): string {
  if (!Number.isFinite(count)) return 'unbounded';
  const rounded = count >= 1000 ? Number(count.toPrecision(2)) : Math.round(count);
  // Grouped by hand: toLocaleString goes through ICU, and this runs on every warm-up check.
  return String(rounded).replace(/\B(?=(\d{3})+(?!\d))/g, '\u202f');
}
