import { describe, expect, it } from 'vitest';
import { startEmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { mqttClient, publishAsync, unique, waitFor } from '../helpers/brokers.js';
import { testConfig } from '../helpers/daemon-config.js';

// A broker restart during a QoS 1 stream: the daemon reconnects, resumes its session and loses
// nothing. The embedded broker keeps its sessions across the restart (as a production broker with
// persistence would); the publisher keeps its unacknowledged messages and sends them again.

describe('a broker restart during a stream', () => {
  it('the daemon reconnects and every sample arrives exactly once', async () => {
    const broker = await startEmbeddedBroker({ port: 0 });
    const prefix = unique('restart');
    const daemon = new Daemon(testConfig({ url: broker.url, prefix, clientId: unique('plateau-restart') }));
    await daemon.start();
    await waitFor(() => daemon.ingest?.connected === true, 5000, 'the daemon to connect');
    await new Promise((resolve) => setTimeout(resolve, 200));
    const publisher = await mqttClient(broker.url, unique('restart-pub'), { clean: false });
    const N = 4000;
    const pending: Promise<void>[] = [];
    for (let i = 0; i < N; i++) {
      pending.push(publishAsync(publisher, `${prefix}/bath_degC`, JSON.stringify({ v: 60 + 0.001 * Math.sin(i / 7), t: 1_764_200_000 + i })));
      if (i === N / 2) {
        await waitFor(() => daemon.counters.accepted > N / 4, 10_000, 'part of the stream to arrive');
        await broker.restart(500);
      }
      if (i % 200 === 199) await Promise.race([Promise.all(pending.splice(0)), new Promise((resolve) => setTimeout(resolve, 5000))]);
    }
    await waitFor(() => daemon.counters.accepted >= N, 15_000, "every sample to arrive").catch((e) => { console.log("accepted", daemon.counters.accepted, "rejected", JSON.stringify(daemon.counters.rejected), "reconnects", daemon.ingest?.reconnects, "connected", daemon.ingest?.connected, "pub connected", publisher.connected); throw e; });
    await new Promise((resolve) => setTimeout(resolve, 300));
    expect(daemon.counters.accepted).toBe(N);
    expect(daemon.registry.get('bath_degC')?.pipeline.totalReceived).toBe(N);
    expect(daemon.ingest?.reconnects).toBeGreaterThanOrEqual(1);
    publisher.end(true);
    await daemon.stop();
    await broker.close();
  }, 60_000);
});
