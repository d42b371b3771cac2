import type { SubscriptionConfig } from '../config/plateau-config.js';
import type { AckToken, SampleSource, SourceHandlers, SourcePosition, SourceStatus } from '../ports/sample-source.js';
import { mostSpecific } from './topic-filters.js';

/**
 * The sample-source port in memory (tests, and feeding a daemon from the same process): messages
 * published to it are kept in a log with durable sequence numbers and delivered, one batch each,
 * while it is connected; those not acknowledged are delivered again after `reconnect()` or to a new
 * start (at least once, as a broker's persistent session does), and a start with `resumeAfter`
 * skips everything at or before that position (as a stream with durable positions does).
 */
interface LoggedMessage {
  sequence: number;
  topic: string;
  payload: Uint8Array;
  acknowledged: boolean;
}

interface MemoryToken extends AckToken {
  sequence: number;
  generation: number;
}

export class MemorySampleSource implements SampleSource {
  readonly name: string;
  private readonly subscriptions: SubscriptionConfig[];
  private readonly log: LoggedMessage[] = [];
  private handlers: SourceHandlers | null = null;
  private generation = 0;
  private connected = false;
  private reconnectCount = 0;
  private floor = 0;
  /** Sequences delivered on the current connection. */
  private delivered = new Set<number>();

  constructor(subscriptions: SubscriptionConfig[], name = 'memory') {
    this.subscriptions = subscriptions;
    this.name = name;
  }

  async start(handlers: SourceHandlers, resumeAfter: SourcePosition | null = null): Promise<void> {
    this.handlers = handlers;
    if (resumeAfter !== null && resumeAfter.source === this.name) this.floor = Math.max(this.floor, resumeAfter.sequence);
    this.connect('connected');
  }

  /** Appends a message to the log and delivers it at once when connected; returns its sequence. */
  publish(topic: string, payload: string | Uint8Array): number {
    const message: LoggedMessage = { sequence: this.log.length + 1, topic, payload: typeof payload === 'string' ? Buffer.from(payload) : payload, acknowledged: false };
    this.log.push(message);
    if (this.connected) this.deliver(message);
    return message.sequence;
  }

  acknowledge(tokens: readonly AckToken[]): number {
    let sent = 0;
    for (const token of tokens) {
      if (token.source !== this.name) continue;
      const { sequence, generation } = token as MemoryToken;
      const message = this.log[sequence - 1];
      if (!this.connected || generation !== this.generation || message === undefined || message.acknowledged) continue;
      message.acknowledged = true;
      sent++;
    }
    return sent;
  }

  /** Drops the connection and connects again: everything not acknowledged is delivered again. */
  reconnect(): void {
    if (!this.connected) return;
    this.disconnect();
    this.reconnectCount++;
    this.connect('connected again');
  }

  /** Messages published and not acknowledged yet. */
  get unacknowledgedMessages(): number {
    return this.log.filter((m) => !m.acknowledged && m.sequence > this.floor).length;
  }

  status(): SourceStatus {
    let unacknowledged = 0;
    for (const sequence of this.delivered) if (!(this.log[sequence - 1] as LoggedMessage).acknowledged) unacknowledged++;
    return { connected: this.connected, reconnects: this.reconnectCount, unacknowledged };
  }

  async stop(): Promise<void> {
    if (this.connected) this.disconnect();
    this.handlers = null;
  }

  private connect(detail: string): void {
    this.generation++;
    this.connected = true;
    this.delivered = new Set();
    this.handlers?.connection(true, detail);
    for (const message of this.log) if (!message.acknowledged && message.sequence > this.floor && this.connected) this.deliver(message);
  }

  private disconnect(): void {
    this.connected = false;
    this.generation++;
    this.handlers?.connection(false, 'connection closed');
  }

  private deliver(message: LoggedMessage): void {
    if (this.handlers === null) return;
    this.delivered.add(message.sequence);
    const token: MemoryToken = { source: this.name, sequence: message.sequence, generation: this.generation };
    this.handlers.batch({
      deliveries: [{ topic: message.topic, payload: message.payload, subscription: mostSpecific(this.subscriptions, message.topic), position: { source: this.name, sequence: message.sequence, durable: true } }],
      token,
    });
  }
}
