import { describe, expect, it } from 'vitest';
import type { KV } from '@nats-io/kv';
import type { JsMsg } from '@nats-io/jetstream';
import { listKeys, PartitionLeases } from '../../src/ingest/partition-leases.js';
import { JetStreamSampleSource } from '../../src/ingest/jetstream-sample-source.js';
import type { NatsLink } from '../../src/ingest/nats-link.js';
import type { SourceBatch } from '../../src/ports/sample-source.js';
import { DECODER_DEFAULTS } from '../../src/config/decoder-spec.js';

// Two ways a worker stalled on a 3-node cluster when a node was killed (found by running
// test/integration/jetstream-cluster.test.ts under load): a heartbeat waiting for ever on a key
// listing that never ended, and a delivery lost in the failover. Here each is made to happen
// without a server: a key-value bucket whose listing never ends, and deliveries with a number
// missing.

/** A bucket in memory: create fails on a live key, update on another revision; `keys` never ends when `stall`. */
function memoryKv(stall: { on: boolean }): KV {
  const entries = new Map<string, { value: string; revision: number }>();
  let revision = 0;
  const kv = {
    create: async (key: string, value: string) => {
      if (entries.has(key)) throw new Error('wrong last sequence');
      entries.set(key, { value, revision: ++revision });
      return revision;
    },
    update: async (key: string, value: string, previous: number) => {
      if (entries.get(key)?.revision !== previous) throw new Error('wrong last sequence');
      entries.set(key, { value, revision: ++revision });
      return revision;
    },
    put: async (key: string, value: string) => {
      entries.set(key, { value, revision: ++revision });
      return revision;
    },
    delete: async (key: string) => {
      entries.delete(key);
    },
    keys: async (filter: string) => {
      const prefix = filter.replace('*', '');
      const found = [...entries.keys()].filter((k) => k.startsWith(prefix));
      let stopped = false;
      let wake: (() => void) | null = null;
      return {
        stop: () => {
          stopped = true;
          wake?.();
        },
        async *[Symbol.asyncIterator]() {
          for (const key of found) yield key;
          // The listing's consumer lost with its node: neither the last key nor a heartbeat comes.
          while (stall.on && !stopped) await new Promise<void>((resolve) => (wake = resolve));
        },
      };
    },
  };
  return kv as unknown as KV;
}

describe('a heartbeat never waits for ever', () => {
  it('a key listing that does not end fails within the bound, with a message', async () => {
    const stall = { on: true };
    const kv = memoryKv(stall);
    await kv.put('w.bay-1', 'bay-1');
    const started = performance.now();
    await expect(listKeys(kv, 'w.*', 200)).rejects.toThrow('listing the keys w.* did not end within 200 ms');
    expect(performance.now() - started).toBeLessThan(1000);
    stall.on = false;
    expect(await listKeys(kv, 'w.*', 200)).toEqual(['w.bay-1']);
  });

  it('a worker whose listing stalls keeps beating and renewing its leases, and stops at once', async () => {
    const stall = { on: false };
    const kv = memoryKv(stall);
    const errors: string[] = [];
    const lost: number[] = [];
    const leases = new PartitionLeases({
      kv,
      worker: 'bay-1',
      partitions: 2,
      leaseSeconds: 1,
      handlers: {
        acquired: async () => undefined,
        renewed: () => true,
        lost: (p) => lost.push(p),
        release: async () => undefined,
        error: (error) => errors.push(error.message),
      },
    });
    await leases.start();
    expect(leases.owned()).toEqual([0, 1]);
    stall.on = true;
    // Heartbeats every 333 ms, each listing bounded by that period: they fail and are reported, and later ones run.
    await new Promise((resolve) => setTimeout(resolve, 2600));
    expect(errors.filter((m) => m.includes('did not end within 333 ms')).length).toBeGreaterThanOrEqual(2);
    // The renewals come before the listing in each heartbeat: the leases stay held, none ran out.
    expect(leases.owned()).toEqual([0, 1]);
    expect(lost).toEqual([]);
    const stopping = performance.now();
    await leases.stop();
    // Before the bound, stop() waited for the stalled heartbeat for ever (the test run's hang).
    expect(performance.now() - stopping).toBeLessThan(2500);
    expect(leases.owned()).toEqual([]);
  }, 10_000);
});

