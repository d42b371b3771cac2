import type { PlateauConfig } from '../config/plateau-config.js';
import type { ChannelRegistry } from '../engine/channel-registry.js';
import type { DerivedStatus } from '../engine/test-points.js';

/**
 * Derived results of the daemon: quantities computed from several channels (configured under
 * `derived`), with propagated uncertainty. See derived-engine for the statistics.
 */
export interface DerivedEvent {
  source: string;
  kind: string;
  at: number | null;
  body: Record<string, unknown>;
}

export class DerivedResults implements DerivedStatus {
  private readonly config: PlateauConfig;
  private readonly registry: ChannelRegistry;
  private events: DerivedEvent[] = [];

  constructor(config: PlateauConfig, registry: ChannelRegistry) {
    this.config = config;
    this.registry = registry;
  }

  names(): string[] {
    return this.config.derived.map((d) => d.name);
  }

  onSample(_channel: string, _value: number, _timeMs: number, _replay = false): void {
    void this.registry;
  }

  restart(_names: string[]): void {}

  drainEvents(): DerivedEvent[] {
    const out = this.events;
    this.events = [];
    return out;
  }

  atTarget(_name: string): boolean | null {
    return null;
  }

  recordEntries(_names: string[]): unknown[] {
    return [];
  }
}
