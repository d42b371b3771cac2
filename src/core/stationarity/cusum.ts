/**
 * Two-sided tabular CUSUM (cumulative sum control chart) for a shift in the mean of standardised
 * inputs, with Siegmund's approximation of its average run length (ARL).
 *
 * On standardised inputs z_i (mean 0 and variance 1 while in control):
 *   upper_i = max(0, upper_{i-1} + z_i - k),   lower_i = max(0, lower_{i-1} - z_i - k),
 * both starting at 0; the chart alarms on the side whose sum exceeds the decision interval h.
 * k (the reference value) is usually half the shift to be detected, in units of the input's
 * standard deviation.
 * Method: E. S. Page (1954), "Continuous inspection schemes", Biometrika 41(1/2), 100-115; the
 *   tabular form with k and h as in D. C. Montgomery, "Introduction to Statistical Quality
 *   Control", Wiley, chapter on the CUSUM chart (from memory).
 * ARL: D. Siegmund (1985), "Sequential Analysis: Tests and Confidence Intervals", Springer,
 *   New York (from memory): one-sided ARL = (exp(-2 Delta b) + 2 Delta b - 1) / (2 Delta^2),
 *   Delta = shift - k, b = h + 1.166 (the correction for the overshoot of a normal random walk),
 *   and b^2 when Delta = 0; two-sided 1/ARL = 1/ARL(upper) + 1/ARL(lower), which is exact when the
 *   two sides cannot both be positive and a close approximation otherwise (common practice).
 *
 * Choices:
 *   - The sums are not reset after an alarm: update() keeps returning the alarm side while the
 *     sum stays above h, so the caller decides what an alarm does (edge-trigger it, then reset()).
 *   - Estimated change point: the input index (0-based, counted since construction or the last
 *     reset) at which the alarming side last rose from zero, i.e. the first input of its current
 *     run of positive values. This is the estimate common practice reads off a tabular CUSUM
 *     (the last period with a zero sum, plus one); it is not a maximum-likelihood estimate.
 *   - When both sides exceed h on the same input (possible only after a long alarm without
 *     reset and a large swing), the side with the larger sum is reported.
 *   - state()/restore() exchange plain data, so a channel's chart survives a restart.
 * Cost: O(1) per update, O(1) memory. ARL functions: O(1); decisionIntervalForArl: about 60
 *   evaluations of twoSidedArl (bisection to 1e-12 relative).
 */
export type CusumSide = 'up' | 'down';

export interface CusumOptions {
  /** Reference value k (allowance), in standard deviations of the input; k >= 0. */
  reference: number;
  /** Decision interval h, in standard deviations of the input; h > 0. */
  decisionInterval: number;
}

/** Plain-data state of a TwoSidedCusum, for persistence. */
export interface CusumState {
  reference: number;
  decisionInterval: number;
  upper: number;
  lower: number;
  count: number;
  /** Index of the first input of the upper sum's current positive run, or -1 when it is zero. */
  upperRunStart: number;
  /** Index of the first input of the lower sum's current positive run, or -1 when it is zero. */
  lowerRunStart: number;
  /** Side of the most recent alarm since the last reset, or null. */
  lastAlarm: CusumSide | null;
  /** Estimated change point of the most recent alarm, or -1. */
  lastChangePoint: number;
}

export class TwoSidedCusum {
  readonly reference: number;
  readonly decisionInterval: number;
  private upperSum = 0;
  private lowerSum = 0;
  private updates = 0;
  private upperRunStart = -1;
  private lowerRunStart = -1;
  private lastAlarm: CusumSide | null = null;
  private lastChangePoint = -1;

  constructor(options: CusumOptions) {
    checkParameters(options.reference, options.decisionInterval);
    this.reference = options.reference;
    this.decisionInterval = options.decisionInterval;
  }

  /** Upper (increase) sum. */
  get upper(): number {
    return this.upperSum;
  }