describe('a slow partition set-up does not hold up the renewals', () => {
  it('leases stay renewed while their partitions take longer than a lease to set up', async () => {
    const kv = memoryKv({ on: false });
    const lost: number[] = [];
    const renewals: number[] = [];
    let setUp = 0;
    const leases = new PartitionLeases({
      kv,
      worker: 'bay-1',
      partitions: 2,
      leaseSeconds: 1,
      handlers: {
        // Restoring a partition's channels from its shared checkpoint, on a busy cluster: 2.5 leases.
        acquired: async () => {
          await new Promise((resolve) => setTimeout(resolve, 2500));
          setUp++;
        },
        renewed: (p) => {
          renewals.push(p);
          return true;
        },
        lost: (p) => lost.push(p),
        release: async () => undefined,
        error: () => undefined,
      },
    });
    await leases.start();
    await new Promise((resolve) => setTimeout(resolve, 3000));
    // Before, the heartbeat waited for the set-up: no renewal for 2.5 s, and both leases ran out.
    expect(setUp).toBe(2);
    expect(lost).toEqual([]);
    expect(renewals.length).toBeGreaterThanOrEqual(6);
    expect(leases.owned()).toEqual([0, 1]);
    await leases.stop();
  }, 10_000);
});

/** A delivered message as the client hands it over: stream sequence, delivery number, subject. */
function message(seq: number, delivery: number): JsMsg {
  return {
    seq,
    subject: `part.0.rig.a.flow`,
    data: new TextEncoder().encode(JSON.stringify({ v: seq })),
    info: { deliverySequence: delivery, streamSequence: seq },
    ack: () => undefined,
    nak: () => undefined,
  } as unknown as JsMsg;
}

describe('a lost delivery stops the partition instead of moving the sequence fence past it', () => {
  it('hands out consecutive deliveries, and nothing from the first one after a missing number', async () => {
    const link = { servers: ['nats://127.0.0.1:1'], connected: true, reconnects: 0, open: async () => undefined, onConnection: () => () => undefined } as unknown as NatsLink;
    const source = new JetStreamSampleSource({ link, stream: 'S', subjectPrefix: 'part', subscriptions: [{ ...DECODER_DEFAULTS, topic: 'rig/+/+', format: 'json', channel: '{3}' }], ownsLink: false });
    const batches: SourceBatch[] = [];
    const errors: string[] = [];
    await source.start({ batch: (b) => batches.push(b), connection: () => undefined, error: (e) => errors.push(e.message) });
    // The partition as assign() leaves it, without a server (its reader is fed by hand below).
    const partition = { index: 0, name: source.partitionName(0), epoch: 1, messages: { stop: () => undefined }, reader: null, deadline: Number.POSITIVE_INFINITY, expired: false, nextDelivery: 0, outstanding: new Map(), tokens: new Set() };
    (source as unknown as { partitions: Map<number, unknown> }).partitions.set(0, partition);
    const take = (msg: JsMsg) => (source as unknown as { take(p: unknown, m: JsMsg): void }).take(partition, msg);
    take(message(10, 1));
    take(message(12, 2));
    // A redelivery numbered again from behind (a new consumer leader whose state lagged): handed out, the fence judges it.
    take(message(12, 2));
    take(message(15, 3));
    expect(batches.map((b) => b.deliveries[0]?.position.sequence)).toEqual([10, 12, 12, 15]);
    // Delivery 4 (stream sequence 17, say) never arrived; 5 does: not handed out, the partition stops.
    take(message(19, 5));
    take(message(20, 6));
    expect(batches).toHaveLength(4);
    expect(errors).toEqual(['partition 0: delivery 5 came where 4 was due (a delivery was lost, as when a NATS node goes down): the partition is read again from the last stream sequence taken']);
    expect(source.gaps).toBe(1);
    // The lease's next renewal learns that the partition must be taken again (it is then read from the worker's own position).
    expect(source.setDeadline(0, Number.POSITIVE_INFINITY)).toBe(false);
  });
});
