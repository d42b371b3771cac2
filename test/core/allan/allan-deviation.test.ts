import { describe, expect, it } from 'vitest';
import {
  type AllanPoint,
  allanFromBlockMeans,
  averagingLimit,
  nonOverlappingAllanDeviation,
  nonOverlappingWhiteFmEdf,
  octaveFactors,
  overlappingAllanDeviation,
  overlappingWhiteFmEdf,
} from '../../../src/core/allan/allan-deviation.js';
import { SeededRandom, ar1Series } from '../../../src/core/random/seeded-random.js';
import { WindowedSeries } from '../../../src/core/window/windowed-series.js';
import { readSharedJson, sharedReferenceAvailable } from '../../helpers/reference.js';

/**
 * NIST SP 1065 (W. J. Riley 2008) 1000-point test set, regenerated from its published definition
 * (REFERENCES.md section 2.1): n_0 = 1234567890, n_(i+1) = 16807 n_i mod 2147483647,
 * y_i = n_i / 2147483647, i = 0..999, tau0 = 1 s.
 */
function sp1065Frequency(): Float64Array {
  const y = new Float64Array(1000);
  let n = 1234567890;
  for (let i = 0; i < 1000; i++) {
    y[i] = n / 2147483647;
    n = (16807 * n) % 2147483647; // 16807 * n < 2^53: exact in doubles
  }
  return y;
}

// SP 1065 1000-point results table (p. 108), 7 significant digits, as given in REFERENCES.md
// section 2.1 (marked verified there).
const SP1065_TAUS = [1, 10, 100];
const SP1065_ADEV = [2.922319e-1, 9.965736e-2, 3.897804e-2];
const SP1065_OADEV = [2.922319e-1, 9.159953e-2, 3.241343e-2];
// NBS14 10-point set (Riley, "The Calculation of Time Domain Frequency Stability", Table I, and
// SP 1065 p. 107; REFERENCES.md section 2.2): 9 frequency values, tau0 = 1.
const NBS14_FREQUENCY = [892, 809, 823, 798, 671, 644, 883, 903, 677];
const NBS14_ADEV = [91.22945, 115.8082];
const NBS14_OADEV = [91.22945, 85.95287];

/** Half a unit in the last of `digits` significant digits of a published value. */
function halfUnitInLastDigit(published: number, digits: number): number {
  return 0.5 * 10 ** (Math.floor(Math.log10(Math.abs(published))) - digits + 1);
}

function whiteNoise(random: SeededRandom, n: number): Float64Array {
  const y = new Float64Array(n);
  for (let i = 0; i < n; i++) y[i] = random.normal();
  return y;
}

function randomWalk(random: SeededRandom, n: number, step = 1): Float64Array {
  const y = new Float64Array(n);
  let walk = 0;
  for (let i = 0; i < n; i++) y[i] = walk += step * random.normal();
  return y;
}

/** Least-squares slope of ln adev against ln m over the points with minM <= m <= maxM. */
function logLogSlope(points: AllanPoint[], minM: number, maxM: number): number {
  const used = points.filter((p) => p.m >= minM && p.m <= maxM);
  const xs = used.map((p) => Math.log(p.m));
  const ys = used.map((p) => Math.log(p.adev));
  const mx = xs.reduce((a, b) => a + b, 0) / xs.length;
  const my = ys.reduce((a, b) => a + b, 0) / ys.length;
  let sxy = 0;
  let sxx = 0;
  xs.forEach((x, i) => {
    sxy += (x - mx) * ((ys[i] as number) - my);
    sxx += (x - mx) ** 2;
  });
  return sxy / sxx;
}

