import { expectRecord, type StateRecord } from '../state/record.js';
/**
 * Lagged cross-products of a window, for its autocovariance at lags 0..maxLag.
 *
 * Keeps C_k = sum over pairs (i, i + k) inside the window of d_i * d_(i+k), for k = 0..maxLag,
 * over the shifted values d, as values enter at the back and leave at the front. The biased
 * sample autocovariance (divisor n, as in R `acf` and statsmodels `acf(adjusted=False)`;
 * G. E. P. Box & G. M. Jenkins, "Time Series Analysis: Forecasting and Control", 1970, 2.1.4)
 * follows from C_k and the window sums in O(maxLag): see `autocovarianceFromProducts`.
 *
 * Speed: values are buffered in chunks of `chunk` and their products with the preceding maxLag
 * values are accumulated lag by lag in one register (a dot product per lag), which runs several
 * times faster in V8 than a read-modify-write of every C_k per sample (bench/precision.js measures
 * both). Removals from the front are batched the same way. Pending values are folded in when the
 * products are read, so a snapshot never changes the state: the sums depend only on the sequence
 * of values, never on when they were read.
 *
 * Cost: O(maxLag) per value entering or leaving, in chunks. Memory: 8 * (maxLag + 1) bytes for the
 *   products plus 16 * (maxLag + chunk) for the buffers.
 */
export type FrontReader = (i: number) => number;

export interface LaggedProductsState extends StateRecord<'lagged-products', 1> {
  committed: Float64Array;
  addBuffer: Float64Array;
  removeBuffer: Float64Array;
  history: number;
  pendingAdds: number;
  pendingRemoves: number;
  windowLength: number;
}

export class LaggedProducts {
  readonly maxLag: number;
  readonly chunk: number;
  /** C_k over the committed values (pending values not included). */
  private readonly committed: Float64Array;
  /** [maxLag slots of history | chunk slots of pending values]. */
  private readonly addBuffer: Float64Array;
  private history = 0; // valid history values, right-aligned before slot maxLag
  private pendingAdds = 0;
  /** Values removed from the front but not yet subtracted, oldest first, then scratch for partners. */
  private readonly removeBuffer: Float64Array;
  private pendingRemoves = 0;
  private readonly front: FrontReader;
  /** Values in the window (committed + pending adds), before pending removals are applied. */
  private windowLength = 0;
  private readonly scratch: Float64Array;

  /**
   * @param front reads the i-th oldest shifted value currently in the window (after removals).
   */
  constructor(maxLag: number, front: FrontReader, chunk = 64) {
    if (!Number.isInteger(maxLag) || maxLag < 1) throw new RangeError('lagged products require an integer maxLag of at least 1');
    this.maxLag = maxLag;
    this.chunk = chunk;
    this.front = front;
    this.committed = new Float64Array(maxLag + 1);
    this.addBuffer = new Float64Array(maxLag + chunk);
    this.removeBuffer = new Float64Array(chunk + maxLag);
    this.scratch = new Float64Array(maxLag + 1);
  }

  /** Adds the newest shifted value. */
  addNewest(shifted: number): void {
    this.addBuffer[this.maxLag + this.pendingAdds] = shifted;
    this.pendingAdds++;
    this.windowLength++;
    if (this.pendingAdds === this.chunk) this.flush();
  }

  /** Records that the oldest value (`shifted`) has left the window. */
  removeOldest(shifted: number): void {
    // Only committed values can be subtracted: in a window shorter than the pending chunk the
    // leaving value may still be pending, so commit first. Pending partners need nothing: they
    // are paired later with the remaining history only.
    if (this.windowLength - this.pendingAdds < 1) this.flush();
    this.removeBuffer[this.pendingRemoves] = shifted;
    this.pendingRemoves++;
    this.windowLength--;
    if (this.pendingRemoves === this.chunk) this.flush();
  }

