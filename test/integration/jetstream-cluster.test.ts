import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { connect, type NatsConnection } from '@nats-io/transport-node';
import { jetstream, jetstreamManager } from '@nats-io/jetstream';
import pino from 'pino';
import { parseConfig } from '../../src/config/load-config.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { buildHttpApp } from '../../src/server/http-app.js';
import { analyzeFile } from '../../src/cli/analyze.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';
import { SeededRandom, ar1Series } from '../../src/core/random/seeded-random.js';
import { waitFor, within } from '../helpers/brokers.js';
import { startOwnNatsCluster, type OwnNatsServer } from '../helpers/nats-server.js';

// A 3-node JetStream cluster of the test's own (Debian's nats-server, free loopback ports), the
// stream, consumers and lease bucket with R = 3, two workers (daemons in this process) given every
// node's URL. One node is killed with SIGKILL mid-stream: the lab goes on, and every channel, read
// from the worker holding its partition, equals `plateau analyze` on the same samples field for
// field. Skipped with a message when nats-server is not installed.
//
// Every wait is bounded and names what it waited for. This test once hung in a full run (and
// failed 5 of 5 runs beside a CPU hog): a worker's heartbeat listed the live workers through the
// client's key listing, which never ended when the lease bucket's leader went down with the node;
// heartbeats are serialised, so that worker never renewed nor took a partition again, and its
// stop() waited for the heartbeat for ever. The listing is now bounded (src/ingest/partition-leases.ts).

const P = 2;
const N = 800;
const T0 = 1_764_000_000;
const CHANNELS = ['k0', 'k1', 'k2', 'k3'];

let nodes: OwnNatsServer[] | null = null;
beforeAll(async () => {
  nodes = await startOwnNatsCluster({ mappings: { 'lab.*.*': `part.{{partition(${P},1,2)}}.lab.{{wildcard(1)}}.{{wildcard(2)}}` } });
  if (nodes === null) console.log('nats-server is not installed: the JetStream cluster test is skipped');
}, 45_000);
afterAll(async () => {
  for (const n of nodes ?? []) await n.stop();
});