describe('Allan deviation: published test sets', () => {
  const y = sp1065Frequency();

  it('regenerates the SP 1065 1000-point set: first terms 1234567890, 395529916, 1209410747, 633705974 (SP 1065 definition)', () => {
    expect(Array.from(y.slice(0, 4), (v) => Math.round(v * 2147483647))).toEqual([1234567890, 395529916, 1209410747, 633705974]);
  });

  it('normal (non-overlapping) ADEV at tau = 1, 10, 100 matches NIST SP 1065 p. 108 to 7 digits', () => {
    const points = nonOverlappingAllanDeviation(y, SP1065_TAUS, 1);
    expect(points.map((p) => p.tau)).toEqual(SP1065_TAUS);
    points.forEach((p, i) => {
      const published = SP1065_ADEV[i] as number;
      expect(Math.abs(p.adev - published)).toBeLessThanOrEqual(halfUnitInLastDigit(published, 7));
    });
    // Terms: M - 1 = floor(1000 / m) - 1.
    expect(points.map((p) => p.count)).toEqual([999, 99, 9]);
  });

  it('overlapping ADEV at tau = 1, 10, 100 matches NIST SP 1065 p. 108 to 7 digits', () => {
    const points = overlappingAllanDeviation(y, SP1065_TAUS, 1);
    points.forEach((p, i) => {
      const published = SP1065_OADEV[i] as number;
      expect(Math.abs(p.adev - published)).toBeLessThanOrEqual(halfUnitInLastDigit(published, 7));
    });
    // Terms: N - 2m + 1 (N + 1 phase points minus 2m).
    expect(points.map((p) => p.count)).toEqual([999, 981, 801]);
  });

  it.skipIf(!sharedReferenceAvailable())('the published values above are those of ../shared/reference/reference-values.json (transcription check; skipped when the shared reference is absent)', () => {
    const reference = readSharedJson<{
      sp1065_frequency_stability: { deviations: Record<string, { tau: number[]; published: { value: number[] } }>; nbs14_10point: { deviations: Record<string, { published: { value: number[] } }> } };
    }>('reference-values.json').sp1065_frequency_stability;
    expect(reference.deviations.adev!.published.value).toEqual(SP1065_ADEV);
    expect(reference.deviations.oadev!.published.value).toEqual(SP1065_OADEV);
    expect(reference.deviations.adev!.tau).toEqual(SP1065_TAUS);
    expect(reference.nbs14_10point.deviations.adev!.published.value).toEqual(NBS14_ADEV);
    expect(reference.nbs14_10point.deviations.oadev!.published.value).toEqual(NBS14_OADEV);
  });

  it('NBS14 10-point set: ADEV and OADEV at tau = 1, 2 match Riley Table I / SP 1065 p. 107 to 7 digits', () => {
    const normal = nonOverlappingAllanDeviation(NBS14_FREQUENCY, [1, 2], 1);
    const overlapping = overlappingAllanDeviation(NBS14_FREQUENCY, [1, 2], 1);
    [0, 1].forEach((i) => {
      expect(Math.abs((normal[i] as AllanPoint).adev - (NBS14_ADEV[i] as number))).toBeLessThanOrEqual(halfUnitInLastDigit(NBS14_ADEV[i] as number, 7));
      expect(Math.abs((overlapping[i] as AllanPoint).adev - (NBS14_OADEV[i] as number))).toBeLessThanOrEqual(halfUnitInLastDigit(NBS14_OADEV[i] as number, 7));
    });
  });

  it('tau scales with tau0 while the deviation does not (definition tau = m tau0)', () => {
    const scaled = overlappingAllanDeviation(y, [10], 0.25)[0]!;
    const unit = overlappingAllanDeviation(y, [10], 1)[0]!;
    expect(scaled.tau).toBe(2.5);
    expect(scaled.adev).toBe(unit.adev);
  });

  it('is stable against a large constant offset: y + 1e7 gives the same deviations to 1e-7 (NIST StRD NumAcc4-style check, common practice)', () => {
    // Adding 1e7 rounds each value to about 1e-9 absolute (1e7 * 2^-52 / 2); relative to ADEV
    // values of 0.03 .. 0.3 that bounds the change near 1e-7. A phase accumulated without removing
    // the mean would lose about 7 digits here.
    const shifted = Float64Array.from(y, (v) => v + 1e7);
    const factors = [1, 10, 100];
    const base = overlappingAllanDeviation(y, factors, 1);
    overlappingAllanDeviation(shifted, factors, 1).forEach((p, i) => expect(Math.abs(p.adev / base[i]!.adev - 1)).toBeLessThan(1e-7));
    const baseNormal = nonOverlappingAllanDeviation(y, factors, 1);
    nonOverlappingAllanDeviation(shifted, factors, 1).forEach((p, i) => expect(Math.abs(p.adev / baseNormal[i]!.adev - 1)).toBeLessThan(1e-7));
  });
});

