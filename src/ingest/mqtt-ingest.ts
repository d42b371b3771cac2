import mqtt, { type IClientOptions, type MqttClient, type IPublishPacket } from 'mqtt';
import { readFileSync } from 'node:fs';
import type { BrokerConfig, SubscriptionConfig } from '../config/plateau-config.js';
import { DECODER_DEFAULTS } from './payload-decoder.js';

/**
 * The MQTT side of the daemon (mqtt.js): a persistent session (clean = false on MQTT 3.1.1, clean
 * start off with a session expiry on MQTT 5), QoS 1 subscriptions, automatic reconnect and
 * resubscribe, and acknowledgements held back until the daemon says the samples are committed.
 *
 * Deferred acknowledgements: mqtt.js sends a PUBACK as soon as its message handler returns, and it
 * handles one incoming packet at a time, so waiting in the handler would allow one message per
 * database commit. Instead the PUBACK packets are taken aside when mqtt.js sends them and released
 * by `releaseAcknowledgements()` after the commit. An acknowledgement held when the connection
 * drops is discarded (its message id belongs to the old connection): the broker redelivers the
 * message, and the daemon's duplicate rule (same channel, same payload time) drops the repeat.
 * With MQTT 3.1.1 the broker bounds the unacknowledged messages in flight (Mosquitto's default is
 * 20), so the daemon commits as soon as a burst of messages has been handled, not on a timer.
 */
const STOP_GRACE_MS = 2000;

export interface IngestHandlers {
  onMessage(topic: string, payload: Buffer, subscription: SubscriptionConfig, qos: number): void;
  onConnectionChange(connected: boolean, detail: string): void;
  onError(error: Error): void;
}

export class MqttIngest {
  private client: MqttClient | null = null;
  private readonly broker: BrokerConfig;
  private readonly url: string;
  private readonly subscriptions: SubscriptionConfig[];
  private readonly handlers: IngestHandlers;
  private heldAcks: unknown[] = [];
  private connectionGeneration = 0;
  private heldGeneration = 0;
  connected = false;
  reconnects = 0;

  constructor(broker: BrokerConfig, url: string, subscriptions: SubscriptionConfig[], handlers: IngestHandlers) {
    this.broker = broker;
    this.url = url;
    this.subscriptions = subscriptions;
    this.handlers = handlers;
  }

