/**
 * Readings on a lattice: an indication's resolution (a display of 0.1 degC, an ADC step), found as
 * few distinct values sharing a common step.
 *
 * Why: when the step is comparable to the noise, the mean of the readings carries a quantisation
 * bias that no Type A evaluation sees (GUM F.2.2.1 treats the resolution as a rectangular
 * component of half-width step / 2, u = step / sqrt(12)); the records propose that component.
 * Method: the distinct values of the window (stopped once more than MAX_DISTINCT are seen: no
 *   lattice then), sorted; the step is the greatest common divisor of the successive differences,
 *   found by the Euclidean algorithm on the differences in units of the smallest one, within a
 *   relative tolerance of 1e-6 (decimal steps are not exact in binary). `coarse` when the step is at
 *   least a quarter of the readings' standard deviation: the resolution then matters for the mean
 *   (finer lattices are reported, not flagged).
 * Cost: O(n) with a set of at most MAX_DISTINCT values, plus O(d log d) for d distinct values; for
 *   readings that are not on a lattice, the reading stops after MAX_DISTINCT + 1 distinct values.
 */
export interface Lattice {
  step: number;
  distinct: number;
  /** Step >= sd / 4: the resolution matters for the mean. */
  coarse: boolean;
}

export const MAX_DISTINCT = 256;
const TOLERANCE = 1e-6;

export function detectLattice(values: ArrayLike<number>): Lattice | null {
  return detectLatticeAt(values.length, (i) => values[i] as number);
}

/** detectLattice over n values read by index (a ring buffer, without copying it). */
export function detectLatticeAt(n: number, valueAt: (i: number) => number): Lattice | null {
  const values = { length: n, at: valueAt };
  if (n < 16) return null;
  const seen = new Set<number>();
  let mean = 0;
  for (let i = 0; i < n; i++) {
    const v = valueAt(i);
    mean += v;
    seen.add(v);
    // more distinct values than a lattice has: stop reading (continuous readings cost O(MAX_DISTINCT))
    if (seen.size > MAX_DISTINCT) return null;
  }
  if (seen.size < 2) return null;
  mean /= n;
  let squares = 0;
  for (let i = 0; i < n; i++) squares += (values.at(i) - mean) ** 2;
  const sd = Math.sqrt(squares / (n - 1));
  const sorted = [...seen].sort((a, b) => a - b);
  let smallest = Number.POSITIVE_INFINITY;
  for (let i = 1; i < sorted.length; i++) smallest = Math.min(smallest, (sorted[i] as number) - (sorted[i - 1] as number));
  if (!(smallest > 0)) return null;
  let step = smallest;
  for (let i = 1; i < sorted.length; i++) {
    const difference = (sorted[i] as number) - (sorted[i - 1] as number);
    step = approximateGcd(difference, step);
    if (step < smallest * 1e-3) return null;
  }
  // A lattice with more than a few distinct values per step of spread is just fine data.
  if (sorted.length > 2 && ((sorted[sorted.length - 1] as number) - (sorted[0] as number)) / step > 4 * MAX_DISTINCT) return null;
  return { step, distinct: sorted.length, coarse: step >= sd / 4 };
}

function approximateGcd(a: number, b: number): number {
  let x = Math.max(a, b);
  let y = Math.min(a, b);
  const scale = x;
  for (let guard = 0; guard < 64 && y > TOLERANCE * scale; guard++) {
    let r = x % y;
    if (y - r < TOLERANCE * scale) r = 0;
    x = y;
    y = r;
  }
  return x;
}
