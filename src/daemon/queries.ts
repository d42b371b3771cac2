import type { ChannelRegistry } from '../engine/channel-registry.js';
import type { Channel } from '../engine/channel.js';
import type { ChannelIntake, ChannelView, DerivedView, IntakeBrief, TestPointView, TestPointWindowView, TraceGap } from '../ports/daemon-api.js';
import type { Store, StoredEvent, StoredRecord } from '../ports/store.js';
import { channelTrace } from './channel-trace.js';
import type { DerivedResults } from './derived-results.js';
import type { TestPointControl } from './test-point-control.js';

/**
 * The read side of the daemon's API (src/ports/daemon-api.ts): channels, derived results, stored
 * events, test points and records, as plain views. A channel's view is made once and reads the
 * channel on demand; its `version` changes with every sample or event, which is how the WebSocket
 * hub tells which summaries to send again.
 */
export interface QueriesOptions {
  registry: ChannelRegistry;
  derived: DerivedResults;
  testPoints: TestPointControl;
  store(): Store | null;
  /** The newest stored event id (restored at start, then published). */
  lastEventId(): number;
  /** A channel's gaps between two times (ms), for its trace. */
  gaps?(channel: string, fromMs: number, toMs: number): TraceGap[];
  /** A channel's refused samples and gaps since the daemon started, in full and as totals. */
  intake?(channel: string): ChannelIntake;
  intakeBrief?(channel: string): IntakeBrief;
}

export class Queries {
  private readonly options: QueriesOptions;
  private readonly views = new Map<Channel, ChannelView>();

  constructor(options: QueriesOptions) {
    this.options = options;
  }

  channels(): ChannelView[] {
    return this.options.registry.all().map((channel) => this.viewOf(channel));
  }

  channel(name: string): ChannelView | null {
    const channel = this.options.registry.get(name);
    return channel === undefined ? null : this.viewOf(channel);
  }

  derivedNames(): string[] {
    return this.options.derived.names();
  }

  derivedResults(): DerivedView[] {
    return this.options.derived.names().length === 0 ? [] : this.options.derived.views();
  }

  derivedResult(name: string): DerivedView | null {
    if (!this.options.derived.names().includes(name)) return null;
    return this.derivedResults().find((view) => view.name === name) ?? null;
  }

  events(after: number, limit: number): StoredEvent[] {
    return this.options.store()?.eventsAfter(after, limit) ?? [];
  }

  /** The newest `limit` events: ids are consecutive and retention only removes the oldest, so one query. */
  latestEvents(limit: number): StoredEvent[] {
    return this.events(Math.max(0, this.options.lastEventId() - limit), limit);
  }

  event(id: number): StoredEvent | null {
    if (!Number.isInteger(id) || id < 1) return null;
    const [event] = this.events(id - 1, 1);
    return event !== undefined && event.id === id ? event : null;
  }

  eventsFor(source: string, limit: number): StoredEvent[] {
    return this.options.store()?.eventsFor(source, limit) ?? [];
  }

  testPoints(): TestPointView[] {
    return this.options.testPoints.views();
  }

  testPoint(id: string): TestPointView | null {
    return this.options.testPoints.view(id);
  }

  /** Test point `id`'s window over each of its channels now: snapshot, trace (`count` samples at most) and CUSUM sums. */
  testPointWindows(id: string, count: number): TestPointWindowView[] {
    return this.options.testPoints.windows(id).flatMap(({ name, pipeline }) => {
      const channel = this.options.registry.get(name);
      if (channel === undefined) return [];
      return [{ name, unit: channel.unit, snapshot: pipeline.snapshot(), trace: channelTrace(this.options.store(), channel, count, pipeline), cusum: pipeline.cusumTrace() }];
    });
  }

  records(testPointId: string): StoredRecord[] {
    return this.options.store()?.records(testPointId) ?? [];
  }

  private viewOf(channel: Channel): ChannelView {
    let view = this.views.get(channel);
    if (view === undefined) {
      const store = () => this.options.store();
      view = {
        name: channel.name,
        get unit() {
          return channel.unit;
        },
        get unitNote() {
          return channel.unitNote;
        },
        get version() {
          return channel.pipeline.totalReceived + channel.pipeline.snapshotKeyEvents * 2 ** 40;
        },
        summary: () => channel.pipeline.summary(),
        snapshot: () => channel.pipeline.snapshot(),
        trace: (count) => {
          const trace = channelTrace(store(), channel, count);
          const gaps = this.options.gaps;
          let first: number | null = null;
          for (const t of trace.times) if (t !== null) { first = t; break; }
          let last: number | null = null;
          for (let i = trace.times.length - 1; i >= 0; i--) if (trace.times[i] !== null) { last = trace.times[i] as number; break; }
          if (gaps !== undefined && first !== null && last !== null) trace.gaps = gaps(channel.name, first * 1000, last * 1000);
          return trace;
        },
        cusumTrace: () => channel.pipeline.cusumTrace(),
        storedEvents: (limit) => store()?.eventsFor(channel.name, limit) ?? [],
        ...(this.options.intake !== undefined ? { intake: () => (this.options.intake as (name: string) => ChannelIntake)(channel.name) } : {}),
        ...(this.options.intakeBrief !== undefined ? { intakeBrief: () => (this.options.intakeBrief as (name: string) => IntakeBrief)(channel.name) } : {}),
      };
      this.views.set(channel, view);
    }
    return view;
  }
}