describe('Allan deviation: noise-type slopes over octaves', () => {
  // IEEE Std 1139 / SP 1065 power-law noise (common practice): white FM falls as tau^(-1/2),
  // random-walk FM rises as tau^(+1/2) on log-log axes. N = 2^15 samples, octaves m = 1 .. 1024
  // (edf >= about 45 everywhere). Measured over 30 seeds: white slope -0.5025 +- 0.011 (SD),
  // random-walk slope (m >= 4) 0.496 +- 0.025. Tolerances 0.05 and 0.1 are about 4 SD.
  it('white FM noise: slope -1/2 within 0.05', () => {
    for (const seed of [11, 12, 13]) {
      const y = whiteNoise(new SeededRandom(seed), 1 << 15);
      expect(Math.abs(logLogSlope(overlappingAllanDeviation(y, octaveFactors(y.length), 1), 1, 1024) + 0.5)).toBeLessThan(0.05);
    }
  });

  it('random-walk FM noise: slope +1/2 within 0.1 (from m = 4: the discrete walk gives AVAR = (2m^2 + 1) / (6m), slope 0.29 in the first octave)', () => {
    for (const seed of [21, 22, 23]) {
      const y = randomWalk(new SeededRandom(seed), 1 << 15);
      expect(Math.abs(logLogSlope(overlappingAllanDeviation(y, octaveFactors(y.length), 1), 4, 1024) - 0.5)).toBeLessThan(0.1);
    }
  });
});

describe('Allan deviation: equivalent degrees of freedom and confidence intervals', () => {
  // Monte Carlo on unit white noise: the edf is 2 E[AVAR]^2 / Var[AVAR] (the chi-square moment
  // match behind SP 1065 section 5.3). 2000 replicates: the Monte Carlo edf has a relative SE of
  // about sqrt(2 / 2000) = 3.2 %; tolerance 15 % (about 4.7 SE). Measured (3000 replicates):
  // overlapping 92.2 vs 91.8 at m = 8, 22.0 vs 22.1 at m = 32, 10.0 vs 9.5 at m = 64;
  // non-overlapping 42.2 vs 43.5, 10.2 vs 10.5, 4.9 vs 4.7.
  it('white FM: the Howe-Allan-Barnes (1981, from memory; SP 1065 Table 5) and the derived non-overlapping edf agree with Monte Carlo', () => {
    const random = new SeededRandom(41);
    const n = 512;
    const factors = [8, 32, 64];
    const replicates = 2000;
    const overlapping = factors.map(() => [] as number[]);
    const normal = factors.map(() => [] as number[]);
    for (let r = 0; r < replicates; r++) {
      const y = whiteNoise(random, n);
      overlappingAllanDeviation(y, factors, 1).forEach((p, i) => overlapping[i]!.push(p.adev ** 2));
      nonOverlappingAllanDeviation(y, factors, 1).forEach((p, i) => normal[i]!.push(p.adev ** 2));
    }
    const monteCarloEdf = (values: number[]) => {
      const mean = values.reduce((a, b) => a + b, 0) / values.length;
      const variance = values.reduce((a, b) => a + (b - mean) ** 2, 0) / (values.length - 1);
      return (2 * mean * mean) / variance;
    };
    factors.forEach((m, i) => {
      expect(Math.abs(monteCarloEdf(overlapping[i]!) / overlappingWhiteFmEdf(n + 1, m) - 1)).toBeLessThan(0.15);
      expect(Math.abs(monteCarloEdf(normal[i]!) / nonOverlappingWhiteFmEdf(Math.floor(n / m)) - 1)).toBeLessThan(0.15);
    });
  });

  // Coverage of the one-sigma (68.27 %) chi-square intervals for the true ADEV 1/sqrt(m) of unit
  // white FM (SP 1065: AVAR = sigma^2 / m). 2000 replicates: SE 1.0 %; band +-5 % allows for the
  // chi-square approximation at small edf (measured 67.7 % .. 70.9 %).
  it('one-sigma intervals cover the true ADEV of white FM about 68 % of the time (Monte Carlo)', () => {
    const random = new SeededRandom(42);
    const factors = [1, 8, 32];
    const replicates = 2000;
    const coveredOverlapping = [0, 0, 0];
    const coveredNormal = [0, 0, 0];
    for (let r = 0; r < replicates; r++) {
      const y = whiteNoise(random, 256);
      overlappingAllanDeviation(y, factors, 1).forEach((p, i) => {
        if (p.low <= 1 / Math.sqrt(p.m) && 1 / Math.sqrt(p.m) <= p.high) coveredOverlapping[i]!++;
      });
      nonOverlappingAllanDeviation(y, factors, 1).forEach((p, i) => {
        if (p.low <= 1 / Math.sqrt(p.m) && 1 / Math.sqrt(p.m) <= p.high) coveredNormal[i]!++;
      });
    }
    for (const covered of [...coveredOverlapping, ...coveredNormal]) expect(Math.abs(covered / replicates - 0.6827)).toBeLessThan(0.05);
  });

  it('edf formulas: non-overlapping gives exactly 1 for two blocks; overlapping at m = 1 is close to the non-overlapping value (same estimator)', () => {
    expect(nonOverlappingWhiteFmEdf(2)).toBe(1);
    // At m = 1 both estimators coincide; the two edf approximations agree to 0.1 %.
    expect(Math.abs(overlappingWhiteFmEdf(1001, 1) / nonOverlappingWhiteFmEdf(1000) - 1)).toBeLessThan(1e-3);
    const point = overlappingAllanDeviation(sp1065Frequency(), [10], 1, { confidence: 0.95 })[0]!;
    expect(point.low).toBeLessThan(point.adev);
    expect(point.high).toBeGreaterThan(point.adev);
  });
});

