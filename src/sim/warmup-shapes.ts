import { SeededRandom } from '../core/random/seeded-random.js';
import { ar1 } from './signal-families.js';

/**
 * Warm-ups that are not one decaying exponential, for the verdict's studies
 * (test/engine/verdict-warmup-shapes.test.ts): what rigs show besides a first-order lag. A
 * controller ramping the set point and then holding it; a valve or heater switching on part-way
 * (an S-curve); a level held off the set point and then released (a step that settles); a sensor
 * lag on top of a slower thermal mass (two exponentials); a ringing loop; an overshoot. Each is a
 * unit shape f(t) in [-1, 1] times an amplitude in noise standard deviations, added to AR(1) noise
 * (unit innovations) around a level; `settled` is the fraction of the record after which the shape
 * is below a twentieth of its amplitude.
 */
export interface WarmupShape {
  name: string;
  /** f(t / N) for a record of N samples. */
  shape: (u: number) => number;
  settled: number;
}

export const WARMUP_SHAPES: WarmupShape[] = [
  { name: 'ramp to the set point over 10 % of the record, then hold', shape: (u) => (u < 0.1 ? 1 - u / 0.1 : 0), settled: 0.1 },
  { name: 'ramp to the set point over 25 % of the record, then hold', shape: (u) => (u < 0.25 ? 1 - u / 0.25 : 0), settled: 0.25 },
  { name: 'S-curve centred at 10 %', shape: (u) => 1 / (1 + Math.exp((u - 0.1) / 0.005)), settled: 0.115 },
  { name: 'slow S-curve centred at 20 %', shape: (u) => 1 / (1 + Math.exp((u - 0.2) / 0.0125)), settled: 0.24 },
  { name: 'held off the set point to 15 %, then a fast settle', shape: (u) => (u < 0.15 ? 1 : Math.exp(-(u - 0.15) / 0.0025)), settled: 0.16 },
  { name: 'fast lag and a slower, smaller one', shape: (u) => 0.7 * Math.exp(-u / 0.025) + 0.09 * Math.exp(-u / 0.125), settled: 0.2 },
  { name: 'ringing (damped cosine)', shape: (u) => Math.exp(-u / 0.05) * Math.cos((2 * Math.PI * u) / 0.0667), settled: 0.15 },
  { name: 'overshoot (critically damped, negative lobe)', shape: (u) => Math.exp(-u / 0.04) * (1 - 1.25 * (u / 0.04)), settled: 0.2 },
];

/**
 * Warm-ups far above the noise (a bath or a heat exchanger brought from ambient: hundreds of noise
 * deviations): one lag, and a stage behind a warming source through a lag of its own (the
 * response of two first-order stages to a step, (T1 e^(-t/T1) - T2 e^(-t/T2)) / (T1 - T2)).
 */
export const LARGE_WARMUP_SHAPES: WarmupShape[] = [
  { name: 'one lag, T = N/40', shape: (u) => Math.exp(-u * 40), settled: 0.2 },
  { name: 'two stages, T = N/40 behind N/90', shape: (u) => (Math.exp(-u * 40) / 40 - Math.exp(-u * 90) / 90) / (1 / 40 - 1 / 90), settled: 0.22 },
];

export const SHAPE_LEVEL = 10;

/** A record of N samples: level + amplitude (in stationary noise sd) x shape + AR(1) noise. */
export function shapedWarmupSeries(shape: WarmupShape, options: { N: number; phi: number; amplitude: number; seed: number }): Float64Array {
  const { N, phi, amplitude, seed } = options;
  const sd = 1 / Math.sqrt(1 - phi * phi);
  const x = ar1(new SeededRandom(seed), phi, N);
  for (let t = 0; t < N; t++) x[t] = SHAPE_LEVEL + (x[t] as number) + amplitude * sd * shape.shape(t / N);
  return x;
}
