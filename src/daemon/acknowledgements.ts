import { PlateauError } from '../errors/catalogue.js';
import type { Acknowledgement } from '../ports/daemon-api.js';
import type { Store, StoredEvent } from '../ports/store.js';

/**
 * Acknowledgements of alerts. An acknowledgement is itself an event (kind `alert-acknowledged`,
 * source = the acknowledged event's source, body { eventId, kind, note }): it is committed with the
 * others, reaches every follower (WebSocket, MQTT event topic), and survives a restart, when this
 * map is rebuilt from the stored acknowledgement events. Acknowledging twice keeps the first.
 * Cost: the first use pages once through the stored acknowledgements (not every event); then O(1)
 * per event. Memory: one entry per acknowledgement, at most MAX_ACKNOWLEDGEMENTS (the oldest are
 * forgotten first; the events stay stored).
 */
export const ACKNOWLEDGED_KIND = 'alert-acknowledged';

/** Event kinds that call for a person's attention (the dashboard offers to acknowledge them). */
export const ALERT_KINDS: readonly string[] = ['stationarity-lost', 'stale', 'averaging-limit', 'broker-disconnected', 'broker-session-lost', 'ingest-lag', 'command-refused', 'store-recovered'];

const MAX_ACKNOWLEDGEMENTS = 10_000;
const PAGE = 10_000;

export interface AcknowledgementsOptions {
  store(): Store;
  /** Queues the acknowledgement event and commits it at once; false when the commit failed. */
  record(source: string, body: Record<string, unknown>): boolean;
}

export class Acknowledgements {
  private readonly acknowledgements = new Map<number, Acknowledgement>();
  private readonly options: AcknowledgementsOptions;
  private scanned = false;

  constructor(options: AcknowledgementsOptions) {
    this.options = options;
  }

  /** Every published event passes here: acknowledgement events are noted. */
  note(event: StoredEvent): void {
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

  get(eventId: number): Acknowledgement | null {
    this.scan();
    return this.acknowledgements.get(eventId) ?? null;
  }

  /** Acknowledgements of events with id above `after` (for a client catching up). */
  after(after: number): Acknowledgement[] {
    this.scan();
    const out: Acknowledgement[] = [];
    for (const ack of this.acknowledgements.values()) if (ack.eventId > after) out.push(ack);
    return out;
  }

  /** Records an acknowledgement of a stored event as an event of its own, committed at once. */
  acknowledge(event: StoredEvent, note: string | null): { acknowledgement: Acknowledgement; already: boolean } {
    if (event.kind === ACKNOWLEDGED_KIND) throw new PlateauError('ERR_EVENT_ACKNOWLEDGEMENT', { id: event.id });
    this.scan();
    const existing = this.acknowledgements.get(event.id);
    if (existing) return { acknowledgement: existing, already: true };
    this.options.record(event.source, { eventId: event.id, kind: event.kind, note });
    // The commit published the event, and `note` recorded it.
    const recorded = this.acknowledgements.get(event.id);
    if (!recorded) throw new PlateauError('ERR_INTERNAL');
    return { acknowledgement: recorded, already: false };
  }

  /** Reads the stored acknowledgements once, on first use. */
  private scan(): void {
    if (this.scanned) return;
    this.scanned = true;
    const store = this.options.store();
    for (let after = 0; ; ) {
      const page = store.eventsOfKind(ACKNOWLEDGED_KIND, after, PAGE);
      for (const event of page) this.note(event);
      if (page.length < PAGE) break;
      after = (page.at(-1) as StoredEvent).id;
    }
  }
}