  /** C_0..C_maxLag over the whole current window, pending values included; the state is unchanged. */
  products(out: Float64Array = new Float64Array(this.maxLag + 1)): Float64Array {
    out.set(this.committed);
    this.applyRemovals(out);
    this.applyAdds(out, this.committedInWindow());
    return out;
  }

  reset(): void {
    this.committed.fill(0);
    this.history = 0;
    this.pendingAdds = 0;
    this.pendingRemoves = 0;
    this.windowLength = 0;
  }

  saveState(): LaggedProductsState {
    return {
      record: 'lagged-products',
      version: 1,
      committed: this.committed.slice(),
      addBuffer: this.addBuffer.slice(),
      removeBuffer: this.removeBuffer.slice(),
      history: this.history,
      pendingAdds: this.pendingAdds,
      pendingRemoves: this.pendingRemoves,
      windowLength: this.windowLength,
    };
  }

  loadState(state: LaggedProductsState): void {
    expectRecord(state, 'lagged-products', 1);
    if (state.committed.length !== this.committed.length || state.addBuffer.length !== this.addBuffer.length) {
      throw new RangeError('lagged products state was saved with another maxLag or chunk');
    }
    this.committed.set(state.committed);
    this.addBuffer.set(state.addBuffer);
    this.removeBuffer.set(state.removeBuffer);
    ({ history: this.history, pendingAdds: this.pendingAdds, pendingRemoves: this.pendingRemoves, windowLength: this.windowLength } = state);
  }

  /** Values in the window whose products are committed (excludes pending adds). */
  private committedInWindow(): number {
    return this.windowLength - this.pendingAdds;
  }

  private flush(): void {
    this.applyRemovals(this.committed);
    this.pendingRemoves = 0;
    const committedBefore = this.committedInWindow();
    this.applyAdds(this.committed, committedBefore);
    // Roll the history: keep the last maxLag values of [history | pending].
    const L = this.maxLag;
    const valid = Math.min(this.history, committedBefore) + this.pendingAdds;
    this.addBuffer.copyWithin(0, this.pendingAdds, this.pendingAdds + L);
    this.history = Math.min(L, valid);
    this.pendingAdds = 0;
  }

  /** Subtracts the pairs of the pending removals from `target`. */
  private applyRemovals(target: Float64Array): void {
    const R = this.pendingRemoves;
    if (R === 0) return;
    const L = this.maxLag;
    const buffer = this.removeBuffer;
    // Partners still in the window: committed values only (pending adds were never paired).
    const partners = Math.min(L, this.committedInWindow());
    for (let i = 0; i < partners; i++) buffer[R + i] = this.front(i);
    // Zeros past the partners let every lag run over all R removed values without bounds.
    buffer.fill(0, R + partners, R + L);
    forwardDotProducts(buffer, R, L, target, -1);
  }

  /** Adds the pairs of the pending adds (with each other and with the valid history) to `target`. */
  private applyAdds(target: Float64Array, committedInWindow: number): void {
    const A = this.pendingAdds;
    if (A === 0) return;
    const L = this.maxLag;
    const buffer = this.addBuffer;
    const history = Math.min(this.history, committedInWindow);
    // Slots before the valid history are never read as data again: zero them so that every lag
    // can run over the whole chunk without bounds.
    if (history < L) buffer.fill(0, 0, L - history);
    backwardDotProducts(buffer, L, L + A, L, target);
  }

  get byteLength(): number {
    return this.committed.byteLength + this.addBuffer.byteLength + this.removeBuffer.byteLength + this.scratch.byteLength;
  }
}

/**
 * Biased autocovariance at lags 0..maxLag from lagged products.
 *
 * gamma_k = (1/n) * sum_{i=k}^{n-1} (d_i - m)(d_(i-k) - m)
 *         = (1/n) * [C_k - m * (H_k + T_k) + (n - k) * m^2],
 * with m the mean of the shifted values, H_k the sum without the first k values and T_k the sum
 * without the last k. `front[i]` and `back[i]` hold the i-th shifted value from either end
 * (at least maxLag of each, or n when the window is shorter).
 *
 * Cost: O(maxLag).
 */
