import { afterAll, beforeAll } from 'vitest';
import type { MqttClient } from 'mqtt';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { MqttConnection } from '../../src/ingest/mqtt-connection.js';
import { MqttSampleSource } from '../../src/ingest/mqtt-sample-source.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import type { BrokerConfig, SubscriptionConfig } from '../../src/config/plateau-config.js';
import { mqttClient, publishAsync } from '../helpers/brokers.js';
import { startOwnMosquitto, type OwnMosquitto } from '../helpers/mosquitto.js';
import { sampleSourceContract, type SourceFactory } from './sample-source.contract.js';

// The sample-source port's contract against every implementation: MQTT over the embedded broker
// (aedes) and over a Mosquitto of the test's own (skipped with a message when the package is not
// installed), and the in-memory source.

let embedded: EmbeddedBroker;
let mosquitto: OwnMosquitto | null = null;
beforeAll(async () => {
  embedded = await startEmbeddedBroker({ port: 0 });
  mosquitto = await startOwnMosquitto();
  if (mosquitto === null) console.log('mosquitto is not installed: the sample-source contract over Mosquitto is skipped');
});
afterAll(async () => {
  await embedded.close();
  await mosquitto?.stop();
});

function mqtt(url: () => string): SourceFactory {
  return async (prefix: string, subscriptions: SubscriptionConfig[]) => {
    const broker: BrokerConfig = { url: url(), clientId: `source-${prefix}`, username: null, password: null, tls: null, protocolVersion: 4, qos: 1, sessionExpirySeconds: 3600, keepaliveSeconds: 30, reconnectPeriodMs: 100 };
    const make = () => {
      const connection = new MqttConnection(broker, url(), subscriptions.map((s) => s.topic));
      return { connection, source: new MqttSampleSource(connection, subscriptions, 'mqtt-contract') };
    };
    let current = make();
    const publisher: MqttClient = await mqttClient(url(), `source-pub-${prefix}`);
    const sources = [current.source];
    return {
      source: current.source,
      publish: (topic, payload) => publishAsync(publisher, topic, payload, 1),
      dropConnection: async () => {
        // The network drops the connection under the client; mqtt.js reconnects by itself.
        (current.connection as unknown as { client: { stream: { destroy(): void } } }).client.stream.destroy();
      },
      again: () => {
        current = make();
        sources.push(current.source);
        return current.source;
      },
      close: async () => {
        publisher.end(true);
        for (const source of sources) await source.stop();
      },
    };
  };
}

sampleSourceContract('MQTT over the embedded broker (aedes)', mqtt(() => embedded.url));
sampleSourceContract("MQTT over Mosquitto (the test's own, on a free port)", mqtt(() => mosquitto?.url ?? ''), () => mosquitto !== null);
sampleSourceContract('in memory', async (_prefix, subscriptions) => {
  const source = new MemorySampleSource(subscriptions, 'memory-contract');
  return {
    source,
    publish: async (topic, payload) => {
      source.publish(topic, payload);
    },
    dropConnection: async () => source.reconnect(),
    again: () => source,
    close: () => source.stop(),
  };
});
