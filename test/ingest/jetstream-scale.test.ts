import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { performance } from 'node:perf_hooks';
import { connect, type NatsConnection } from '@nats-io/transport-node';
import { jetstreamManager } from '@nats-io/jetstream';
import type { ScaleConfig } from '../../src/config/scale-config.js';
import { declareLayout, leaseBucket } from '../../src/ingest/jetstream-layout.js';
import { JetStreamWorker } from '../../src/ingest/jetstream-worker.js';
import { PartitionLeases } from '../../src/ingest/partition-leases.js';
import { waitFor } from '../helpers/brokers.js';
import { freePort, startOwnNatsServer, type OwnNatsServer } from '../helpers/nats-server.js';

// Start-up checks of the server objects (one line per disagreement), and the partition leases on a
// real key-value bucket: an even spread, rebalancing as workers come and go, and never two owners
// of one partition, even when a worker freezes past its lease. A nats-server of the test's own
// (Debian's package, a free loopback port); skipped with a message when it is not installed.

let server: OwnNatsServer | null = null;
let nc: NatsConnection | null = null;
beforeAll(async () => {
  server = await startOwnNatsServer();
  if (server === null) console.log('nats-server is not installed: the JetStream layout and lease tests are skipped');
  else nc = await connect({ servers: server.url });
}, 20_000);
afterAll(async () => {
  await nc?.close();
  await server?.stop();
});

function scale(overrides: Partial<ScaleConfig>): ScaleConfig {
  return { servers: [server?.url ?? ''], partitions: 4, stream: 'LAYOUT', subjectPrefix: 'part', replicas: 1, worker: 'bay-1', leaseSeconds: 2, leaseBucket: 'LAYOUT_leases', checkpointBucket: 'LAYOUT_checkpoints', checkpointSamples: 1000, fetchBatch: 64, ...overrides };
}

const silent = { info: () => undefined, warn: () => undefined };

describe('the server objects, declared or checked at start-up', () => {
  it('an unreachable server: one clear line', async () => {
    const port = await freePort();
    const worker = new JetStreamWorker({ scale: { ...scale({}), servers: [`nats://127.0.0.1:${port}`] }, broker: { username: null, password: null }, subscriptions: [], log: silent, startAfter: () => 0 });
    const error = await worker.open().then(() => null, (e: unknown) => e as Error & { code: string });
    expect(error?.code).toBe('ERR_SCALE_UNREACHABLE');
    expect(error?.message).toMatch(new RegExp(`^cannot connect to the NATS server at nats://127\\.0\\.0\\.1:${port} \\(.+\\)$`));
    expect(error?.message.split('\n')).toHaveLength(1);
  });

  it('declares what is missing, then finds it as declared', async (context) => {
    if (nc === null) return context.skip();
    const s = scale({ stream: 'FRESH', subjectPrefix: 'fresh', leaseBucket: 'FRESH_leases' });
    expect(await declareLayout(nc, s)).toEqual({ problems: [], notes: [] });
    expect(await declareLayout(nc, s)).toEqual({ problems: [], notes: [] });
    const jsm = await jetstreamManager(nc);
    const names: string[] = [];
    for await (const c of jsm.consumers.list('FRESH')) names.push(c.name);
    expect(names.sort()).toEqual(['FRESH_p0', 'FRESH_p1', 'FRESH_p2', 'FRESH_p3']);
    // More consumers than partitions: the count changed under a running lab.
    const fewer = await declareLayout(nc, { ...s, partitions: 2 });
    expect(fewer.problems).toEqual([
      'consumer FRESH_p2 of stream FRESH is for partition 2, but scale.partitions is 2: the server\'s subject mapping and every worker must agree on the count',
      'consumer FRESH_p3 of stream FRESH is for partition 3, but scale.partitions is 2: the server\'s subject mapping and every worker must agree on the count',
    ]);
  });

  it('a stream with the wrong subjects, fewer replicas than asked, a retention limit: one line each', async (context) => {
    if (nc === null) return context.skip();
    const jsm = await jetstreamManager(nc);
    await jsm.streams.add({ name: 'WRONG', subjects: ['other.>'], max_age: 3600 * 1e9 });
    const report = await declareLayout(nc, scale({ stream: 'WRONG', subjectPrefix: 'wrong', leaseBucket: 'WRONG_leases', partitions: 1, replicas: 3 }));
    expect(report.problems.filter((l) => l.startsWith('stream WRONG'))).toEqual([
      'stream WRONG captures ["other.>"]; scale.subjectPrefix wrong needs exactly ["wrong.*.>"]',
      'stream WRONG has 1 replica(s); scale.replicas asks for 3',
    ]);
    // A single server cannot hold three replicas of the lease bucket either: one line.
    expect(report.problems.filter((l) => l.startsWith('key-value bucket WRONG_leases'))).toHaveLength(1);
    expect(report.notes).toEqual(['stream WRONG keeps messages only within max_age 3600 s: a worker that takes over a partition reads the stream after the partition\'s latest shared checkpoint, so the stream must keep at least store.checkpointSamples (1000) samples of every channel of a partition, and a partition with no checkpoint yet from its first message; what the limits removed before that is not in the results']);
    // A message limit below the checkpoint interval cannot cover it: said so.
    await jsm.streams.add({ name: 'SHORT', subjects: ['short.*.>'], max_msgs: 200 });
    const short = await declareLayout(nc, scale({ stream: 'SHORT', subjectPrefix: 'short', leaseBucket: 'SHORT_leases', partitions: 1 }));
    expect(short.notes).toEqual(['stream SHORT keeps at most 200 messages, fewer than store.checkpointSamples (1000): the retention does not cover the checkpoint interval, and a worker that takes over a partition would miss samples between its latest shared checkpoint and the oldest message kept']);
    const fresh = await declareLayout(nc, scale({ stream: 'TRIPLE', subjectPrefix: 'triple', leaseBucket: 'TRIPLE_leases', replicas: 3 }));
    expect(fresh.problems[0]).toMatch(/^stream TRIPLE: cannot be created with 3 replica\(s\): /);
  });
});