  start(): Promise<void> {
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
      this.connectionGeneration++;
      this.heldAcks = [];
      this.connected = true;
      this.handlers.onConnectionChange(true, connack.sessionPresent ? 'connected, session resumed' : 'connected, new session');
      // With a resumed session the broker keeps the subscriptions; subscribing again is harmless
      // and covers a broker that lost them.
      for (const filter of brokerFilters(this.subscriptions.map((s) => s.topic))) {
        client.subscribe(filter, { qos: b.qos }, (error) => {
          if (error) this.handlers.onError(new Error(`subscribe ${filter}: ${error.message}`));
        });
      }
    });
    client.on('close', () => {
      if (this.connected) this.handlers.onConnectionChange(false, 'connection closed');
      this.connected = false;
      this.connectionGeneration++;
      this.heldAcks = [];
    });
    client.on('reconnect', () => {
      this.reconnects++;
    });
    client.on('error', (error) => this.handlers.onError(error));
    client.on('message', (topic, payload, packet: IPublishPacket) => {
      const subscription = this.match(topic);
      if (subscription) this.handlers.onMessage(topic, payload, subscription, packet.qos);
      else this.handlers.onMessage(topic, payload, UNKNOWN_TOPIC, packet.qos);
    });
    return new Promise((resolve) => {
      const done = () => resolve();
      client.once('connect', done);
      // Do not block start-up on an absent broker: the client keeps trying in the background.
      setTimeout(done, 3000).unref();
    });
  }

  /** Sends the acknowledgements held since the last call (after the samples are committed). */
  releaseAcknowledgements(): number {
    const client = this.client;
    const held = this.heldAcks;
    if (!client || held.length === 0) return 0;
    this.heldAcks = [];
    if (this.heldGeneration !== this.connectionGeneration || !this.connected) return 0;
    const write = (client as unknown as { _writePacket(packet: unknown, cb?: () => void): void })._writePacket.bind(client);
    // One corked write burst instead of a socket write per acknowledgement.
    const stream = (client as unknown as { stream?: { cork?(): void; uncork?(): void; setMaxListeners?(n: number): void } }).stream;
    stream?.setMaxListeners?.(0);
    stream?.cork?.();
    for (const packet of held) write(packet);
    if (stream?.uncork) process.nextTick(() => stream.uncork?.());
    return held.length;
  }

  get heldCount(): number {
    return this.heldAcks.length;
  }

  publish(topic: string, payload: string, options: { qos: 0 | 1; retain: boolean }): void {
    if (!this.client) return;
    this.client.publish(topic, payload, options, (error) => {
      if (error) this.handlers.onError(new Error(`publish ${topic}: ${error.message}`));
    });
  }

  /** Subscribes to an extra topic (the command topic); messages arrive through onMessage with the given subscription. */
  addSubscription(subscription: SubscriptionConfig): void {
    const before = brokerFilters(this.subscriptions.map((s) => s.topic));
    this.subscriptions.push(subscription);
    if (this.client?.connected && brokerFilters(this.subscriptions.map((s) => s.topic)).length > before.length) {
      this.client.subscribe(subscription.topic, { qos: this.broker.qos });
    }
  }

  /**
   * Disconnects. Call after the last commit and releaseAcknowledgements(): a graceful end waits for
   * the broker to acknowledge what the daemon published; after STOP_GRACE_MS the connection is
   * closed anyway (anything unacknowledged is redelivered to the next session).
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

  /** Forcibly drops the connection (tests: a broker restart as the client sees it). */
  dropConnection(): void {
    (this.client as unknown as { stream?: { destroy(): void } } | null)?.stream?.destroy();
  }

  /** The most specific subscription whose filter matches: fewest wildcards, then the longest filter. */
  private match(topic: string): SubscriptionConfig | undefined {
    let best: SubscriptionConfig | undefined;
    let bestScore = Number.POSITIVE_INFINITY;
    for (const subscription of this.subscriptions) {
      if (!topicMatches(subscription.topic, topic)) continue;
      const wildcards = (subscription.topic.match(/[+#]/g) ?? []).length;
      const score = wildcards * 100_000 - subscription.topic.length;
      if (score < bestScore) {
        best = subscription;
        bestScore = score;
      }
    }
    return best;
  }

  private interceptAcknowledgements(client: MqttClient): void {
    const target = client as unknown as { _sendPacket(packet: { cmd: string }, cb?: (error?: Error) => void, ...rest: unknown[]): void };
    const original = target._sendPacket.bind(client);
    target._sendPacket = (packet, cb, ...rest) => {
      if (packet.cmd === 'puback' && this.connected) {
        if (this.heldAcks.length === 0) this.heldGeneration = this.connectionGeneration;
        this.heldAcks.push(packet);
        // Let mqtt.js move on to the next packet now; the PUBACK itself waits for the commit.
        if (cb) cb();
        return;
      }
      original(packet, cb, ...rest);
    };
  }
}

/** Stands for "no configured subscription matches this topic". */
const UNKNOWN_TOPIC: SubscriptionConfig = { ...DECODER_DEFAULTS, topic: '', format: 'number', channel: '', maxBytes: 0 };

export function isUnknownTopic(subscription: SubscriptionConfig): boolean {
  return subscription === UNKNOWN_TOPIC;
}

/**
 * The filters to subscribe to at the broker: every configured filter that no other one covers.
 * Overlapping subscriptions make a broker deliver a message once per matching filter (MQTT 3.1.1
 * leaves it open; aedes does, and drops the connection over the repeated acknowledgements), so the
 * daemon subscribes to the covering set and picks the most specific configured filter itself.
 */
export function brokerFilters(filters: string[]): string[] {
  const unique = [...new Set(filters)];
  return unique.filter((f) => !unique.some((g) => g !== f && filterCovers(g, f)));
}

/** True when every topic that matches `inner` also matches `outer`. */
export function filterCovers(outer: string, inner: string): boolean {
  const o = outer.split('/');
  const i = inner.split('/');
  for (let k = 0; k < o.length; k++) {
    const a = o[k];
    if (a === '#') return true;
    const b = i[k];
    if (b === undefined || b === '#') return false;
    if (a === '+') continue;
    if (b === '+' || a !== b) return false;
  }
  return o.length === i.length;
}

/** MQTT topic filter matching (+ one level, # the rest). */
export function topicMatches(filter: string, topic: string): boolean {
  const f = filter.split('/');
  const t = topic.split('/');
  for (let i = 0; i < f.length; i++) {
    const part = f[i];
    if (part === '#') return i > 0 || !topic.startsWith('$');
    if (i >= t.length) return false;
    if (part === '+') {
      if (i === 0 && (t[0] as string).startsWith('$')) return false;
      continue;
    }
    if (part !== t[i]) return false;
  }
  return f.length === t.length;
}
