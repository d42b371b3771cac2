import type { Publisher, VolatileEvent } from '../ports/publisher.js';
import type { StoredEvent } from '../ports/store.js';

/**
 * The publisher port for followers in this process (the WebSocket hub, the event log of the HTTP
 * API): committed events, volatile events and status changes go to the registered listeners
 * synchronously. A listener that throws is reported through `onListenerError` and does not stop
 * the others.
 */
export type EventListener = (event: StoredEvent) => void;
export type VolatileListener = (event: VolatileEvent) => void;
export type StatusListener = (subject: string, body: Record<string, unknown>) => void;

export class ListenerPublisher implements Publisher {
  private readonly events = new Set<EventListener>();
  private readonly volatiles = new Set<VolatileListener>();
  private readonly statuses = new Set<StatusListener>();
  private readonly statusSent = new Map<string, string>();
  private readonly onListenerError: (error: unknown) => void;

  constructor(onListenerError: (error: unknown) => void = () => undefined) {
    this.onListenerError = onListenerError;
  }

  onEvent(listener: EventListener): () => void {
    this.events.add(listener);
    return () => this.events.delete(listener);
  }

  onVolatileEvent(listener: VolatileListener): () => void {
    this.volatiles.add(listener);
    return () => this.volatiles.delete(listener);
  }

  /** Status changes; a listener added later first hears the newest status of every subject. */
  onStatus(listener: StatusListener): () => void {
    this.statuses.add(listener);
    for (const [subject, text] of this.statusSent) this.call(() => listener(subject, JSON.parse(text) as Record<string, unknown>));
    return () => this.statuses.delete(listener);
  }

  event(event: StoredEvent): void {
    for (const listener of this.events) this.call(() => listener(event));
  }

  volatileEvent(event: VolatileEvent): void {
    for (const listener of this.volatiles) this.call(() => listener(event));
  }

  status(subject: string, body: Record<string, unknown>): void {
    const text = JSON.stringify(body);
    if (this.statusSent.get(subject) === text) return;
    this.statusSent.set(subject, text);
    for (const listener of this.statuses) this.call(() => listener(subject, body));
  }

  private call(fn: () => void): void {
    try {
      fn();
    } catch (error) {
      this.onListenerError(error);
    }
  }
}