describe('a lab on a 3-node JetStream cluster with R = 3', () => {
  it('one node killed mid-stream: the lab goes on, every channel equals plateau analyze', async (context) => {
    if (nodes === null) return context.skip();
    const urls = nodes.map((n) => n.url);
    const started = performance.now();
    const phases: string[] = [];
    const phase = (name: string) => phases.push(`${name} ${((performance.now() - started) / 1000).toFixed(1)} s`);
    const nc: NatsConnection = await within(10_000, 'a client connection to the cluster', connect({ servers: urls }));
    // JetStream answers once the cluster has elected its meta leader.
    await waitFor(async () => (await jetstreamManager(nc).then((m) => m.getAccountInfo()).then(() => true, () => false)), 20_000, 'JetStream on the cluster', 200);
    phase('JetStream');
    const dir = mkdtempSync(join(tmpdir(), 'plateau-cluster-'));
    const stopProblems: string[] = [];
    const logs: string[] = [];
    let finished = false;
    const daemons = ['c1', 'c2'].map(
      (worker) =>
        new Daemon(
          parseConfig({
            broker: { url: urls },
            scale: { worker, partitions: P, stream: 'CLUSTER', replicas: 3, leaseSeconds: 2 },
            subscriptions: [{ topic: 'lab/+/+', format: 'json', channel: '{3}', valueField: 'v', timeField: 't', timeUnit: 's' }],
            channels: { defaults: { window: { kind: 'growing' } } },
            store: { path: join(dir, `${worker}.sqlite`) },
            log: { level: 'silent' },
          }),
          // The worker's log, kept to say what it went through when the test fails.
          { logger: pino({ level: 'info', base: { worker } }, { write: (line: string) => void logs.push(line.trim()) }) },
        ),
    );
    try {
      for (const d of daemons) await within(30_000, `worker ${d.config.scale?.worker} to start (stream, consumers, lease bucket with R = 3)`, d.start());
      phase('workers started');
      const jsm = await jetstreamManager(nc);
      expect((await within(10_000, 'the stream info', jsm.streams.info('CLUSTER'))).config.num_replicas).toBe(3);
      await waitFor(() => daemons.every((d) => d.scaleStatus()?.partitions.length === 1), 20_000, 'one partition each');
      phase('partitions shared');
      const random = new SeededRandom(7);
      const data = Object.fromEntries(CHANNELS.map((c, i) => [c, Array.from(ar1Series(random, 0.5, N), (v) => 10 + i + 0.1 * v)])) as Record<string, number[]>;
      const rows = [`time,${CHANNELS.join(',')}`];
      const js = jetstream(nc);
      // A rig's publisher retries what was not acknowledged; the message id makes a retry that
      // did reach the stream a duplicate the server drops (its duplicate window).
      const send = async (subject: string, payload: string, id: string) => {
        for (let attempt = 0; ; attempt++) {
          try {
            return await js.publish(subject, payload, { msgID: id, timeout: 3000 });
          } catch (error) {
            if (attempt >= 80 || finished) throw error;
            await new Promise((resolve) => setTimeout(resolve, 250));
          }
        }
      };
      // Each step waits for its acknowledgements, as a rig's publisher keeps its order through retries.
      const publish = async (from: number, to: number) => {
        for (let i = from; i < to; i++) {
          const t = T0 + i * 0.1;
          rows.push(`${t},${CHANNELS.map((c) => data[c]?.[i]).join(',')}`);
          await Promise.all(CHANNELS.map((c) => send(`lab.rig${c}.${c}`, JSON.stringify({ v: data[c]?.[i], t }), `${c}-${i}`)));
        }
      };
      await within(60_000, `the first ${N / 2} samples of each channel to be acknowledged by the stream`, publish(0, N / 2));
      phase('first half published');
      // Kill the node that leads the stream (the worst case), with SIGKILL.
      const leader = (await within(10_000, 'the stream info', jsm.streams.info('CLUSTER'))).cluster?.leader ?? '';
      const victim = nodes.find((n) => leader === `plateau_test_${n.port}`) ?? (nodes[0] as OwnNatsServer);
      process.kill(victim.pid, 'SIGKILL');
      await within(60_000, `the last ${N / 2} samples of each channel to be acknowledged by the stream after the node was killed`, publish(N / 2, N));
      phase('node killed, second half published');
      const lab = async () => {
        const out = new Map<string, Record<string, unknown>>();
        for (const d of daemons) {
          const app = buildHttpApp(d, { token: null, maxBodyBytes: 65536 });
          const channels = ((await app.inject({ method: 'GET', url: '/api/channels' })).json() as { channels: Record<string, unknown>[] }).channels;
          await app.close();
          for (const c of channels) if (Number(c.n) + Number(c.excluded) === N) out.set(String(c.name), c);
        }
        return out;
      };
      await waitFor(async () => (await lab()).size === CHANNELS.length, 60_000, `every channel to take ${N} samples`, 250).catch(async (error: Error) => {
        // Say where each channel stands on each worker, and what the workers skipped or refused.
        const detail = daemons.map((d) => {
          const counters = d.counterReport() as { samples: unknown; redeliveriesSkipped: number; broker: unknown; scale: { lostDeliveries: number } };
          const channels = d.channels().map((c) => `${c.name}:${(c as unknown as { n: number }).n}`).join(' ');
          return `${d.config.scale?.worker} holds ${JSON.stringify(d.scaleStatus()?.partitions)}; ${channels}; skipped ${counters.redeliveriesSkipped}; lost deliveries noticed ${counters.scale.lostDeliveries}; samples ${JSON.stringify(counters.samples)}; broker ${JSON.stringify(counters.broker)}`;
        });
        const lines = logs.filter((l) => !l.includes('"msg":"broker ')).slice(-40).map((l) => l.slice(0, 400));
        throw new Error(`${error.message}\n${detail.join('\n')}\nthe workers' last log lines:\n${lines.join('\n')}`);
      });
      phase('every sample taken');
      const view = await lab();
      const file = join(dir, 'same.csv');
      writeFileSync(file, `${rows.join('\n')}\n`);
      const report = await analyzeFile(file, DEFAULT_CHANNEL_OPTIONS);
      for (const c of CHANNELS) {
        const fromLab = view.get(c) as Record<string, unknown>;
        const fromFile = report.channels.find((x) => x.name === c) as unknown as Record<string, unknown>;
        for (const key of ['n', 'mean', 'sd', 'acf', 'tauInt', 'nEff', 'standardUncertainty', 'dof', 'coverageFactor', 'expandedUncertainty', 'confidence', 'state', 'excluded', 'stationarity', 'allan', 'estimators']) {
          expect(fromLab[key], `${c}.${key}`).toEqual(fromFile[key]);
        }
      }
      console.log(`cluster: node ${victim.url} (stream leader: ${leader}) killed at sample ${N / 2}; ${CHANNELS.length} channels x ${N} samples exact on two workers; ${phases.join(', ')}`);
    } finally {
      finished = true;
      // Bounded: a worker that cannot stop is a failure with its name, not a hang.
      for (const d of daemons) await within(15_000, `worker ${d.config.scale?.worker} to stop`, d.stop()).catch((error: Error) => stopProblems.push(error.message));
      await within(10_000, 'the client connection to close', nc.close()).catch((error: Error) => stopProblems.push(error.message));
      phase('stopped');
      console.log(`cluster phases: ${phases.join(', ')}${stopProblems.length > 0 ? `; ${stopProblems.join('; ')}` : ''}`);
    }
    expect(stopProblems, 'every worker and the client stop within their limits').toEqual([]);
  }, 180_000);
});
