import mqtt, { type IClientOptions, type IPublishPacket, type MqttClient } from 'mqtt';
import { readFileSync } from 'node:fs';
import type { BrokerConfig } from '../config/plateau-config.js';
import { brokerFilters } from './topic-filters.js';

/**
 * The daemon's one MQTT connection (mqtt.js), shared by its sample source and its publisher: a
 * persistent session (clean = false on MQTT 3.1.1, clean start off with a session expiry on MQTT 5),
 * subscriptions at the configured QoS, automatic reconnect and resubscribe, and PUBACKs held back
 * until the daemon has committed the message's samples.
 *
 * Held acknowledgements: mqtt.js sends a PUBACK as soon as its message handler returns and handles
 * one incoming packet at a time, so waiting in the handler would allow one message per database
 * commit. Instead the PUBACK packet mqtt.js sends right after the handler (synchronously: its
 * default handleMessage calls back at once) is taken aside into the message's delivery and written
 * by `acknowledge` after the commit. A delivery from an earlier connection is never acknowledged
 * (its message id belongs to the old connection): the broker redelivers the message and the
 * daemon's duplicate rule (same channel, same payload time) drops the repeat. With MQTT 3.1.1 the
 * broker bounds the unacknowledged messages in flight (Mosquitto's default is 20), so the daemon
 * commits as soon as a burst of messages has been handled, not on a timer.
 */
export interface MqttDelivery {
  /** Connection the message came in on (its PUBACK is only valid there). */
  generation: number;
  topic: string;
  payload: Buffer;
  qos: number;
  /** The PUBACK mqtt.js would have sent (QoS 1), filled in right after the message handler returns. */
  puback: unknown;
  /** Acknowledged (its PUBACK sent, or sent the moment it is taken aside when acknowledged from within the handler). */
  acknowledged: boolean;
}

export interface MqttConnectionHandlers {
  message(delivery: MqttDelivery): void;
  connection(connected: boolean, detail: string): void;
  error(error: Error): void;
}

/** Connection generations, unique in the process (a delivery of one connection never matches another's). */
let generations = 0;

/** A graceful end waits this long for the broker to acknowledge what was published. */
const STOP_GRACE_MS = 2000;
/** start() resolves once subscribed, or after this long when the broker does not answer (the client keeps trying). */
const START_WAIT_MS = 3000;

export class MqttConnection {
  readonly url: string;
  private readonly broker: BrokerConfig;
  private readonly filters: string[];
  private client: MqttClient | null = null;
  private handlers: MqttConnectionHandlers | null = null;
  private generation = 0;
  /** QoS 1 deliveries whose PUBACK mqtt.js is about to send (right after the message handler), by message id. */
  private readonly awaitingPuback = new Map<number, MqttDelivery>();
  connected = false;
  reconnects = 0;

  constructor(broker: BrokerConfig, url: string, topicFilters: string[]) {
    this.broker = broker;
    this.url = url;
    this.filters = brokerFilters(topicFilters);
  }

  get currentGeneration(): number {
    return this.generation;
  }

