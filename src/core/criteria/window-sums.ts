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
 * are removed as well as added). Every sum is compensated: the rounding error of each addition is
 * found exactly and kept in a second sum, as in A. Neumaier (1974), ZAMM 54, 39-51; the error is
 * found without a branch by
 * the TwoSum transformation (O. Moller (1965), "Quasi double-precision in floating point addition",
 * BIT 5, 37-50; D. E. Knuth, The Art of Computer Programming vol. 2, section 4.2.2; both from
 * memory), which measured about twice as fast as Neumaier's branch on values of either sign (the
 * branch mispredicts). The owner also rebuilds the sums exactly from the readings (`rebuild`)
 * after a window's length of removals and when the mean has moved far from the anchor.
 *
 * Slope: ordinary least squares of value on time, b = Stx / Stt with the centred sums, in value
 * units per second; its standard error is sqrt(RSS / (n - 2) / Stt) with RSS = Sxx - b Stx (the
 * textbook result for independent residuals: common practice). Autocorrelated residuals make the
 * true error larger; the stationarity monitor's trend test is the autocorrelation-aware one, this
 * figure is what a procedure's "gradient" rule compares.
 *
 * Cost: O(1) per added or removed reading (five or two compensated additions); memory: 14 numbers.
 */
export interface WindowSumsState {
  count: number;
  anchored: boolean;
  timeAnchor: number;
  valueAnchor: number;
  /** Sums and their compensations: x, xx, t, tt, tx. */
  sums: number[];
}

export class WindowSums {
  count = 0;
  readonly regression: boolean;
  /**
   * Figures as of the last `settle` (the window calls it once per reading): fields, so that the
   * per-sample path reads them without a call. NaN where undefined.
   */
  settledMean = Number.NaN;
  settledVariance = Number.NaN;
  settledSlope = Number.NaN;
  private timeAnchor = 0;
  private valueAnchor = 0;
  /** False until the first reading (or `reset`) sets the anchors; again false once empty. */
  private anchored = false;
  // Each sum with the compensation (the rounding errors of its additions).
  private sx = 0;
  private cx = 0;
  private sxx = 0;
  private cxx = 0;
  private st = 0;
  private ct = 0;
  private stt = 0;
  private ctt = 0;
  private stx = 0;
  private ctx = 0;

  /** `regression`: also keep the time sums the slope needs. */
  constructor(regression: boolean) {
    this.regression = regression;
  }

  /** Empties the sums and sets the anchors the next readings are shifted by. */
  reset(timeAnchor: number, valueAnchor: number): void {
    this.clear();
    this.timeAnchor = timeAnchor;
    this.valueAnchor = valueAnchor;
    this.anchored = true;
  }

  /** Empties the sums; the next reading sets the anchors. */
  clear(): void {
    this.count = 0;
    this.sx = this.cx = this.sxx = this.cxx = 0;
    this.st = this.ct = this.stt = this.ctt = this.stx = this.ctx = 0;
    this.anchored = false;
  }

  add(time: number, value: number): void {
    if (!this.anchored) this.reset(time, value);
    this.count++;
    this.accumulate(value - this.valueAnchor, time - this.timeAnchor);
  }

  remove(time: number, value: number): void {
    if (--this.count === 0) {
      this.clear();
      return;
    }
    this.accumulate(this.valueAnchor - value, this.timeAnchor - time, -1);
  }

  /** Mean of the window's readings (NaN when empty). */
  get mean(): number {
    return this.count > 0 ? this.valueAnchor + (this.sx + this.cx) / this.count : Number.NaN;
  }

  /** Sum of squared deviations from the mean; never negative. */
  get squaredDeviations(): number {
    if (this.count < 1) return 0;
    const sx = this.sx + this.cx;
    const m2 = this.sxx + this.cxx - (sx * sx) / this.count;
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
    const shiftedMean = (this.sx + this.cx) / this.count;
    return shiftedMean !== 0 && shiftedMean * shiftedMean > 1_048_576 * this.variance;
  }

  /** True when the reading carries more than half of the shifted sum of squares (a spike). */
  dominates(value: number): boolean {
    const x = value - this.valueAnchor;
    return 2 * x * x > this.sxx + this.cxx;
  }