  /** Lower (decrease) sum, as a non-negative number. */
  get lower(): number {
    return this.lowerSum;
  }

  /** Inputs since construction or the last reset. */
  get count(): number {
    return this.updates;
  }

  /** Side of the most recent alarm since the last reset, or null. */
  get alarm(): CusumSide | null {
    return this.lastAlarm;
  }

  /**
   * Estimated change point of the most recent alarm: the index of the input at which the alarming
   * side last rose from zero (0-based, counted since the last reset). Null before any alarm.
   */
  get changePoint(): number | null {
    return this.lastChangePoint >= 0 ? this.lastChangePoint : null;
  }

  /** Adds one standardised input; returns the side that exceeds h after it, or null. */
  update(z: number): CusumSide | null {
    if (!Number.isFinite(z)) throw new RangeError('cusum requires finite inputs');
    const index = this.updates++;
    const k = this.reference;
    const upper = this.upperSum + z - k;
    if (upper > 0) {
      if (this.upperSum === 0) this.upperRunStart = index;
      this.upperSum = upper;
    } else {
      this.upperSum = 0;
      this.upperRunStart = -1;
    }
    const lower = this.lowerSum - z - k;
    if (lower > 0) {
      if (this.lowerSum === 0) this.lowerRunStart = index;
      this.lowerSum = lower;
    } else {
      this.lowerSum = 0;
      this.lowerRunStart = -1;
    }
    const h = this.decisionInterval;
    const upAlarm = this.upperSum > h;
    const downAlarm = this.lowerSum > h;
    if (!upAlarm && !downAlarm) return null;
    const side: CusumSide = upAlarm && (!downAlarm || this.upperSum >= this.lowerSum) ? 'up' : 'down';
    this.lastAlarm = side;
    this.lastChangePoint = side === 'up' ? this.upperRunStart : this.lowerRunStart;
    return side;
  }

  /** Returns both sums to zero and restarts the input count. */
  reset(): void {
    this.upperSum = 0;
    this.lowerSum = 0;
    this.updates = 0;
    this.upperRunStart = -1;
    this.lowerRunStart = -1;
    this.lastAlarm = null;
    this.lastChangePoint = -1;
  }

  state(): CusumState {
    return {
      reference: this.reference,
      decisionInterval: this.decisionInterval,
      upper: this.upperSum,
      lower: this.lowerSum,
      count: this.updates,
      upperRunStart: this.upperRunStart,
      lowerRunStart: this.lowerRunStart,
      lastAlarm: this.lastAlarm,
      lastChangePoint: this.lastChangePoint,
    };
  }

  /** Rebuilds a chart from state(). Throws RangeError on inconsistent data. */
  static restore(state: CusumState): TwoSidedCusum {
    const chart = new TwoSidedCusum({ reference: state.reference, decisionInterval: state.decisionInterval });
    chart.restore(state);
    return chart;
  }

  /** Loads state() data into this chart; the parameters must match. */
  restore(state: CusumState): void {
    if (state.reference !== this.reference || state.decisionInterval !== this.decisionInterval) {
      throw new RangeError('cusum state has different reference or decision interval');
    }
    const validSum = (s: number) => Number.isFinite(s) && s >= 0;
    const validIndex = (i: number) => Number.isInteger(i) && i >= -1 && i < state.count;
    if (!validSum(state.upper) || !validSum(state.lower) || !Number.isInteger(state.count) || state.count < 0) {
      throw new RangeError('cusum state requires non-negative finite sums and count');
    }
    if (!validIndex(state.upperRunStart) || !validIndex(state.lowerRunStart) || !validIndex(state.lastChangePoint)) {
      throw new RangeError('cusum state requires run starts within the input count');
    }
    if ((state.upper > 0) !== (state.upperRunStart >= 0) || (state.lower > 0) !== (state.lowerRunStart >= 0)) {
      throw new RangeError('cusum state requires a run start exactly when a sum is positive');
    }
    if (state.lastAlarm !== null && state.lastAlarm !== 'up' && state.lastAlarm !== 'down') {
      throw new RangeError('cusum state has an unknown alarm side');
    }
    this.upperSum = state.upper;
    this.lowerSum = state.lower;
    this.updates = state.count;
    this.upperRunStart = state.upperRunStart;
    this.lowerRunStart = state.lowerRunStart;
    this.lastAlarm = state.lastAlarm;
    this.lastChangePoint = state.lastChangePoint;
  }
}

