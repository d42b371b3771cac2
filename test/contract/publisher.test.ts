import { afterAll, beforeAll } from 'vitest';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { MqttConnection } from '../../src/ingest/mqtt-connection.js';
import { MqttPublisher } from '../../src/ingest/mqtt-publisher.js';
import { ListenerPublisher } from '../../src/daemon/listener-publisher.js';
import type { BrokerConfig, TopicsConfig } from '../../src/config/plateau-config.js';
import { mqttClient, unique } from '../helpers/brokers.js';
import { startOwnMosquitto, type OwnMosquitto } from '../helpers/mosquitto.js';
import { publisherContract, type Follower, type PublisherUnderTest } from './publisher.contract.js';

// The publisher port's contract against every implementation: MQTT over the embedded broker and
// over a Mosquitto of the test's own (skipped with a message when the package is not installed),
// each followed by a plain MQTT subscriber, and the in-process listeners (what the WebSocket hub
// follows).

let embedded: EmbeddedBroker;
let mosquitto: OwnMosquitto | null = null;
beforeAll(async () => {
  embedded = await startEmbeddedBroker({ port: 0 });
  mosquitto = await startOwnMosquitto();
  if (mosquitto === null) console.log('mosquitto is not installed: the publisher contract over Mosquitto is skipped');
});
afterAll(async () => {
  await embedded.close();
  await mosquitto?.stop();
});

function mqtt(url: () => string): () => Promise<PublisherUnderTest> {
  return async () => {
    const prefix = unique('publish');
    const topics: TopicsConfig = { events: `${prefix}/events`, status: `${prefix}/status`, command: `${prefix}/command` };
    const broker = (clientId: string): BrokerConfig => ({ url: url(), clientId, username: null, password: null, tls: null, protocolVersion: 4, qos: 1, sessionExpirySeconds: 60, keepaliveSeconds: 30, reconnectPeriodMs: 100 });
    const connection = new MqttConnection(broker(`${prefix}-daemon`), url(), []);
    await connection.start({ message: () => undefined, connection: () => undefined, error: () => undefined });
    const connections = [connection];
    return {
      publisher: new MqttPublisher(connection, topics),
      follow: async (): Promise<Follower> => {
        const client = await mqttClient(url(), unique('follower'));
        const follower: Follower = { events: [], volatile: [], statuses: new Map(), close: async () => void client.end(true) };
        client.on('message', (topic, payload) => {
          const body = JSON.parse(payload.toString()) as Record<string, unknown>;
          if (topic.startsWith(`${topics.events}/`)) (body.stored === false ? follower.volatile : follower.events).push(body.stored === false ? { ...body, id: null } : body);
          else if (topic.startsWith(`${topics.status}/`)) {
            const subject = topic.slice(topics.status.length + 1);
            follower.statuses.set(subject, [...(follower.statuses.get(subject) ?? []), body]);
          }
        });
        await new Promise<void>((resolve, reject) => client.subscribe([`${topics.events}/#`, `${topics.status}/#`], { qos: 1 }, (error) => (error ? reject(error) : resolve())));
        return follower;
      },
      down: async () => {
        // Never connected (a broker port nobody listens on), and one stopped.
        const never = new MqttConnection(broker(`${prefix}-never`), 'mqtt://127.0.0.1:9', []);
        const stopped = new MqttConnection(broker(`${prefix}-stopped`), url(), []);
        await stopped.start({ message: () => undefined, connection: () => undefined, error: () => undefined });
        await stopped.stop();
        connections.push(never);
        const a = new MqttPublisher(never, topics);
        const b = new MqttPublisher(stopped, topics);
        return { event: (e) => (a.event(e), b.event(e)), volatileEvent: (e) => (a.volatileEvent(e), b.volatileEvent(e)), status: (s, body) => (a.status(s, body), b.status(s, body)) };
      },
      close: async () => {
        for (const c of connections) await c.stop();
      },
    };
  };
}

publisherContract('MQTT over the embedded broker (aedes)', mqtt(() => embedded.url));
publisherContract("MQTT over Mosquitto (the test's own, on a free port)", mqtt(() => mosquitto?.url ?? ''), () => mosquitto !== null);
publisherContract('in-process listeners', async () => {
  const publisher = new ListenerPublisher();
  return {
    publisher,
    follow: async (): Promise<Follower> => {
      const follower: Follower = { events: [], volatile: [], statuses: new Map(), close: async () => off.forEach((f) => f()) };
      const off = [
        publisher.onEvent((e) => follower.events.push({ ...e })),
        publisher.onVolatileEvent((e) => follower.volatile.push({ ...e })),
        publisher.onStatus((subject, body) => follower.statuses.set(subject, [...(follower.statuses.get(subject) ?? []), body])),
      ];
      return follower;
    },
    down: async () => {
      // Followers that throw: the others still hear, and the publisher does not throw.
      const failing = new ListenerPublisher();
      failing.onEvent(() => {
        throw new Error('a follower fails');
      });
      failing.onStatus(() => {
        throw new Error('a follower fails');
      });
      failing.onVolatileEvent(() => {
        throw new Error('a follower fails');
      });
      return failing;
    },
    close: async () => undefined,
  };
});
