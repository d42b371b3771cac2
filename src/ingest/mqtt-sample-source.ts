import type { SubscriptionConfig } from '../config/plateau-config.js';
import type { AckToken, SampleSource, SourceHandlers, SourcePosition, SourceStatus } from '../ports/sample-source.js';
import type { MqttConnection, MqttDelivery } from './mqtt-connection.js';
import { mostSpecific } from './topic-filters.js';

/**
 * The sample-source port over MQTT: one batch per message, its token the message's held PUBACK
 * (see MqttConnection). Positions order the deliveries of this process only (durable: false): what
 * survives a restart is the broker's persistent session, which redelivers every message the daemon
 * did not acknowledge. A message is matched to the most specific configured subscription.
 */
interface MqttToken extends AckToken {
  delivery: MqttDelivery;
}

export class MqttSampleSource implements SampleSource {
  readonly name: string;
  private readonly connection: MqttConnection;
  private readonly subscriptions: SubscriptionConfig[];
  private sequence = 0;
  private outstanding = 0;

  constructor(connection: MqttConnection, subscriptions: SubscriptionConfig[], name = `mqtt ${connection.url}`) {
    this.connection = connection;
    this.subscriptions = subscriptions;
    this.name = name;
  }

  /** MQTT has no durable positions to resume after (the broker's persistent session does that): `resumeAfter` is not read. */
  start(handlers: SourceHandlers, _resumeAfter: SourcePosition | null = null): Promise<void> {
    return this.connection.start({
      message: (delivery) => {
        const position: SourcePosition = { source: this.name, sequence: ++this.sequence, durable: false };
        const token: MqttToken = { source: this.name, delivery };
        if (delivery.qos === 1) this.outstanding++;
        handlers.batch({ deliveries: [{ topic: delivery.topic, payload: delivery.payload, subscription: mostSpecific(this.subscriptions, delivery.topic), position }], token });
      },
      connection: (connected, detail) => {
        // What the old connection held will be delivered again: nothing of it can be acknowledged.
        this.outstanding = 0;
        handlers.connection(connected, detail);
      },
      error: (error) => handlers.error(error),
    });
  }

  acknowledge(tokens: readonly AckToken[]): number {
    const deliveries: MqttDelivery[] = [];
    for (const token of tokens) {
      if (token.source !== this.name) continue;
      const delivery = (token as MqttToken).delivery;
      if (delivery.qos === 1 && delivery.generation === this.connection.currentGeneration && !delivery.acknowledged) deliveries.push(delivery);
    }
    const sent = this.connection.acknowledge(deliveries);
    this.outstanding = Math.max(0, this.outstanding - sent);
    return sent;
  }

  status(): SourceStatus {
    return { connected: this.connection.connected, reconnects: this.connection.reconnects, unacknowledged: this.outstanding };
  }

  stop(): Promise<void> {
    return this.connection.stop();
  }
}
