import { ChannelPipeline } from './channel-pipeline.js';
import type { ChannelOptions } from './channel-options.js';
import type { ChannelEvent } from './channel-events.js';

/**
 * The channels of one daemon: a pipeline per channel, created on its first sample with the
 * settings its name selects, and the time policy that decides which samples enter.
 *
 * Time policy (documented in the README): a sample's time is its payload's time when it has one,
 * else its arrival time. Payload-stamped samples must move forward: a sample stamped exactly at
 * the channel's last accepted time is a duplicate (a redelivered message), an earlier one is out
 * of order; both are rejected and counted, because the statistics are sequential. Arrival-stamped
 * samples are never rejected; their time is held at or after the channel's last time.
 */
export interface RegisteredChannel {
  name: string;
  unit: string | null;
  pipeline: ChannelPipeline;
  /** Epoch milliseconds of the last accepted sample (its own time stamp). */
  lastTimeMs: number;
  /** Wall-clock milliseconds when the last sample arrived (for staleness). */
  lastArrivalMs: number;
  /** Store id, filled in by the daemon. */
  id: number;
}

export type AcceptResult =
  | { accepted: true; channel: RegisteredChannel; seq: number; timeMs: number; events: readonly ChannelEvent[] }
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

  ensure(name: string, unit: string | null, id = -1): RegisteredChannel {
    let channel = this.channels.get(name);
    if (!channel) {
      channel = { name, unit, pipeline: new ChannelPipeline(name, this.optionsFor(name)), lastTimeMs: Number.NEGATIVE_INFINITY, lastArrivalMs: Number.NaN, id };
      this.channels.set(name, channel);
    } else if (unit && !channel.unit) channel.unit = unit;
    return channel;
  }

  /** Applies the time policy and feeds the sample. */
  accept(name: string, value: number, timeMs: number, stamped: boolean, unit: string | null = null): AcceptResult {
    const channel = this.ensure(name, unit);
    if (stamped) {
      if (timeMs === channel.lastTimeMs) return { accepted: false, reason: 'duplicate', channel };
      if (timeMs < channel.lastTimeMs) return { accepted: false, reason: 'out-of-order', channel };
    } else if (timeMs < channel.lastTimeMs) timeMs = channel.lastTimeMs;
    channel.lastTimeMs = timeMs;
    const seq = channel.pipeline.totalReceived;
    const events = channel.pipeline.push(value, timeMs / 1000);
    return { accepted: true, channel, seq, timeMs, events };
  }
}
