import { afterAll, beforeAll } from 'vitest';
import { connect, type NatsConnection } from '@nats-io/transport-node';
import type { SubscriptionConfig } from '../../src/config/plateau-config.js';
import type { ScaleConfig } from '../../src/config/scale-config.js';
import { declareLayout } from '../../src/ingest/jetstream-layout.js';
import { JetStreamSampleSource } from '../../src/ingest/jetstream-sample-source.js';
import { NatsLink } from '../../src/ingest/nats-link.js';
import { topicToSubject } from '../../src/ingest/nats-subjects.js';
import { startOwnNatsServer, type OwnNatsServer } from '../helpers/nats-server.js';
import { sampleSourceContract } from './sample-source.contract.js';

// The sample-source port's contract over NATS JetStream: a nats-server of the test's own (Debian's
// package, on a free loopback port, JetStream in a temporary folder), a stream of one partition
// per test, the source reading partition 0 from its durable consumer (continuing it: startAfter null).

let server: OwnNatsServer | null = null;
let publisher: NatsConnection | null = null;
beforeAll(async () => {
  server = await startOwnNatsServer();
  if (server === null) console.log('nats-server is not installed: the sample-source contract over JetStream is skipped');
  else publisher = await connect({ servers: server.url });
}, 20_000);
afterAll(async () => {
  await publisher?.close();
  await server?.stop();
});

let streams = 0;
sampleSourceContract(
  "JetStream (a nats-server of the test's own)",
  async (_prefix, subscriptions: SubscriptionConfig[]) => {
    const url = (server as OwnNatsServer).url;
    const n = streams++;
    const scale: ScaleConfig = { servers: [url], partitions: 1, stream: `CONTRACT${n}`, subjectPrefix: `c${n}`, replicas: 1, worker: 'w', leaseSeconds: 3, leaseBucket: 'CONTRACT_leases', checkpointBucket: 'CONTRACT_checkpoints', checkpointSamples: 1000, fetchBatch: 64 };
    const setup = new NatsLink({ servers: [url], name: 'setup' });
    const report = await declareLayout(await setup.open(), scale);
    await setup.close();
    if (report.problems.length > 0) throw new Error(report.problems.join('\n'));
    const links: NatsLink[] = [];
    const make = () => {
      const link = new NatsLink({ servers: [url], name: `contract-${streams}`, reconnectMs: 100 });
      links.push(link);
      const source = new JetStreamSampleSource({ link, stream: scale.stream, subjectPrefix: scale.subjectPrefix, subscriptions, name: 'jetstream-contract' });
      const start = source.start.bind(source);
      source.start = async (handlers, resume) => {
        await start(handlers, resume);
        await source.assign(0, null);
      };
      return source;
    };
    let current = make();
    const sources = [current];
    return {
      source: current,
      publish: async (topic, payload) => {
        await (publisher as NatsConnection).request(`${scale.subjectPrefix}.0.${topicToSubject(topic)}`, payload, { timeout: 2000 });
      },
      dropConnection: () => (links[links.length - 1] as NatsLink).reconnect(),
      again: () => {
        current = make();
        sources.push(current);
        return current;
      },
      close: async () => {
        for (const s of sources) await s.stop();
        for (const l of links) await l.close();
      },
    };
  },
  () => server !== null,
);
