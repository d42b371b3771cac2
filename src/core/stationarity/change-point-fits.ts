/**
 * One-change fits of a short series (block means): the best step and the best ramp, by least squares
 * profiled over the change point c (the profile-likelihood change-point estimate with known noise;
 * D. V. Hinkley (1970), "Inference about the change-point in a sequence of random variables",
 * Biometrika 57(1), 1-17, from memory):
 *   step  y_i = a before c, b from c on              (c in 1..k-1)
 *   ramp  y_i = a + s max(0, i - c)                   (c in 0..k-3)
 * Both have three free parameters, so their residual sums of squares compare directly.
 * Ties keep the earliest c. Cost: O(k) for the step (prefix sums), O(k^2) for the ramp.
 */
export interface ChangeFits {
  /** Sum of squares about the overall mean. */
  squares: number;
  step: { rss: number; at: number };
  ramp: { rss: number; at: number; slope: number; sxx: number };
}

export function changeFits(y: ArrayLike<number>, count = y.length): ChangeFits {
  const k = count;
  let total = 0;
  for (let i = 0; i < k; i++) total += y[i] as number;
  const mean = total / k;
  let squares = 0;
  for (let i = 0; i < k; i++) squares += ((y[i] as number) - mean) ** 2;
  const step = { rss: Number.POSITIVE_INFINITY, at: Math.max(1, k - 1) };
  let prefix = 0;
  for (let c = 1; c < k; c++) {
    prefix += y[c - 1] as number;
    const before = prefix / c;
    const after = (total - prefix) / (k - c);
    const rss = squares - c * (before - mean) ** 2 - (k - c) * (after - mean) ** 2;
    if (rss < step.rss) {
      step.rss = rss;
      step.at = c;
    }
  }
  const ramp = { rss: Number.POSITIVE_INFINITY, at: 0, slope: 0, sxx: 1 };
  for (let c = 0; c < k - 2; c++) {
    let su = 0;
    let suu = 0;
    let suy = 0;
    for (let i = c + 1; i < k; i++) {
      const u = i - c;
      su += u;
      suu += u * u;
      suy += u * (y[i] as number);
    }
    const uMean = su / k;
    const sxx = suu - k * uMean * uMean;
    if (!(sxx > 0)) continue;
    const slope = (suy - uMean * total) / sxx;
    const rss = squares - slope * slope * sxx;
    if (rss < ramp.rss) {
      ramp.rss = rss;
      ramp.at = c;
      ramp.slope = slope;
      ramp.sxx = sxx;
    }
  }
  return { squares, step, ramp };
}