  start(handlers: MqttConnectionHandlers): Promise<void> {
    this.handlers = handlers;
    const b = this.broker;
    const options: IClientOptions = {
      clientId: b.clientId,
      clean: false,
      protocolVersion: b.protocolVersion,
      keepalive: b.keepaliveSeconds,
      reconnectPeriod: b.reconnectPeriodMs,
      connectTimeout: 10_000,
      resubscribe: true,
      ...(b.username !== null ? { username: b.username } : {}),
      ...(b.password !== null ? { password: b.password } : {}),
      ...(b.protocolVersion === 5 ? { properties: { sessionExpiryInterval: b.sessionExpirySeconds, receiveMaximum: 1000 } } : {}),
    };
    if (b.tls) {
      if (b.tls.caFile) options.ca = readFileSync(b.tls.caFile);
      if (b.tls.certFile) options.cert = readFileSync(b.tls.certFile);
      if (b.tls.keyFile) options.key = readFileSync(b.tls.keyFile);
      options.rejectUnauthorized = b.tls.rejectUnauthorized;
    }
    const client = mqtt.connect(this.url, options);
    this.client = client;
    this.interceptAcknowledgements(client);
    client.on('connect', (connack) => {
      this.generation = ++generations;
      this.connected = true;
      handlers.connection(true, connack.sessionPresent ? 'connected, session resumed' : 'connected, new session');
      // With a resumed session the broker keeps the subscriptions; subscribing again is harmless
      // and covers a broker that lost them.
      let waiting = this.filters.length;
      if (waiting === 0) client.emit('plateau-subscribed' as 'connect', connack);
      for (const filter of this.filters) {
        client.subscribe(filter, { qos: b.qos }, (error) => {
          if (error) handlers.error(new Error(`subscribe ${filter}: ${error.message}`));
          if (--waiting === 0) client.emit('plateau-subscribed' as 'connect', connack);
        });
      }
    });
    client.on('close', () => {
      if (this.connected) handlers.connection(false, 'connection closed');
      this.connected = false;
      this.generation = ++generations;
      this.awaitingPuback.clear();
    });
    client.on('reconnect', () => {
      this.reconnects++;
    });
    client.on('error', (error) => handlers.error(error));
    client.on('message', (topic, payload, packet: IPublishPacket) => {
      const delivery: MqttDelivery = { generation: this.generation, topic, payload, qos: packet.qos, puback: null, acknowledged: false };
      // mqtt.js sends the PUBACK right after this handler returns; interceptAcknowledgements takes it.
      if (packet.qos === 1 && packet.messageId !== undefined) this.awaitingPuback.set(packet.messageId, delivery);
      handlers.message(delivery);
    });
    return new Promise((resolve) => {
      const done = () => resolve();
      // Once the broker has acknowledged the subscriptions (nothing published after that is missed).
      client.once('plateau-subscribed' as 'connect', done);
      // Do not block start-up on an absent broker: the client keeps trying in the background.
      setTimeout(done, START_WAIT_MS).unref();
    });
  }

  /** Writes the held PUBACKs of these deliveries; those of an earlier connection are dropped. Returns how many went out. */
  acknowledge(deliveries: readonly MqttDelivery[]): number {
    const client = this.client;
    if (!client || !this.connected || deliveries.length === 0) return 0;
    const write = (client as unknown as { _writePacket(packet: unknown, cb?: () => void): void })._writePacket.bind(client);
    // One corked write burst instead of a socket write per acknowledgement.
    const stream = (client as unknown as { stream?: { cork?(): void; uncork?(): void; setMaxListeners?(n: number): void } }).stream;
    stream?.setMaxListeners?.(0);
    stream?.cork?.();
    let sent = 0;
    for (const delivery of deliveries) {
      if (delivery.generation !== this.generation || delivery.qos !== 1 || delivery.acknowledged) continue;
      delivery.acknowledged = true;
      if (delivery.puback !== null) {
        write(delivery.puback);
        delivery.puback = null;
      }
      sent++;
    }
    if (stream?.uncork) process.nextTick(() => stream.uncork?.());
    return sent;
  }

  publish(topic: string, payload: string | Buffer, options: { qos: 0 | 1; retain: boolean }): void {
    const client = this.client;
    if (!client) return;
    try {
      client.publish(topic, payload, options, (error) => {
        if (error) this.handlers?.error(new Error(`publish ${topic}: ${error.message}`));
      });
    } catch (error) {
      this.handlers?.error(error as Error);
    }
  }

  /**
   * Disconnects without acknowledging anything still held. A graceful end waits for the broker to
   * acknowledge what the daemon published; after STOP_GRACE_MS the connection is closed anyway
   * (anything unacknowledged is redelivered to the next session).
   */
  async stop(): Promise<void> {
    const client = this.client;
    if (!client) return;
    this.client = null;
    await new Promise<void>((resolve) => {
      const timer = setTimeout(() => client.end(true, {}, () => resolve()), STOP_GRACE_MS);
      client.end(false, {}, () => {
        clearTimeout(timer);
        resolve();
      });
    });
  }

  private interceptAcknowledgements(client: MqttClient): void {
    const target = client as unknown as { _sendPacket(packet: { cmd: string; messageId?: number }, cb?: (error?: Error) => void, ...rest: unknown[]): void };
    const original = target._sendPacket.bind(client);
    target._sendPacket = (packet, cb, ...rest) => {
      if (packet.cmd === 'puback') {
        const delivery = packet.messageId === undefined ? undefined : this.awaitingPuback.get(packet.messageId);
        if (delivery !== undefined) {
          this.awaitingPuback.delete(packet.messageId as number);
          if (delivery.acknowledged) return original(packet, cb, ...rest);
          delivery.puback = packet;
        }
        // Let mqtt.js move on to the next packet now; the PUBACK itself waits for the commit.
        if (cb) cb();
        return;
      }
      original(packet, cb, ...rest);
    };
  }
}
