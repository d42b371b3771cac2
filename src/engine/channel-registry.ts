import { ChannelPipeline } from './channel-pipeline.js';
import type { ChannelOptions } from './channel-options.js';
import type { ChannelEvent } from './channel-events.js';

/**
 * The channels of one daemon: a pipeline per channel, created on its first sample with the
 * settings its name selects, and the time policy that decides which samples enter.
 *
 * Time policy (documented in the README): a sample's time is its payload's time when it has one,
 * else its arrival time. Samples are taken in arrival order. A payload-stamped sample whose time
 * equals one of the channel's last RECENT_TIMES accepted times is a duplicate (an MQTT message
 * delivered again after a reconnect) and is rejected; one that is older than the newest but still
 * within those recent times is a late sample (messages reordered around a reconnect) and is
 * accepted and counted as late; one older than all of them is out of order and rejected, since
 * nothing can tell whether it repeats an earlier one. Arrival-stamped samples are never rejected;
 * their time is held at or after the channel's last time (so a repeat cannot be recognised: use
 * payload times when delivery is at least once).
 */
/**
 * Accepted times remembered per channel (32 KiB). After a reconnect a broker may redeliver the
 * whole window of messages the daemon had not yet acknowledged (it acknowledges after each commit)
 * interleaved with new ones (aedes does): around a broker restart in test/integration/broker-restart
 * a first delivery came up to 400 samples behind the newest, which 256 remembered times turned into
 * lost samples about one run in five. The scan runs only for a sample older than the newest.
 */
export const RECENT_TIMES = 4096;
export interface RegisteredChannel {
  name: string;
  unit: string | null;
  pipeline: ChannelPipeline;
  /** Epoch milliseconds of the last accepted sample (its own time stamp). */
  lastTimeMs: number;
  /** Wall-clock milliseconds when the last sample arrived (for staleness). */
  lastArrivalMs: number;
  /** The store has the channel, or the batch waiting for a commit introduces it (set by the daemon). */
  stored: boolean;
  /** The last RECENT_TIMES accepted payload times (a ring), for duplicate and lateness checks. */
  recentTimes: Float64Array;
  recentCount: number;
}

export type AcceptResult =
  | { accepted: true; channel: RegisteredChannel; seq: number; timeMs: number; late: boolean; events: readonly ChannelEvent[] }
  | { accepted: false; reason: 'duplicate' | 'out-of-order'; channel: RegisteredChannel };

export class ChannelRegistry {
  private readonly channels = new Map<string, RegisteredChannel>();
  private readonly optionsFor: (name: string) => ChannelOptions;

  constructor(optionsFor: (name: string) => ChannelOptions) {
    this.optionsFor = optionsFor;
  }

  get(name: string): RegisteredChannel | undefined {
    return this.channels.get(name);
  }

  all(): RegisteredChannel[] {
    return [...this.channels.values()];
  }

  get size(): number {
    return this.channels.size;
  }

  ensure(name: string, unit: string | null, stored = false): RegisteredChannel {
    let channel = this.channels.get(name);
    if (!channel) {
      channel = { name, unit, pipeline: new ChannelPipeline(name, this.optionsFor(name)), lastTimeMs: Number.NEGATIVE_INFINITY, lastArrivalMs: Number.NaN, stored, recentTimes: new Float64Array(RECENT_TIMES), recentCount: 0 };
      this.channels.set(name, channel);
    } else if (unit && !channel.unit) channel.unit = unit;
    return channel;
  }

  /** Applies the time policy and feeds the sample. */
  accept(name: string, value: number, timeMs: number, stamped: boolean, unit: string | null = null): AcceptResult {
    const channel = this.ensure(name, unit);
    let late = false;
    if (stamped) {
      if (timeMs <= channel.lastTimeMs) {
        const verdict = classifyEarlier(channel, timeMs);
        if (verdict !== 'late') return { accepted: false, reason: verdict, channel };
        late = true;
      }
      remember(channel, timeMs);
    } else if (timeMs < channel.lastTimeMs) timeMs = channel.lastTimeMs;
    if (timeMs > channel.lastTimeMs) channel.lastTimeMs = timeMs;
    const seq = channel.pipeline.totalReceived;
    const events = channel.pipeline.push(value, timeMs / 1000);
    return { accepted: true, channel, seq, timeMs, late, events };
  }

  /** Rebuilds a channel's recent times after a restart (from the stored samples, oldest first). */
  rememberTime(channel: RegisteredChannel, timeMs: number): void {
    remember(channel, timeMs);
    if (timeMs > channel.lastTimeMs) channel.lastTimeMs = timeMs;
  }
}

function remember(channel: RegisteredChannel, timeMs: number): void {
  channel.recentTimes[channel.recentCount % RECENT_TIMES] = timeMs;
  channel.recentCount++;
}

/** For a time at or before the newest: a repeat of a recent one, late but recent, or too old to tell. */
function classifyEarlier(channel: RegisteredChannel, timeMs: number): 'duplicate' | 'late' | 'out-of-order' {
  const count = Math.min(channel.recentCount, RECENT_TIMES);
  let oldest = Number.POSITIVE_INFINITY;
  for (let i = 0; i < count; i++) {
    const t = channel.recentTimes[i] as number;
    if (t === timeMs) return 'duplicate';
    if (t < oldest) oldest = t;
  }
  return timeMs > oldest ? 'late' : 'out-of-order';
}