describe('octaveFactors', () => {
  it('lists 1, 2, 4, ... while at least 2 overlapping terms remain (N - 2m + 1 >= 2)', () => {
    expect(octaveFactors(1000)).toEqual([1, 2, 4, 8, 16, 32, 64, 128, 256]);
    expect(octaveFactors(9)).toEqual([1, 2, 4]);
    expect(octaveFactors(3)).toEqual([1]);
    expect(octaveFactors(2)).toEqual([]);
    for (const n of [5, 64, 1000, 4097]) {
      const factors = octaveFactors(n);
      const last = factors[factors.length - 1]!;
      expect(n - 2 * last + 1).toBeGreaterThanOrEqual(2);
      expect(n - 4 * last + 1).toBeLessThan(2);
    }
  });

  it('skips factors without terms and rejects non-integer factors', () => {
    expect(overlappingAllanDeviation([1, 2, 3], [1, 2], 1).map((p) => p.m)).toEqual([1]);
    expect(nonOverlappingAllanDeviation([1, 2, 3], [1, 2], 1).map((p) => p.m)).toEqual([1]);
    expect(() => overlappingAllanDeviation([1, 2, 3], [1.5], 1)).toThrow(RangeError);
    expect(() => overlappingAllanDeviation([1, 2, 3], [1], 0)).toThrow(RangeError);
  });
});

describe('allanFromBlockMeans and the block pyramid', () => {
  it('equals the non-overlapping ADEV of the same blocks', () => {
    const y = sp1065Frequency();
    for (const m of [1, 10, 100]) {
      const blocks = Math.floor(y.length / m);
      const means = Float64Array.from({ length: blocks }, (_, k) => y.slice(k * m, (k + 1) * m).reduce((a, b) => a + b, 0) / m);
      const fromMeans = allanFromBlockMeans(means, m)!;
      const direct = nonOverlappingAllanDeviation(y, [m], 1)[0]!;
      expect(Math.abs(fromMeans.adev / direct.adev - 1)).toBeLessThan(1e-12);
      expect(fromMeans.count).toBe(direct.count);
      expect(fromMeans.edf).toBe(direct.edf);
    }
    expect(allanFromBlockMeans([1], 4)).toBeNull();
  });

  // The pyramid keeps, per level j, the sum of squared successive differences of its block means;
  // divided by 2 (count - 1) it is the non-overlapping AVAR at m = 2^j over the pyramid's aligned
  // blocks (SP 1065 section 5.2.2 definition). Tolerance 1e-9 relative: the pyramid forms the sum
  // from running sums of squares and neighbour products, which cancel to a few digits (measured
  // agreement here 3e-14 growing, 3e-13 sliding).
  it('WindowedSeries.pyramid.stats(j).successiveDifferenceSquares / (2 (count - 1)) is the non-overlapping AVAR at m = 2^j (growing and sliding windows)', () => {
    const random = new SeededRandom(51);
    const values = Float64Array.from(ar1Series(random, 0.7, 3000), (v, i) => 20 + v + 1e-3 * i);
    for (const [maxSamples, preallocate] of [[1 << 13, false], [1000, true]] as const) {
      const series = new WindowedSeries({ maxSamples, maxLag: 8, preallocate });
      values.forEach((v, i) => series.push(v, i));
      let checked = 0;
      for (let j = 1; j <= 12; j++) {
        const stats = series.pyramid.stats(j);
        if (!stats || stats.count < 2) continue;
        const m = 2 ** j;
        const start = series.pyramid.frontStart(j);
        const aligned = values.slice(start, start + stats.count * m);
        const expected = nonOverlappingAllanDeviation(aligned, [m], 1)[0]!;
        const pyramidAvar = stats.successiveDifferenceSquares / (2 * (stats.count - 1));
        expect(Math.abs(pyramidAvar / expected.adev ** 2 - 1)).toBeLessThan(1e-9);
        const fromLevel = allanFromBlockMeans(series.pyramid.blockMeans(j), m)!;
        expect(Math.abs(fromLevel.adev / expected.adev - 1)).toBeLessThan(1e-9);
        checked++;
      }
      expect(checked).toBeGreaterThanOrEqual(maxSamples === 1000 ? 7 : 9);
    }
  });
});

