/** Naive batch reference implementations, written for clarity, for property tests against the streaming code. */

export function naiveMean(x: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < x.length; i++) s += x[i] as number;
  return s / x.length;
}

/** Two-pass sample variance (divisor n - 1). */
export function naiveVariance(x: ArrayLike<number>): number {
  const m = naiveMean(x);
  let s = 0;
  for (let i = 0; i < x.length; i++) s += ((x[i] as number) - m) ** 2;
  return s / (x.length - 1);
}

/** Biased autocovariance (divisor n) at lags 0..maxLag, two-pass, O(n * maxLag). */
export function naiveAutocovariance(x: ArrayLike<number>, maxLag: number): number[] {
  const n = x.length;
  const m = naiveMean(x);
  const out: number[] = [];
  for (let k = 0; k <= Math.min(maxLag, n - 1); k++) {
    let s = 0;
    for (let i = k; i < n; i++) s += ((x[i] as number) - m) * ((x[i - k] as number) - m);
    out.push(s / n);
  }
  return out;
}
