import { expectRecord, type StateRecord } from '../state/record.js';

/**
 * Running mean and variance of a window, from sums of shifted values.
 *
 * The window's values enter as d = x - anchor, where the anchor is a value close to the data
 * (the window's first sample, or its mean after a re-anchor), so that the sums stay small and the
 * variance does not suffer from cancellation (B. P. Welford (1962), "Note on a method for
 * calculating corrected sums of squares and products", Technometrics 4(3), 419-420, discusses the
 * cancellation this avoids; T. F. Chan, G. H. Golub & R. J. LeVeque (1983), "Algorithms for
 * computing the sample variance: analysis and recommendations", The American Statistician 37(3),
 * 242-247, recommend the shifted form when values can be removed as well as added).
 * Both sums use Neumaier's compensated summation (A. Neumaier (1974), ZAMM 54, 39-51), so that a
 * sliding window's many additions and removals cannot build up round-off between exact
 * recomputations.
 *
 * Cost: O(1) per added or removed value. Memory: a few numbers.
 */
export interface ShiftedMomentsState extends StateRecord<'shifted-moments', 1> {
  count: number;
  sum: number;
  sumCompensation: number;
  sumSquares: number;
  sumSquaresCompensation: number;
}

export class ShiftedMoments {
  count = 0;
  private sum = 0;
  private sumCompensation = 0;
  private sumSquares = 0;
  private sumSquaresCompensation = 0;

  add(shifted: number): void {
    this.count++;
    this.accumulate(shifted, shifted * shifted);
  }

  remove(shifted: number): void {
    this.count--;
    this.accumulate(-shifted, -(shifted * shifted));
  }

  reset(): void {
    this.count = 0;
    this.sum = 0;
    this.sumCompensation = 0;
    this.sumSquares = 0;
    this.sumSquaresCompensation = 0;
  }

  /** Sum of the shifted values. */
  get shiftedSum(): number {
    return this.sum + this.sumCompensation;
  }

  /** Sum of the squared shifted values. */
  get shiftedSumSquares(): number {
    return this.sumSquares + this.sumSquaresCompensation;
  }

  /** Mean of the shifted values (add the anchor back for the mean itself). */
  get shiftedMean(): number {
    return this.count > 0 ? this.shiftedSum / this.count : 0;
  }

  /** Sum of squared deviations from the mean; never negative. */
  get squaredDeviations(): number {
    if (this.count < 1) return 0;
    const s = this.shiftedSum;
    const m2 = this.shiftedSumSquares - (s * s) / this.count;
    return m2 > 0 ? m2 : 0;
  }

  /** Sample variance with divisor n - 1 (GUM 4.2.2); 0 below two values. */
  get variance(): number {
    return this.count > 1 ? this.squaredDeviations / (this.count - 1) : 0;
  }

  saveState(): ShiftedMomentsState {
    return { record: 'shifted-moments', version: 1, count: this.count, sum: this.sum, sumCompensation: this.sumCompensation, sumSquares: this.sumSquares, sumSquaresCompensation: this.sumSquaresCompensation };
  }

  loadState(state: ShiftedMomentsState): void {
    expectRecord(state, 'shifted-moments', 1);
    ({ count: this.count, sum: this.sum, sumCompensation: this.sumCompensation, sumSquares: this.sumSquares, sumSquaresCompensation: this.sumSquaresCompensation } = state);
  }

  private accumulate(value: number, square: number): void {
    // Neumaier's variant of Kahan summation: the compensation also holds when |value| > |sum|.
    let t = this.sum + value;
    if (Math.abs(this.sum) >= Math.abs(value)) this.sumCompensation += this.sum - t + value;
    else this.sumCompensation += value - t + this.sum;
    this.sum = t;
    t = this.sumSquares + square;
    if (Math.abs(this.sumSquares) >= Math.abs(square)) this.sumSquaresCompensation += this.sumSquares - t + square;
    else this.sumSquaresCompensation += square - t + this.sumSquares;
    this.sumSquares = t;
  }
}
