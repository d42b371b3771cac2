import { Channel, type AcceptResult } from './channel.js';
import type { ChannelOptions } from './channel-options.js';

export { RECENT_TIMES } from './channel.js';

/**
 * The channels of one daemon, created on their first sample (or from the store) with the settings
 * their names select. Each is a Channel (src/engine/channel.ts): the time policy, the pipeline, the
 * window restarts and the replay live there.
 */
export class ChannelRegistry {
  private readonly channels = new Map<string, Channel>();
  private readonly optionsFor: (name: string) => ChannelOptions;

  constructor(optionsFor: (name: string) => ChannelOptions) {
    this.optionsFor = optionsFor;
  }

  get(name: string): Channel | undefined {
    return this.channels.get(name);
  }

  all(): Channel[] {
    return [...this.channels.values()];
  }

  get size(): number {
    return this.channels.size;
  }

  /** The channel, created with its settings when new; a unit fills in one not known yet. */
  ensure(name: string, unit: string | null): Channel {
    let channel = this.channels.get(name);
    if (!channel) {
      channel = new Channel(name, unit, this.optionsFor(name));
      this.channels.set(name, channel);
    } else if (unit && !channel.unit) channel.unit = unit;
    return channel;
  }

  /** Puts a channel built elsewhere (restored from a shared checkpoint) in place of the one of that name. */
  replace(channel: Channel): void {
    this.channels.set(channel.name, channel);
  }

  /** A new channel with the settings its name selects, not registered (to be restored, then put in place). */
  create(name: string, unit: string | null): Channel {
    return new Channel(name, unit, this.optionsFor(name));
  }

  /** The channel (created when new) applies its time policy and feeds the sample. */
  accept(name: string, value: number, timeMs: number, stamped: boolean, unit: string | null = null): AcceptResult & { channel: Channel } {
    const channel = this.ensure(name, unit);
    return { ...channel.accept(value, timeMs, stamped), channel };
  }
}
