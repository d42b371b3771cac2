import chisquareQuantile from '@stdlib/stats-base-dists-chisquare-quantile';
import { type TauEstimate, tauFloor } from './tau-estimate.js';
import type { PyramidLevelStats } from '../window/block-pyramid.js';

/**
 * Variance of a windowed mean by blocking, with the block size chosen automatically.
 *
 * Blocking (H. Flyvbjerg & H. G. Petersen (1989), J. Chem. Phys. 91, 461-466): average the series
 * in blocks of 2^j samples; once the blocks are longer than the correlation, their means are
 * nearly independent and s^2(block means) / (number of blocks) estimates the variance of the mean.
 * The level is chosen by M. Jonsson (2018), "Standard error estimation by an automated blocking
 * method", Phys. Rev. E 98, 043304: with n_i blocks, biased variance s_i^2 and lag-one
 * autocovariance g_i at level i, M_j = sum_{i >= j} n_i * (g_i / s_i^2)^2 is chi-square with one
 * degree of freedom per level summed when the block means at levels >= j are uncorrelated; the
 * chosen level is the first j whose M_j is below the 0.99 quantile.
 * Choices: the estimate uses the unbiased variance of the block means scaled to the whole window,
 *   var(mean) = blockSize * s^2 / n, so samples outside complete blocks still count for the mean;
 *   nu = blocks - 1 (batch means are treated as independent normal draws). Levels with fewer than
 *   `minBlocks` blocks are not considered.
 * Cost: O(levels) given the pyramid's level statistics (O(1) each), plus one chi-square quantile
 *   per level (cached by the caller's lifetime in `quantileCache`).
 */
export interface BlockingInput {
  n: number;
  sampleVariance: number;
  /** Level statistics, index 0 being the raw samples (block size 1). */
  levels: PyramidLevelStats[];
}

/** Smallest number of blocks a level must hold to be used. */
export const MIN_BLOCKS = 8;

const quantileCache: number[] = [];
function chiSquare99(dof: number): number {
  let q = quantileCache[dof];
  if (q === undefined) {
    q = chisquareQuantile(0.99, dof);
    quantileCache[dof] = q;
  }
  return q;
}

export function blocking(input: BlockingInput): TauEstimate {
  const { n, sampleVariance, levels } = input;
  if (!(sampleVariance > 0) || n < 2) {
    return { method: 'blocking', tauInt: 1, varianceOfMean: 0, dof: Math.max(0, n - 1), window: 1, reliable: false, note: 'constant window: no variation to estimate' };
  }
  const usable: PyramidLevelStats[] = [];
  for (const level of levels) {
    if (level.count < MIN_BLOCKS || !(level.biasedVariance > 0)) break;
    usable.push(level);
  }
  if (usable.length === 0) {
    return { method: 'blocking', tauInt: 1, varianceOfMean: sampleVariance / n, dof: n - 1, window: 1, reliable: false, note: `fewer than ${MIN_BLOCKS} samples` };
  }
  // M_j accumulated from the top level down.
  const d = usable.length;
  const terms = usable.map((level) => level.count * (level.lagOneAutocovariance / level.biasedVariance) ** 2);
  let chosen = -1;
  let tail = 0;
  const tails = new Array<number>(d);
  for (let j = d - 1; j >= 0; j--) {
    tail += terms[j] as number;
    tails[j] = tail;
  }
  for (let j = 0; j < d; j++) {
    if ((tails[j] as number) < chiSquare99(d - j)) {
      chosen = j;
      break;
    }
  }
  const reliable = chosen >= 0 && chosen < d - 1;
  // Jonsson's level stops where neighbouring block means are no longer detectably correlated,
  // which happens at blocks of only 1.5-2 tau_int, where batch means still carry their 1/b bias
  // (measured: coverage 0.87 at phi = 0.9 and n_eff ~ 100). One level up, extrapolated against the
  // chosen level as lugsail batch means do (2 sigma2(2b) - sigma2(b), core/tau/lugsail-batch-means.ts),
  // removes that bias: coverage 0.93-0.95 on AR(1) with phi 0.5-0.99, ARMA(1,1) and AR(2)
  // (bench/coverage.js, the figures in DEVELOPERS.md).
  const base = chosen >= 0 ? chosen : d - 1;
  const upper = Math.min(d - 1, base + 1);
  const level = usable[upper] as PyramidLevelStats;
  const k = level.count;
  const longRun = (l: PyramidLevelStats) => (l.blockSize * l.biasedVariance * l.count) / (l.count - 1);
  const varianceOfMean = (upper > base ? Math.max(2 * longRun(level) - longRun(usable[base] as PyramidLevelStats), longRun(usable[base] as PyramidLevelStats)) : longRun(level)) / n;
  const rawTau = (n * varianceOfMean) / sampleVariance;
  const tauInt = Math.max(rawTau, tauFloor(n));
  return {
    method: 'blocking',
    tauInt,
    varianceOfMean: (sampleVariance * tauInt) / n,
    dof: k - 1,
    window: level.blockSize,
    reliable,
    ...(reliable ? {} : { note: chosen < 0 ? 'block means still correlated at the largest usable block size: more data needed' : 'block size chosen at the largest usable level: more data needed' }),
  };
}

/**
 * Batch means with the batch size near sqrt(n), the rule of J. M. Flegal & G. L. Jones (2010),
 * "Batch means and spectral variance estimators in Markov chain Monte Carlo", Ann. Statist. 38(2),
 * 1034-1070, taken at the pyramid level whose block size 2^j is nearest sqrt(n) on a log scale.
 * nu = batches - 1. Cost: O(1) given the level statistics.
 */
export function batchMeans(input: BlockingInput): TauEstimate {
  const { n, sampleVariance, levels } = input;
  if (!(sampleVariance > 0) || n < 2) {
    return { method: 'batch-means', tauInt: 1, varianceOfMean: 0, dof: Math.max(0, n - 1), window: 1, reliable: false, note: 'constant window: no variation to estimate' };
  }
  let j = Math.round(Math.log2(Math.sqrt(n)));
  while (j > 0 && !((levels[j]?.count ?? 0) >= 2)) j--;
  const level = levels[j] as PyramidLevelStats;
  const k = level.count;
  const unbiased = k > 1 ? (level.biasedVariance * k) / (k - 1) : sampleVariance;
  const varianceOfMean = (level.blockSize * unbiased) / n;
  const tauInt = Math.max((n * varianceOfMean) / sampleVariance, tauFloor(n));
  const reliable = k >= MIN_BLOCKS;
  return {
    method: 'batch-means',
    tauInt,
    varianceOfMean: (sampleVariance * tauInt) / n,
    dof: Math.max(1, k - 1),
    window: level.blockSize,
    reliable,
    ...(reliable ? {} : { note: `fewer than ${MIN_BLOCKS} batches` }),
  };
}

/**
 * Independent observations, GUM (JCGM 100:2008) 4.2.3: s^2(mean) = s^2 / n with nu = n - 1.
 * Right for a handful of repeated observations; it understates the uncertainty of autocorrelated
 * samples. Cost: O(1).
 */
export function independentSamples(n: number, sampleVariance: number): TauEstimate {
  return {
    method: 'iid',
    tauInt: 1,
    varianceOfMean: n > 0 ? sampleVariance / n : 0,
    dof: Math.max(0, n - 1),
    window: 1,
    reliable: n >= 2,
    ...(n >= 2 ? {} : { note: 'fewer than two samples' }),
  };
}
