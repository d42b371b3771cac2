import { SeededRandom } from '../core/random/seeded-random.js';

/**
 * A simulated rig for the demo and the tests: "bench HX-7", an invented glycol/water plate heat
 * exchanger held at a set point. Its channels show what plateau is for:
 *   glycol_in_degC   warms up from 15 degC towards 42 degC (time constant 90 s), correlated noise
 *   glycol_out_degC  follows the inlet with a lag; shares part of its noise (a flow surge moves both)
 *   glycol_flow_kg_s steady, short correlation
 *   water_flow_kg_s  steady, almost white
 *   shell_dp_kPa     steady at first, then drifts (fouling) after driftAfterSeconds
 *   ambient_degC     slow and noisy: one sample a second, sent in SenML packs
 * Deterministic given the seed. Times are simulated seconds since the epoch, so a run can go
 * faster than real time.
 */
export interface SimulatedSample {
  channel: string;
  timeSeconds: number;
  value: number;
}

export interface SimulatorOptions {
  seed?: number;
  /** Samples per second of the fast channels. */
  rate?: number;
  /** Simulated time of the first sample (epoch seconds). */
  startSeconds: number;
  driftAfterSeconds?: number;
}

export const DEMO_CHANNELS = ['glycol_in_degC', 'glycol_out_degC', 'glycol_flow_kg_s', 'water_flow_kg_s', 'shell_dp_kPa', 'ambient_degC'] as const;

export class RigSimulator {
  private readonly random: SeededRandom;
  readonly rate: number;
  private readonly start: number;
  private readonly driftAfter: number;
  private step = 0;
  private inletNoise = 0;
  private outletNoise = 0;
  private flowNoise = 0;
  private dpNoise = 0;
  private lag = 15;

  constructor(options: SimulatorOptions) {
    this.random = new SeededRandom(options.seed ?? 7);
    this.rate = options.rate ?? 10;
    this.start = options.startSeconds;
    this.driftAfter = options.driftAfterSeconds ?? 900;
  }

  /** Simulated time of the next step. */
  get nextTime(): number {
    return this.start + this.step / this.rate;
  }

  /** Advances one step (1 / rate seconds): the fast channels' samples, and ambient once a second. */
  next(): SimulatedSample[] {
    const r = this.random;
    const t = this.nextTime;
    const elapsed = this.step / this.rate;
    const shared = r.normal();
    this.inletNoise = 0.95 * this.inletNoise + 0.012 * (0.8 * shared + 0.6 * r.normal());
    this.outletNoise = 0.9 * this.outletNoise + 0.01 * (0.8 * shared + 0.6 * r.normal());
    this.flowNoise = 0.6 * this.flowNoise + 0.0015 * r.normal();
    this.dpNoise = 0.8 * this.dpNoise + 0.05 * r.normal();
    const inlet = 42 - 27 * Math.exp(-elapsed / 90);
    this.lag += (inlet - 6.3 - this.lag) * (1 / (this.rate * 40));
    const drift = elapsed > this.driftAfter ? 0.004 * (elapsed - this.driftAfter) : 0;
    const out: SimulatedSample[] = [
      { channel: 'glycol_in_degC', timeSeconds: t, value: round(inlet + this.inletNoise, 4) },
      { channel: 'glycol_out_degC', timeSeconds: t, value: round(this.lag + this.outletNoise, 4) },
      { channel: 'glycol_flow_kg_s', timeSeconds: t, value: round(0.82 + this.flowNoise, 5) },
      { channel: 'water_flow_kg_s', timeSeconds: t, value: round(1.35 + 0.002 * r.normal(), 5) },
      { channel: 'shell_dp_kPa', timeSeconds: t, value: round(18.4 + this.dpNoise + drift, 3) },
    ];
    if (this.step % this.rate === 0) out.push({ channel: 'ambient_degC', timeSeconds: t, value: round(21.5 + 0.6 * r.normal(), 2) });
    this.step++;
    return out;
  }
}

function round(value: number, decimals: number): number {
  const scale = 10 ** decimals;
  return Math.round(value * scale) / scale;
}