describe('partition leases on a key-value bucket', () => {
  it('spread evenly, rebalanced when a worker joins or leaves, never two owners of one partition', async (context) => {
    if (nc === null) return context.skip();
    const s = scale({ stream: 'LEASES', subjectPrefix: 'leases', leaseBucket: 'LEASES_leases', partitions: 6, leaseSeconds: 1.5 });
    const kv = await leaseBucket(nc, s);
    // Per partition, the owner's intervals [acquired, end], end being a loss, a release, or the deadline it last held.
    const log: { partition: number; worker: string; from: number; to: number }[] = [];
    const open = new Map<string, { from: number; deadline: number }>();
    const make = (worker: string) => {
      const leases: PartitionLeases = new PartitionLeases({
        kv,
        worker,
        partitions: s.partitions,
        leaseSeconds: s.leaseSeconds,
        handlers: {
          acquired: async (p, deadline) => {
            open.set(`${worker}/${p}`, { from: performance.now(), deadline });
          },
          renewed: (p, deadline) => {
            const o = open.get(`${worker}/${p}`);
            if (o) o.deadline = deadline;
            return true;
          },
          lost: (p) => close(worker, p, false),
          release: async (p) => close(worker, p, true),
          error: () => undefined,
        },
      });
      return leases;
    };
    const close = (worker: string, p: number, now: boolean) => {
      const o = open.get(`${worker}/${p}`);
      if (!o) return;
      open.delete(`${worker}/${p}`);
      // A loss is noticed late; the partition stopped being ours at the deadline.
      log.push({ partition: p, worker, from: o.from, to: now ? performance.now() : o.deadline });
    };
    const a = make('bay-a');
    const b = make('bay-b');
    const c = make('bay-c');
    await a.start();
    expect(a.owned()).toEqual([0, 1, 2, 3, 4, 5]);
    await b.start();
    await c.start();
    const shares = () => [a.owned(), b.owned(), c.owned()].map((o) => o.join(','));
    await waitFor(() => shares().join(' ') === '0,3 1,4 2,5', 10_000, 'an even spread over three workers', 50);
    // A worker leaves cleanly: the other two share its partitions.
    await c.stop();
    await waitFor(() => [a.owned(), b.owned()].map((o) => o.join(',')).join(' ') === '0,2,4 1,3,5', 10_000, 'a spread over two workers', 50);
    // A worker freezes (no heartbeat, nothing released): its partitions expire and move.
    const frozenAt = performance.now();
    b.suspend();
    await waitFor(() => a.owned().join(',') === '0,1,2,3,4,5', 10_000, 'the survivor to hold every partition', 50);
    const takeoverMs = performance.now() - frozenAt;
    // It wakes up: its first heartbeat finds the deadlines passed and gives the partitions up.
    await b.heartbeat();
    expect(b.owned()).toEqual([]);
    await a.stop();
    await b.stop();
    for (const [key, o] of open) log.push({ partition: Number(key.split('/')[1]), worker: key.split('/')[0] as string, from: o.from, to: o.deadline });
    // Never two owners: per partition, the intervals of different workers do not overlap.
    for (let p = 0; p < s.partitions; p++) {
      const intervals = log.filter((x) => x.partition === p).sort((x, y) => x.from - y.from);
      for (let i = 1; i < intervals.length; i++) {
        const previous = intervals[i - 1] as (typeof intervals)[number];
        const next = intervals[i] as (typeof intervals)[number];
        if (previous.worker !== next.worker) expect(next.from, `partition ${p}: ${next.worker} after ${previous.worker}`).toBeGreaterThan(previous.to);
      }
    }
    expect(log.filter((x) => x.worker === 'bay-b').length).toBeGreaterThanOrEqual(3);
    console.log(`leases: a frozen worker's partitions taken over ${Math.round(takeoverMs)} ms after it froze (lease ${s.leaseSeconds} s)`);
  }, 60_000);
});