export function autocovarianceFromProducts(
  products: Float64Array,
  n: number,
  shiftedSum: number,
  front: Float64Array,
  back: Float64Array,
  out?: Float64Array,
): Float64Array {
  const lags = Math.min(products.length - 1, n - 1);
  const gamma = out && out.length >= lags + 1 ? out : new Float64Array(Math.max(0, lags + 1));
  if (n < 1) return gamma;
  const m = shiftedSum / n;
  let firstK = 0; // sum of the first k values
  let lastK = 0; // sum of the last k values
  for (let k = 0; k <= lags; k++) {
    if (k > 0) {
      firstK += front[k - 1] as number;
      lastK += back[k - 1] as number;
    }
    const withoutFirst = shiftedSum - firstK;
    const withoutLast = shiftedSum - lastK;
    gamma[k] = ((products[k] as number) - m * (withoutFirst + withoutLast) + (n - k) * m * m) / n;
  }
  return gamma;
}

/**
 * target[k] += sum_{i=start}^{end-1} b[i] * b[i-k] for k = 0..maxLag. Four lags per pass with the
 * lagged operands rotated through registers: one new load per product group (measured about 2.5x
 * faster than one lag per pass in V8; bench/precision.js).
 */
function backwardDotProducts(b: Float64Array, start: number, end: number, maxLag: number, target: Float64Array): void {
  let k = 0;
  for (; k + 3 <= maxLag; k += 4) {
    let a0 = 0;
    let a1 = 0;
    let a2 = 0;
    let a3 = 0;
    let j1 = b[start - k - 1] as number;
    let j2 = b[start - k - 2] as number;
    let j3 = b[start - k - 3] as number;
    for (let i = start; i < end; i++) {
      const v = b[i] as number;
      const j0 = b[i - k] as number;
      a0 += v * j0;
      a1 += v * j1;
      a2 += v * j2;
      a3 += v * j3;
      j3 = j2;
      j2 = j1;
      j1 = j0;
    }
    target[k] = (target[k] as number) + a0;
    target[k + 1] = (target[k + 1] as number) + a1;
    target[k + 2] = (target[k + 2] as number) + a2;
    target[k + 3] = (target[k + 3] as number) + a3;
  }
  for (; k <= maxLag; k++) {
    let a = 0;
    for (let i = start; i < end; i++) a += (b[i] as number) * (b[i - k] as number);
    target[k] = (target[k] as number) + a;
  }
}

/** target[k] += sign * sum_{r=0}^{count-1} b[r] * b[r+k] for k = 0..maxLag (b zero-padded past its data). */
function forwardDotProducts(b: Float64Array, count: number, maxLag: number, target: Float64Array, sign: number): void {
  let k = 0;
  for (; k + 3 <= maxLag; k += 4) {
    let a0 = 0;
    let a1 = 0;
    let a2 = 0;
    let a3 = 0;
    let j0 = b[k] as number;
    let j1 = b[k + 1] as number;
    let j2 = b[k + 2] as number;
    for (let r = 0; r < count; r++) {
      const v = b[r] as number;
      const j3 = b[r + k + 3] as number;
      a0 += v * j0;
      a1 += v * j1;
      a2 += v * j2;
      a3 += v * j3;
      j0 = j1;
      j1 = j2;
      j2 = j3;
    }
    target[k] = (target[k] as number) + sign * a0;
    target[k + 1] = (target[k + 1] as number) + sign * a1;
    target[k + 2] = (target[k + 2] as number) + sign * a2;
    target[k + 3] = (target[k + 3] as number) + sign * a3;
  }
  for (; k <= maxLag; k++) {
    let a = 0;
    for (let r = 0; r < count; r++) a += (b[r] as number) * (b[r + k] as number);
    target[k] = (target[k] as number) + sign * a;
  }
}
