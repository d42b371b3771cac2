/**
 * Window sums: running mean, variance and least-squares slope (value against time) of a sliding
 * window, from sums that readings enter and leave in O(1).
 *
 * Sums kept: n, and of the shifted readings x' = x - valueAnchor and t' = t - timeAnchor: sum x',
 * sum x'^2 and, when the slope is wanted, sum t', sum t'^2, sum t'x'. The anchors are values near
 * the data (the window's first time and its mean at the last rebuild), so that the centred sums
 * (sum x'^2 - (sum x')^2 / n and the like) lose little to cancellation (T. F. Chan, G. H. Golub &
 * R. J. LeVeque (1983), "Algorithms for computing the sample variance: analysis and
 * recommendations", The American Statistician 37(3), 242-247, recommend shifted sums when values
 * are removed as well as added). Every sum uses Neumaier's compensated addition (A. Neumaier
 * (1974), ZAMM 54, 39-51), and the owner rebuilds the sums exactly from the readings (`rebuild`)
 * after a window's length of removals and when the mean has moved far from the anchor, so round-off
 * cannot build up.
 *
 * Slope: ordinary least squares of value on time, b = Stx / Stt with the centred sums, in value
 * units per second; its standard error is sqrt(RSS / (n - 2) / Stt) with RSS = Sxx - b Stx (the
 * textbook result for independent residuals: common practice). Autocorrelated residuals make the
 * true error larger; the stationarity monitor's trend test is the autocorrelation-aware one, this
 * figure is what a procedure's "gradient" rule compares.
 *
 * Cost: O(1) per added or removed reading (five or two compensated additions); memory: 12 numbers.
 */
export interface WindowSumsState {
  count: number;
  anchored: boolean;
  timeAnchor: number;
  valueAnchor: number;
  sums: Float64Array;
}

// Sum slots in `sums`: value, compensation.
const SX = 0;
const SXX = 2;
const ST = 4;
const STT = 6;
const STX = 8;

export class WindowSums {
  count = 0;
  readonly regression: boolean;
  private timeAnchor = 0;
  private valueAnchor = 0;
  /** False until the first reading (or `reset`) sets the anchors; again false once empty. */
  private anchored = false;
  private readonly sums = new Float64Array(10);

  /** `regression`: also keep the time sums the slope needs. */
  constructor(regression: boolean) {
    this.regression = regression;
  }

  /** Empties the sums and sets the anchors the next readings are shifted by. */
  reset(timeAnchor: number, valueAnchor: number): void {
    this.count = 0;
    this.sums.fill(0);
    this.timeAnchor = timeAnchor;
    this.valueAnchor = valueAnchor;
    this.anchored = true;
  }

  /** Empties the sums; the next reading sets the anchors. */
  clear(): void {
    this.count = 0;
    this.sums.fill(0);
    this.anchored = false;
  }

  add(time: number, value: number): void {
    if (!this.anchored) this.reset(time, value);
    this.count++;
    const x = value - this.valueAnchor;
    const s = this.sums;
    accumulate(s, SX, x);
    accumulate(s, SXX, x * x);
    if (this.regression) {
      const t = time - this.timeAnchor;
      accumulate(s, ST, t);
      accumulate(s, STT, t * t);
      accumulate(s, STX, t * x);
    }
  }

  remove(time: number, value: number): void {
    if (--this.count === 0) {
      this.clear();
      return;
    }
    const x = value - this.valueAnchor;
    const s = this.sums;
    accumulate(s, SX, -x);
    accumulate(s, SXX, -(x * x));
    if (this.regression) {
      const t = time - this.timeAnchor;
      accumulate(s, ST, -t);
      accumulate(s, STT, -(t * t));
      accumulate(s, STX, -(t * x));
    }
  }

  /** Mean of the window's readings (NaN when empty). */
  get mean(): number {
    return this.count > 0 ? this.valueAnchor + total(this.sums, SX) / this.count : Number.NaN;
  }

  /** Sum of squared deviations from the mean; never negative. */
  get squaredDeviations(): number {
    if (this.count < 1) return 0;
    const sx = total(this.sums, SX);
    const m2 = total(this.sums, SXX) - (sx * sx) / this.count;
    return m2 > 0 ? m2 : 0;
  }

  /** Sample variance, divisor n - 1 (0 below two readings). */
  get variance(): number {
    return this.count > 1 ? this.squaredDeviations / (this.count - 1) : 0;
  }

  /** Sample standard deviation, divisor n - 1. */
  get standardDeviation(): number {
    return Math.sqrt(this.variance);
  }

  /**
   * True when the mean has moved so far from the value anchor (more than 1024 standard
   * deviations) that the centred sums lose digits: the owner should rebuild.
   */
  get drifted(): boolean {
    if (this.count < 2) return false;
    const shiftedMean = total(this.sums, SX) / this.count;
    return shiftedMean * shiftedMean > 1_048_576 * this.variance && shiftedMean !== 0;
  }

  /** Least-squares slope in value units per second, and its standard error (null where undefined). */
  slope(): { perSecond: number; standardError: number | null } | null {
    if (!this.regression || this.count < 2) return null;
    const n = this.count;
    const s = this.sums;
    const st = total(s, ST);
    const sx = total(s, SX);
    const stt = total(s, STT) - (st * st) / n;
    if (!(stt > 0)) return null;
    const stx = total(s, STX) - (st * sx) / n;
    const b = stx / stt;
    if (n < 3) return { perSecond: b, standardError: null };
    const sxx = total(s, SXX) - (sx * sx) / n;
    const rss = sxx - b * stx;
    const residualVariance = rss > 0 ? rss / (n - 2) : 0;
    return { perSecond: b, standardError: Math.sqrt(residualVariance / stt) };
  }

  saveState(): WindowSumsState {
    return { count: this.count, anchored: this.anchored, timeAnchor: this.timeAnchor, valueAnchor: this.valueAnchor, sums: Float64Array.from(this.sums) };
  }

  loadState(state: WindowSumsState): void {
    this.count = state.count;
    this.anchored = state.anchored;
    this.timeAnchor = state.timeAnchor;
    this.valueAnchor = state.valueAnchor;
    this.sums.set(state.sums);
  }
}

/** Neumaier's compensated addition into slot `i` (sum) and `i + 1` (compensation). */
function accumulate(s: Float64Array, i: number, value: number): void {
  const sum = s[i] as number;
  const t = sum + value;
  if (Math.abs(sum) >= Math.abs(value)) s[i + 1] = (s[i + 1] as number) + (sum - t + value);
  else s[i + 1] = (s[i + 1] as number) + (value - t + sum);
  s[i] = t;
}

function total(s: Float64Array, i: number): number {
  return (s[i] as number) + (s[i + 1] as number);
}
