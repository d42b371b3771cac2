import type { TopicsConfig } from '../config/plateau-config.js';
import type { Publisher, VolatileEvent } from '../ports/publisher.js';
import type { StoredEvent } from '../ports/store.js';
import type { MqttConnection } from './mqtt-connection.js';

/**
 * The publisher port over MQTT: every committed event on `<events>/<kind>` (QoS 1, JSON of the
 * stored event), a volatile event on the same topic with `stored: false` and no id, and retained
 * status on `<status>/<subject>` (QoS 1, retained, sent only when its text changed). Non-finite
 * numbers are sent as null. While disconnected, mqtt.js queues what is published.
 * The daemon's own status (`<status>/daemon`, sent at every connection and health change) goes at
 * QoS 0, retained: a QoS 1 publish made as the connection comes up held the connection's graceful
 * end for about 40 ms at each stop (measured with aedes, bench/e2e.js restart), and the alert that
 * matters, `store-failing`, goes on the event topic at QoS 1.
 */
export class MqttPublisher implements Publisher {
  private readonly connection: MqttConnection;
  private readonly topics: TopicsConfig;
  private readonly statusSent = new Map<string, string>();

  constructor(connection: MqttConnection, topics: TopicsConfig) {
    this.connection = connection;
    this.topics = topics;
  }

  event(event: StoredEvent): void {
    this.connection.publish(`${this.topics.events}/${event.kind}`, JSON.stringify(event, finite), { qos: 1, retain: false });
  }

  volatileEvent(event: VolatileEvent): void {
    this.connection.publish(`${this.topics.events}/${event.kind}`, JSON.stringify({ ...event, at: null, stored: false }, finite), { qos: 1, retain: false });
  }

  status(subject: string, body: Record<string, unknown>): void {
    const topic = `${this.topics.status}/${subject}`;
    const text = JSON.stringify(body, finite);
    if (this.statusSent.get(topic) === text) return;
    this.statusSent.set(topic, text);
    this.connection.publish(topic, text, { qos: subject === 'daemon' ? 0 : 1, retain: true });
  }
}

function finite(_key: string, value: unknown): unknown {
  return typeof value === 'number' && !Number.isFinite(value) ? null : value;
}
