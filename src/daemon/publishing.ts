import type { ChannelRegistry } from '../engine/channel-registry.js';
import type { TestPoints } from '../engine/test-points.js';
import type { Clock } from '../ports/clock.js';
import type { DaemonHealth } from '../ports/daemon-api.js';
import type { Publisher } from '../ports/publisher.js';
import type { StoredEvent } from '../ports/store.js';

/**
 * What goes out after a commit, and only then: every stored event to every publisher (MQTT event
 * topic, in-process listeners), then the retained status of each channel and test point the events
 * concern. And the daemon's health when it changes: the volatile `store-failing` alert the moment
 * commits start failing (it cannot be stored), and the retained `daemon` status either way.
 */
export interface PublishingOptions {
  publishers: () => readonly Publisher[];
  registry: ChannelRegistry;
  testPoints: TestPoints;
  clock: Clock;
}

export class Publishing {
  private readonly options: PublishingOptions;
  private lastId = 0;

  constructor(options: PublishingOptions) {
    this.options = options;
  }

  /** The newest event id published (or found in the store at start). */
  get lastEventId(): number {
    return this.lastId;
  }

  set lastEventId(id: number) {
    this.lastId = id;
  }

  committed(events: StoredEvent[]): void {
    const publishers = this.options.publishers();
    for (const event of events) {
      this.lastId = event.id;
      for (const publisher of publishers) publisher.event(event);
    }
    const now = this.options.clock.now();
    for (const source of new Set(events.map((e) => e.source))) {
      const point = this.options.testPoints.get(source);
      if (point) {
        this.status(`test-point/${point.id}`, { testPoint: point.id, name: point.name, state: point.state, channels: this.options.testPoints.verdict(point), timeMs: now });
        continue;
      }
      const channel = this.options.registry.get(source);
      if (channel) this.status(`channel/${channel.name}`, { ...channel.pipeline.summary(), unit: channel.unit, timeMs: now });
    }
  }

  healthChanged(health: DaemonHealth): void {
    const now = this.options.clock.now();
    const store = health.store;
    if (store.failing && store.attempts === 1) {
      const body = { since: store.since, error: store.lastError, samples: store.pendingSamples, unacknowledged: store.pendingAcknowledgements, detail: 'commits to the store fail: nothing is acknowledged to the broker until they succeed again' };
      for (const publisher of this.options.publishers()) publisher.volatileEvent({ timeMs: now, source: 'daemon', kind: 'store-failing', body });
    }
    this.status('daemon', { status: health.status, broker: health.broker, store: { failing: store.failing, since: store.since, error: store.lastError }, timeMs: now });
  }

  private status(subject: string, body: Record<string, unknown>): void {
    for (const publisher of this.options.publishers()) publisher.status(subject, body);
  }
}
