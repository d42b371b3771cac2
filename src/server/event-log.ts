import type { Daemon } from '../daemon/daemon.js';
import type { StoredEvent } from '../ports/store.js';
import { PlateauError } from '../errors/catalogue.js';

/**
 * What the HTTP API and the WebSocket hub need to know about the daemon's event stream beyond
 * `daemon.events(after, limit)`: "the latest N events" as one query, `events(lastId - N, N)`
 * (ids are consecutive and retention only removes the oldest), and which alerts have been
 * acknowledged.
 *
 * An acknowledgement is itself an event (kind `alert-acknowledged`, source = the acknowledged
 * event's source, body { eventId, kind, note }): it is committed to SQLite with the others,
 * reaches every WebSocket client and the MQTT event topic, and survives a restart, when this log
 * rebuilds its map from the stored events. Acknowledging twice keeps the first acknowledgement.
 *
 * One log per daemon (eventLogFor): the HTTP app and the hub are built apart but share it. Its
 * listener is registered before the hub's, so the hub always sees the acknowledgements up to date;
 * lastId is the daemon's own, set before any listener hears of the event.
 * Cost: the first use pages once through the stored acknowledgements (not every event); then O(1)
 * per event. Memory: one entry per acknowledgement, at most MAX_ACKNOWLEDGEMENTS.
 */
export const ACKNOWLEDGED_KIND = 'alert-acknowledged';

/** Event kinds that call for a person's attention (the dashboard offers to acknowledge them). */
export const ALERT_KINDS: readonly string[] = ['stationarity-lost', 'stale', 'averaging-limit', 'broker-disconnected', 'ingest-lag', 'command-refused'];

export interface Acknowledgement {
  eventId: number;
  /** Id of the alert-acknowledged event that records it. */
  recordId: number;
  timeMs: number;
  note: string | null;
}

/** Acknowledgements kept in memory (the oldest are forgotten first; the events stay stored). */
const MAX_ACKNOWLEDGEMENTS = 10_000;
const PAGE = 10_000;

export class ServerEventLog {
  private readonly acknowledgements = new Map<number, Acknowledgement>();
  private readonly daemon: Daemon;
  private scanned = false;

  constructor(daemon: Daemon) {
    this.daemon = daemon;
    daemon.onEvent((event) => this.note(event));
  }

  /** Reads the stored events once, on first use (the store opens when the daemon starts). */
  private scan(): void {
    if (this.scanned) return;
    this.scanned = true;
    for (let after = 0; ; ) {
      const page = this.daemon.eventsOfKind(ACKNOWLEDGED_KIND, after, PAGE);
      for (const event of page) this.note(event);
      if (page.length < PAGE) break;
      after = (page.at(-1) as StoredEvent).id;
    }
  }

  /** The id of the newest stored event (0 when there is none). */
  get lastId(): number {
    return this.daemon.lastEventId;
  }

  /** The newest `limit` events, oldest first. */
  latest(limit: number): StoredEvent[] {
    return this.daemon.events(Math.max(0, this.lastId - limit), limit);
  }

  /** One stored event, or null. */
  find(id: number): StoredEvent | null {
    if (!Number.isInteger(id) || id < 1) return null;
    const [event] = this.daemon.events(id - 1, 1);
    return event && event.id === id ? event : null;
  }

  acknowledgement(eventId: number): Acknowledgement | null {
    this.scan();
    return this.acknowledgements.get(eventId) ?? null;
  }

  /** Acknowledgements of events with id above `after` (for a client catching up). */
  acknowledgementsAfter(after: number): Acknowledgement[] {
    this.scan();
    const out: Acknowledgement[] = [];
    for (const ack of this.acknowledgements.values()) if (ack.eventId > after) out.push(ack);
    return out;
  }

  /**
   * Records an acknowledgement of a stored event as an event of its own, committed at once.
   * Returns the acknowledgement and whether it already existed.
   */
  acknowledge(event: StoredEvent, note: string | null): { acknowledgement: Acknowledgement; already: boolean } {
    this.scan();
    const existing = this.acknowledgements.get(event.id);
    if (existing) return { acknowledgement: existing, already: true };
    const health = this.daemon.health().store;
    if (health.failing) throw new PlateauError('ERR_STORE_UNAVAILABLE', { since: new Date(health.since as number).toISOString(), detail: health.lastError?.message ?? 'unknown error' });
    this.daemon.queueEvent(event.source, ACKNOWLEDGED_KIND, null, { eventId: event.id, kind: event.kind, note });
    // Commits and publishes synchronously: the listener above records the acknowledgement.
    this.daemon.commitNow();
    const recorded = this.acknowledgements.get(event.id);
    if (!recorded) throw new Error(`acknowledgement of event ${event.id} was not committed (see the daemon log)`);
    return { acknowledgement: recorded, already: false };
  }

  private note(event: StoredEvent): void {
    if (event.kind !== ACKNOWLEDGED_KIND) return;
    const eventId = Number(event.body.eventId);
    if (!Number.isInteger(eventId) || this.acknowledgements.has(eventId)) return;
    const note = typeof event.body.note === 'string' ? event.body.note : null;
    this.acknowledgements.set(eventId, { eventId, recordId: event.id, timeMs: event.timeMs, note });
    if (this.acknowledgements.size > MAX_ACKNOWLEDGEMENTS) {
      const oldest = this.acknowledgements.keys().next().value as number;
      this.acknowledgements.delete(oldest);
    }
  }
}

const logs = new WeakMap<Daemon, ServerEventLog>();

/** The daemon's event log, created on first use. */
export function eventLogFor(daemon: Daemon): ServerEventLog {
  let log = logs.get(daemon);
  if (!log) {
    log = new ServerEventLog(daemon);
    logs.set(daemon, log);
  }
  return log;
}
