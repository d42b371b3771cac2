/**
 * Naive batch references for the criteria modules, written for clarity: every statistic is
 * recomputed from scratch over the window's readings (O(window) or worse per reading).
 */

export const EPS = 1e-6;

export type Bound = { kind: 'seconds'; seconds: number } | { kind: 'readings'; readings: number };

/** Indices (into times/values) of the readings in the window after reading `newest` arrived. */
export function windowIndices(times: readonly number[], newest: number, bound: Bound, span = 0): number[] {
  const out: number[] = [];
  if (bound.kind === 'readings') {
    for (let i = Math.max(0, newest - bound.readings + 1); i <= newest; i++) out.push(i);
    return out;
  }
  const oldest = (times[newest] as number) - bound.seconds - EPS;
  let first = newest;
  // Contiguous: the window is a suffix of the readings; a reading leaves once older than the bound.
  while (first > 0 && (times[first - 1] as number) - span >= oldest) first--;
  for (let i = first; i <= newest; i++) out.push(i);
  return out;
}

export function pick(values: readonly number[], indices: readonly number[]): number[] {
  return indices.map((i) => values[i] as number);
}

export function naiveMin(x: readonly number[]): number {
  let m = Infinity;
  for (const v of x) if (v < m) m = v;
  return m;
}

export function naiveMax(x: readonly number[]): number {
  let m = -Infinity;
  for (const v of x) if (v > m) m = v;
  return m;
}

export function naiveMean(x: readonly number[]): number {
  let s = 0;
  for (const v of x) s += v;
  return s / x.length;
}

export function naiveVariance(x: readonly number[]): number {
  const m = naiveMean(x);
  let s = 0;
  for (const v of x) s += (v - m) ** 2;
  return s / (x.length - 1);
}

/** Ordinary least squares of y on t, two-pass: slope and its standard error (n - 2 degrees of freedom). */
export function naiveSlope(t: readonly number[], y: readonly number[]): { slope: number; standardError: number } | null {
  const n = t.length;
  if (n < 3) return null;
  // Times relative to the first: times since the epoch would put round-off into the centring.
  const t0 = t[0] as number;
  t = t.map((v) => v - t0);
  const mt = naiveMean(t);
  const my = naiveMean(y);
  let stt = 0;
  let sty = 0;
  for (let i = 0; i < n; i++) {
    stt += ((t[i] as number) - mt) ** 2;
    sty += ((t[i] as number) - mt) * ((y[i] as number) - my);
  }
  if (!(stt > 0)) return null;
  const b = sty / stt;
  let rss = 0;
  // Residuals from centred values: an intercept at t = 0 (times since the epoch) would cancel digits.
  for (let i = 0; i < n; i++) rss += ((y[i] as number) - my - b * ((t[i] as number) - mt)) ** 2;
  return { slope: b, standardError: Math.sqrt(rss / (n - 2) / stt) };
}

/** Largest rise and largest fall between readings `lag` apart inside the window (null when no pair). */
export function naiveLaggedChange(values: readonly number[], indices: readonly number[], lag: number): { rise: number; fall: number } | null {
  let rise = -Infinity;
  let fall = -Infinity;
  const first = indices[0] as number;
  for (const i of indices) {
    if (i - lag < first) continue;
    const d = (values[i] as number) - (values[i - lag] as number);
    rise = Math.max(rise, d);
    fall = Math.max(fall, -d);
  }
  return rise === -Infinity ? null : { rise: rise + 0, fall: fall + 0 };
}

/**
 * Sub-interval averages by bucketing every sample: bucket j = [t0 + jL, t0 + (j + 1)L); a bucket's
 * average is known once a sample of a later bucket has arrived. Returns, per sample index, the
 * averages known after it ({time: bucket end, value}).
 */
export function naiveAverages(times: readonly number[], values: readonly number[], length: number): { time: number; value: number }[][] {
  const t0 = times[0] as number;
  const bucketOf = (t: number) => Math.floor((t - t0 + EPS) / length);
  const out: { time: number; value: number }[][] = [];
  for (let k = 0; k < times.length; k++) {
    const newestBucket = bucketOf(times[k] as number);
    const sums = new Map<number, { s: number; n: number }>();
    for (let i = 0; i <= k; i++) {
      const b = bucketOf(times[i] as number);
      if (b >= newestBucket) continue;
      const e = sums.get(b) ?? { s: 0, n: 0 };
      e.s += values[i] as number;
      e.n++;
      sums.set(b, e);
    }
    out.push([...sums.entries()].sort((a, b) => a[0] - b[0]).map(([b, e]) => ({ time: t0 + (b + 1) * length, value: e.s / e.n })));
  }
  return out;
}

/** Readings taken every `interval`: for each grid tick t0 + mS, the first sample at or after it not already taken. */
export function naiveSampled(times: readonly number[], interval: number): number[] {
  const taken: number[] = [];
  if (times.length === 0) return taken;
  const t0 = times[0] as number;
  const last = times[times.length - 1] as number;
  let previous = -1;
  for (let m = 0; t0 + m * interval <= last + EPS; m++) {
    const tick = t0 + m * interval;
    // A reading taken late (after a gap) stands for every tick it passed.
    if (previous >= 0 && (times[previous] as number) >= tick - EPS) continue;
    let found = -1;
    for (let i = previous + 1; i < times.length; i++) {
      if ((times[i] as number) >= tick - EPS) {
        found = i;
        break;
      }
    }
    if (found < 0) break;
    taken.push(found);
    previous = found;
  }
  return taken;
}