/** Siegmund's overshoot correction for a normal random walk: b = h + 1.166 (Siegmund 1985). */
const OVERSHOOT = 1.166;

/**
 * One-sided ARL of a CUSUM on N(shift, 1) inputs by Siegmund's approximation:
 * (exp(-2 Delta b) + 2 Delta b - 1) / (2 Delta^2), Delta = shift - k, b = h + 1.166; b^2 at Delta = 0.
 * Returns Infinity when the run length overflows a double (far-negative drift).
 */
export function siegmundArl(shift: number, reference: number, decisionInterval: number): number {
  checkParameters(reference, decisionInterval, true);
  if (!Number.isFinite(shift)) throw new RangeError('siegmundArl requires a finite shift');
  const delta = shift - reference;
  const b = decisionInterval + OVERSHOOT;
  const x = delta * b;
  if (Math.abs(x) < 1e-3) {
    // exp(-2x) + 2x - 1 = 2x^2 (1 - 2x/3 + x^2/3 - 2x^3/15 + ...): the closed form cancels here.
    return b * b * (1 - (2 * x) / 3 + (x * x) / 3 - (2 * x * x * x) / 15);
  }
  const arl = (Math.expm1(-2 * x) + 2 * x) / (2 * delta * delta);
  return Number.isFinite(arl) ? arl : Infinity;
}

/** Two-sided ARL: 1/ARL = 1/ARL(upper, shift) + 1/ARL(lower, -shift), each by Siegmund's approximation. */
export function twoSidedArl(shift: number, reference: number, decisionInterval: number): number {
  const up = siegmundArl(shift, reference, decisionInterval);
  const down = siegmundArl(-shift, reference, decisionInterval);
  return 1 / (1 / up + 1 / down);
}

/**
 * Decision interval h for which the in-control (shift 0) two-sided ARL by Siegmund's
 * approximation equals targetArl: the false-alarm budget of a chart that sees one standardised
 * input per block. Bisection on h (the ARL increases with h) to 1e-12 relative. Returns 0 when
 * even h = 0 gives an ARL at least as long as the target.
 */
export function decisionIntervalForArl(targetArl: number, reference: number): number {
  if (!(targetArl > 1) || !Number.isFinite(targetArl)) throw new RangeError('decisionIntervalForArl requires a finite target ARL above 1');
  if (!(reference >= 0) || !Number.isFinite(reference)) throw new RangeError('decisionIntervalForArl requires a finite reference k >= 0');
  const arlAt = (h: number) => twoSidedArl(0, reference, h);
  if (arlAt(0) >= targetArl) return 0;
  let low = 0;
  let high = 1;
  while (arlAt(high) < targetArl) {
    low = high;
    high *= 2;
  }
  for (let i = 0; i < 200 && high - low > 1e-12 * high; i++) {
    const middle = 0.5 * (low + high);
    if (arlAt(middle) < targetArl) low = middle;
    else high = middle;
  }
  return 0.5 * (low + high);
}

function checkParameters(reference: number, decisionInterval: number, allowZeroInterval = false): void {
  if (!(reference >= 0) || !Number.isFinite(reference)) throw new RangeError('cusum requires a finite reference k >= 0');
  const intervalOk = allowZeroInterval ? decisionInterval >= 0 : decisionInterval > 0;
  if (!intervalOk || !Number.isFinite(decisionInterval)) throw new RangeError('cusum requires a finite decision interval h > 0');
}