  /** Works out the mean, and the variance and slope when asked, into the settled fields. */
  settle(variance: boolean): void {
    const n = this.count;
    if (n === 0) {
      this.settledMean = this.settledVariance = this.settledSlope = Number.NaN;
      return;
    }
    const inverse = 1 / n;
    const sx = this.sx + this.cx;
    this.settledMean = this.valueAnchor + sx * inverse;
    if (variance) {
      const m2 = this.sxx + this.cxx - sx * sx * inverse;
      this.settledVariance = n > 1 ? (m2 > 0 ? m2 : 0) / (n - 1) : 0;
    }
    if (this.regression) {
      const st = this.st + this.ct;
      const stt = this.stt + this.ctt - st * st * inverse;
      this.settledSlope = n > 1 && stt > 0 ? (this.stx + this.ctx - st * sx * inverse) / stt : Number.NaN;
    }
  }

  /** Least-squares slope in value units per second, and its standard error (null where undefined). */
  slope(): { perSecond: number; standardError: number | null } | null {
    const b = this.slopePerSecond();
    if (Number.isNaN(b)) return null;
    if (this.count < 3) return { perSecond: b, standardError: null };
    const n = this.count;
    const sx = this.sx + this.cx;
    const st = this.st + this.ct;
    const stt = this.stt + this.ctt - (st * st) / n;
    const stx = this.stx + this.ctx - (st * sx) / n;
    const sxx = this.sxx + this.cxx - (sx * sx) / n;
    const rss = sxx - b * stx;
    const residualVariance = rss > 0 ? rss / (n - 2) : 0;
    return { perSecond: b, standardError: Math.sqrt(residualVariance / stt) };
  }

  /** The slope alone, without allocating (NaN below two readings or when every time is equal). */
  slopePerSecond(): number {
    const n = this.count;
    if (!this.regression || n < 2) return Number.NaN;
    const st = this.st + this.ct;
    const stt = this.stt + this.ctt - (st * st) / n;
    if (!(stt > 0)) return Number.NaN;
    return (this.stx + this.ctx - (st * (this.sx + this.cx)) / n) / stt;
  }

  saveState(): WindowSumsState {
    return {
      count: this.count,
      anchored: this.anchored,
      timeAnchor: this.timeAnchor,
      valueAnchor: this.valueAnchor,
      sums: [this.sx, this.cx, this.sxx, this.cxx, this.st, this.ct, this.stt, this.ctt, this.stx, this.ctx],
    };
  }

  loadState(state: WindowSumsState): void {
    this.count = state.count;
    this.anchored = state.anchored;
    this.timeAnchor = state.timeAnchor;
    this.valueAnchor = state.valueAnchor;
    [this.sx, this.cx, this.sxx, this.cxx, this.st, this.ct, this.stt, this.ctt, this.stx, this.ctx] = state.sums as [number, number, number, number, number, number, number, number, number, number];
  }

  /**
   * Adds (sign 1) or removes (sign -1) one reading, shifted: x' = sign (x - anchor), t' likewise,
   * so the squares are added with the sign and the products come out right. TwoSum: u = s + v
   * splits exactly into the rounded sum u and the error (s - (u - b)) + (v - b), b = u - s.
   */
  private accumulate(x: number, t: number, sign = 1): void {
    let s = this.sx;
    let u = s + x;
    let b = u - s;
    this.cx += s - (u - b) + (x - b);
    this.sx = u;
    const xx = sign * x * x;
    s = this.sxx;
    u = s + xx;
    b = u - s;
    this.cxx += s - (u - b) + (xx - b);
    this.sxx = u;
    if (!this.regression) return;
    s = this.st;
    u = s + t;
    b = u - s;
    this.ct += s - (u - b) + (t - b);
    this.st = u;
    const tt = sign * t * t;
    s = this.stt;
    u = s + tt;
    b = u - s;
    this.ctt += s - (u - b) + (tt - b);
    this.stt = u;
    const tx = sign * t * x;
    s = this.stx;
    u = s + tx;
    b = u - s;
    this.ctx += s - (u - b) + (tx - b);
    this.stx = u;
  }
}