describe('averagingLimit', () => {
  function point(m: number, adev: number, edf: number, low: number, high: number): AllanPoint {
    return { m, tau: m, adev, count: 100, edf, low, high };
  }

  it('follows the rule on constructed points: first point with no later point significantly below, confirmed by a later rise', () => {
    // Falling with tight bars to m = 4, then flat at 0.5, then rising well above the 1/sqrt(m) continuation.
    const points = [
      point(1, 2, 1000, 1.9, 2.1),
      point(2, 1.4, 1000, 1.33, 1.47),
      point(4, 0.7, 1000, 0.66, 0.74),
      point(8, 0.5, 1000, 0.47, 0.53),
      point(16, 0.52, 1000, 0.49, 0.55),
      point(32, 0.6, 1000, 0.56, 0.64),
    ];
    expect(averagingLimit(points)).toEqual({ m: 8, tau: 8, adev: 0.5 });
    // The same, shuffled: the rule sorts by m.
    expect(averagingLimit([...points].reverse())).toEqual({ m: 8, tau: 8, adev: 0.5 });
    // Still falling at the largest m: null.
    expect(averagingLimit(points.slice(0, 3))).toBeNull();
    expect(averagingLimit([points[0]!])).toBeNull();
  });

  // Measured over 100 seeds each (N = 2^14, octaves): white FM 99 null / 1 false floor;
  // AR(1) phi = 0.9 100 null; random-walk FM 100 at m = 1; white FM + linear drift 1e-3 per sample
  // 91 at m = 64, 9 at m = 128. Here 20 seeds each.
  const N = 1 << 14;
  it('white FM noise: no averaging limit (ADEV falls throughout) in at least 19 of 20 seeds', () => {
    let nulls = 0;
    for (let seed = 0; seed < 20; seed++) {
      const y = whiteNoise(new SeededRandom(600 + seed), N);
      if (averagingLimit(overlappingAllanDeviation(y, octaveFactors(N), 1)) === null) nulls++;
    }
    expect(nulls).toBeGreaterThanOrEqual(19);
  });

  it('AR(1) phi = 0.9 (ADEV rises, then falls as white noise beyond tau_int): no limit in at least 19 of 20 seeds', () => {
    let nulls = 0;
    for (let seed = 0; seed < 20; seed++) {
      const y = ar1Series(new SeededRandom(700 + seed), 0.9, N);
      if (averagingLimit(overlappingAllanDeviation(y, octaveFactors(N), 1)) === null) nulls++;
    }
    expect(nulls).toBeGreaterThanOrEqual(19);
  });

  it('random-walk FM: averaging never helps, limit at m = 1', () => {
    for (let seed = 0; seed < 20; seed++) {
      const y = randomWalk(new SeededRandom(800 + seed), N);
      expect(averagingLimit(overlappingAllanDeviation(y, octaveFactors(N), 1))?.m).toBe(1);
    }
  });

  // White FM (sigma = 1) plus a linear frequency drift d per sample: AVAR = 1/m + d^2 m^2 / 2
  // (drift term SP 1065, from memory: ADEV = d tau / sqrt(2)), smallest at m = d^(-2/3) = 100 for
  // d = 1e-3. The limit must lie in the octave pair around it, m = 64 or 128.
  it('white FM + linear drift 1e-3 per sample: limit at m = 64 or 128, around the ADEV minimum at m = 100', () => {
    for (let seed = 0; seed < 20; seed++) {
      const random = new SeededRandom(900 + seed);
      const y = Float64Array.from({ length: N }, (_, i) => random.normal() + 1e-3 * i);
      const limit = averagingLimit(overlappingAllanDeviation(y, octaveFactors(N), 1));
      expect([64, 128]).toContain(limit?.m);
    }
  });

  it('constant data: all deviations zero, no limit', () => {
    const points = overlappingAllanDeviation(new Float64Array(100).fill(3.5), octaveFactors(100), 1);
    expect(points.every((p) => p.adev === 0 && p.low === 0 && p.high === 0)).toBe(true);
    expect(averagingLimit(points)).toBeNull();
  });
});
