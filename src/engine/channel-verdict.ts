import type { TargetStatus } from '../core/uncertainty/target-precision.js';
import type { ChannelState } from './channel-events.js';
import type { StationarityBreak } from './stationarity-monitor.js';
import { formatSamples, MIN_EFFECTIVE, type WarmupPending } from './warmup-detector.js';

/**
 * The verdict a channel exists for: is its mean ready to record, and if not, which conditions are
 * still pending, each with the number it needs. The same object goes to the API, the WebSocket,
 * `plateau analyze` (table and JSON), the dashboard and the records, so every surface says the same
 * thing in the same words.
 *
 * Conditions, in the order a channel meets them:
 *   no-data            no samples in the window
 *   stale              no sample for a while (the daemon's clock)
 *   constant           every sample equal: no spread to judge by
 *   warm-up            steady state not confirmed yet (the warm-up detector says why)
 *   effective-samples  too few effective samples to confirm or to state an uncertainty
 *   break              stationarity lost (cause and change point), until it is regained
 *   long-memory        the mean converges more slowly than 1 / sqrt(n): U is a scale, not a
 *                      calibrated interval
 *   target             the target precision is not met yet (with the samples and time to go,
 *                      only while the channel is steady: before that no time can be promised)
 *   stopping           the stopping rule of a Type B budget is not met yet: u_A <= f u_c or the
 *                      target on the combined uncertainty (channel-combined.ts adds it)
 * ready = none pending. O(1).
 */
export type VerdictConditionName = 'no-data' | 'stale' | 'constant' | 'warm-up' | 'effective-samples' | 'break' | 'long-memory' | 'target' | 'stopping';

export interface VerdictCondition {
  condition: VerdictConditionName;
  message: string;
  samplesToGo: number | null;
  secondsToGo: number | null;
}

export interface ChannelVerdict {
  ready: boolean;
  /** One line: "ready to record", or the first pending condition's message. */
  summary: string;
  pending: VerdictCondition[];
}

export interface VerdictInput {
  state: ChannelState;
  n: number;
  received: number;
  nEff: number | null;
  warmupPending: WarmupPending | null;
  lastBreak: StationarityBreak | null;
  longMemory: { hurst: number; standardError: number } | null;
  target: TargetStatus | null;
  rate: number | null;
  constant: boolean;
  /** The channel's unit as people write it (°C), for the numbers in the messages; '' or absent: none. */
  unit?: string;
}

export function channelVerdict(input: VerdictInput): ChannelVerdict {
  const pending: VerdictCondition[] = [];
  const seconds = (samples: number | null) => (samples !== null && input.rate && input.rate > 0 ? samples / input.rate : null);
  const add = (condition: VerdictConditionName, message: string, samplesToGo: number | null = null) => pending.push({ condition, message, samplesToGo, secondsToGo: seconds(samplesToGo) });
  const steady = input.state === 'steady' || input.state === 'precise';
  const unit = input.unit ? ` ${input.unit}` : '';
  if (input.n === 0) add('no-data', input.received === 0 ? 'no samples yet' : 'no samples in the window');
  if (input.state === 'stale') add('stale', 'no new samples: the channel is stale');
  if (input.constant) add('constant', 'every sample in the window is equal: no spread to judge steady state or uncertainty by');
  if (!steady && input.n > 0) {
    const p = input.warmupPending;
    if (input.state === 'unsteady' && input.lastBreak) {
      const b = input.lastBreak;
      const slope = b.slope ? `, slope ${b.slope.perSample.toPrecision(2)} \u00b1 ${b.slope.standardUncertainty.toPrecision(2)}${unit} per sample` : '';
      add('break', `stationarity lost: ${b.cause} from sample ${b.changePoint}${slope}`);
      if (p && p.condition !== 'break') add(p.condition, p.message, p.samplesToGo);
    } else if (p) add(p.condition, p.message, p.samplesToGo);
    else if (input.state === 'warming') add('warm-up', 'steady state not confirmed yet');
  }
  if (steady && input.nEff !== null && input.nEff < MIN_EFFECTIVE) add('effective-samples', `${Math.floor(input.nEff)} effective samples, ${MIN_EFFECTIVE} needed`);
  if (input.longMemory) add('long-memory', `long memory (Hurst exponent ${input.longMemory.hurst.toFixed(2)}): the mean converges as n^(H-1), so U is a scale, not a calibrated interval`);
  const t = input.target;
  if (t && !t.reached) {
    const toGo = steady ? t.samplesToTarget : null;
    const eta = toGo !== null && toGo > 0 ? `: about ${formatSamples(toGo)} more samples` : '';
    add('target', `target ${t.on} <= ${t.bound === null ? 'n/a' : `${t.bound.toPrecision(3)}${unit}`} not met yet${steady ? eta : ' (no estimate of the time to go until the channel is steady)'}${t.note ? ` (${t.note})` : ''}`, toGo);
  }
  return { ready: pending.length === 0, summary: pending.length === 0 ? 'ready to record' : (pending[0] as VerdictCondition).message, pending };
}
