import { afterEach, describe, expect, it } from 'vitest';
import Database from 'better-sqlite3';
import pino from 'pino';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import type { PlateauConfig } from '../../src/config/plateau-config.js';
import type { StoredEvent } from '../../src/ports/store.js';
import type { VolatileEvent } from '../../src/ports/publisher.js';
import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { testConfig } from '../helpers/daemon-config.js';
import { storedSeries } from '../helpers/stored-series.js';

// The commit cycle against real SQLite failures, with the sample source in memory so that every
// acknowledgement can be checked: a failed commit keeps its batch, nothing is acknowledged that is
// not committed, the daemon is unhealthy while commits fail, retries with backoff and recovers by
// itself, with nothing lost and nothing counted twice. (test/integration/commit-failure.test.ts
// does the same over the embedded broker and Mosquitto.)

const T0 = 1_790_000_000;
const CHANNELS = ['cell.load_N', 'cell.temp_degC'];

interface Rig {
  config: PlateauConfig;
  path: string;
  clock: ManualClock;
  source: MemorySampleSource;
  store: SqliteStore;
  daemon: Daemon;
  published: Map<string, number[]>;
  events: StoredEvent[];
  volatile: VolatileEvent[];
  next: number;
}

const open: Daemon[] = [];
afterEach(async () => {
  for (const daemon of open.splice(0)) await daemon.stop().catch(() => undefined);
});

async function rig(options: { inTransaction?: () => void; path?: string; source?: MemorySampleSource } = {}): Promise<Rig> {
  const path = options.path ?? join(mkdtempSync(join(tmpdir(), 'plateau-commit-')), 'state.sqlite');
  const config = testConfig({ url: 'mqtt://127.0.0.1:9', prefix: 'rig', clientId: 'commit-test', store: path });
  const clock = new ManualClock(T0 * 1000);
  const source = options.source ?? new MemorySampleSource(daemonSubscriptions(config));
  const store = new SqliteStore(path, options.inTransaction ? { inTransaction: options.inTransaction } : {});
  const daemon = new Daemon(config, { clock, source, store, logger: pino({ level: 'silent' }), commitRetry: { initialMs: 100, maxMs: 800 } });
  await daemon.start();
  open.push(daemon);
  const r: Rig = { config, path, clock, source, store, daemon, published: new Map(CHANNELS.map((c) => [c, []])), events: [], volatile: [], next: 0 };
  daemon.onEvent((event) => r.events.push(event));
  daemon.onVolatileEvent((e) => r.volatile.push(e));
  return r;
}

/** Publishes `count` steps, one message per channel per step. */
function publish(r: Rig, count: number): void {
  for (let k = 0; k < count; k++, r.next++) {
    CHANNELS.forEach((channel, c) => {
      const value = 20 + c + Math.sin(r.next / 7 + c);
      (r.published.get(channel) as number[]).push(value);
      r.source.publish(`rig/${channel}`, JSON.stringify({ v: value, t: T0 + r.next * 0.1 }));
    });
  }
}

function expectStoredExactlyOnce(r: Rig): void {
  for (const channel of CHANNELS) {
    const stored = storedSeries(r.store, channel);
    expect(stored.contiguous, `${channel}: no gap, no repeat`).toBe(true);
    expect(stored.values, channel).toEqual(r.published.get(channel));
    expect(r.daemon.registry.get(channel)?.pipeline.totalReceived).toBe((r.published.get(channel) as number[]).length);
  }
}

describe('a commit that fails', () => {
  it('SQLITE_FULL (max_page_count): keeps its batch, acknowledges nothing, reports unhealthy, retries with backoff and recovers by itself', async () => {
    const r = await rig();
    publish(r, 50);
    expect(r.daemon.commitNow()).toBe(true);
    expect(r.source.unacknowledgedMessages).toBe(0);
    expect(r.daemon.health().status).toBe('ok');
    // The file may not grow by a page from now on.
    r.store.pragma(`max_page_count = ${r.store.pragma('page_count') as number}`);
    publish(r, 400);
    expect(r.daemon.commitNow()).toBe(false);
    const health = r.daemon.health();
    expect(health.status).toBe('failing');
    expect(health.store.lastError?.code).toBe('ERR_STORE_FULL');
    expect(health.store.pendingSamples).toBe(800);
    expect(r.source.unacknowledgedMessages).toBe(800);
    expect(storedSeries(r.store, 'cell.load_N').values).toHaveLength(50);
    // The alert went out at once, unstored; nothing stored was published meanwhile.
    expect(r.volatile.map((e) => e.kind)).toEqual(['store-failing']);
    expect(r.volatile[0]?.body.error).toMatchObject({ code: 'ERR_STORE_FULL' });
    // More samples arrive during the outage: they join the batch; retries keep failing, with backoff.
    publish(r, 100);
    r.clock.advance(100);
    expect(r.daemon.health().store.attempts).toBe(2);
    r.clock.advance(150);
    expect(r.daemon.health().store.attempts).toBe(2); // the next retry is 200 ms after the second
    r.clock.advance(50);
    expect(r.daemon.health().store.attempts).toBe(3);
    expect(r.source.unacknowledgedMessages).toBe(1000);
    // Commands that change durable state are refused meanwhile.
    expect(() => r.daemon.startTestPoint({ channels: CHANNELS })).toThrow(expect.objectContaining({ code: 'ERR_STORE_UNAVAILABLE' }));
    // Space again: the next retry commits everything, once, and acknowledges it.
    r.store.pragma('max_page_count = 1073741823');
    r.clock.advance(400);
    expect(r.daemon.health().status).toBe('ok');
    expect(r.source.unacknowledgedMessages).toBe(0);
    expectStoredExactlyOnce(r);
    const recovered = r.events.filter((e) => e.kind === 'store-recovered');
    expect(recovered).toHaveLength(1);
    expect(recovered[0]?.body).toMatchObject({ failedAttempts: 3, samples: 1000, error: { code: 'ERR_STORE_FULL' } });
    expect(r.volatile).toHaveLength(1);
  });

  it('a database locked by another writer (SQLITE_BUSY): unhealthy while the lock is held, everything committed once when it is released', async () => {
    const r = await rig();
    publish(r, 20);
    r.daemon.commitNow();
    const other = new Database(r.path);
    other.exec('BEGIN IMMEDIATE');
    publish(r, 30);
    expect(r.daemon.commitNow()).toBe(false);
    expect(r.daemon.health().store.lastError?.code).toBe('ERR_STORE_BUSY');
    expect(r.source.unacknowledgedMessages).toBe(60);
    r.clock.advance(100);
    expect(r.daemon.health().status).toBe('failing');
    other.exec('COMMIT');
    other.close();
    r.clock.advance(200);
    expect(r.daemon.health().status).toBe('ok');
    expect(r.source.unacknowledgedMessages).toBe(0);
    expectStoredExactlyOnce(r);
  });

  it('a stop during an outage acknowledges nothing; the next start gets the messages again and counts each sample once', async () => {
    const r = await rig();
    publish(r, 100);
    r.daemon.commitNow();
    r.store.pragma(`max_page_count = ${r.store.pragma('page_count') as number}`);
    publish(r, 300);
    expect(r.daemon.commitNow()).toBe(false);
    await r.daemon.stop(); // its final commit fails too
    expect(r.source.unacknowledgedMessages).toBe(600);
    // The same source (the broker's persistent session) and file: a new daemon.
    const again = await rig({ path: r.path, source: r.source });
    again.published = r.published;
    again.next = r.next;
    again.daemon.commitNow();
    expect(again.source.unacknowledgedMessages).toBe(0);
    expectStoredExactlyOnce(again);
    // And the statistics are those of one uninterrupted pass over the samples.
    for (const channel of CHANNELS) {
      const pipeline = new ChannelPipeline(channel, again.daemon.channelOptions(channel));
      (r.published.get(channel) as number[]).forEach((v, i) => pipeline.push(v, T0 + i * 0.1));
      expect(again.daemon.registry.get(channel)?.pipeline.snapshot()).toEqual(pipeline.snapshot());
    }
  });

  it('errors injected at random commits under load (inside the real transaction), with reconnects: nothing lost, nothing doubled, unhealthy and recovered many times', async () => {
    const random = new SeededRandom(2024);
    let inject = true;
    const r = await rig({ inTransaction: () => {
      if (inject && random.uniform() < 0.35) throw new Error('injected fault');
    } });
    let failures = 0;
    let previous = 'ok';
    r.daemon.onHealth((health) => {
      if (health.status === 'failing' && previous !== 'failing') failures++;
      previous = health.status;
    });
    for (let burst = 0; burst < 400; burst++) {
      publish(r, 1 + Math.floor(random.uniform() * 20));
      if (random.uniform() < 0.5) r.daemon.commitNow();
      // Now and then the connection drops: what it held unacknowledged comes again (redeliveries).
      if (random.uniform() < 0.05) r.source.reconnect();
      r.clock.advance(Math.floor(random.uniform() * 300));
      // Never more acknowledged than stored.
      const stored = storedSeries(r.store, CHANNELS[0] as string).values.length;
      const acknowledged = 2 * r.next - r.source.unacknowledgedMessages;
      expect(acknowledged).toBeLessThanOrEqual(2 * stored);
    }
    inject = false;
    r.clock.advance(1000);
    r.daemon.commitNow();
    expect(failures).toBeGreaterThan(10);
    expect(r.daemon.health().status).toBe('ok');
    expect(r.source.unacknowledgedMessages).toBe(0);
    expectStoredExactlyOnce(r);
    expect(r.events.filter((e) => e.kind === 'store-recovered')).toHaveLength(failures);
    expect(r.daemon.counters.accepted).toBe(2 * r.next);
    // The redeliveries were recognised by their durable sequence and skipped (the delivery fence),
    // before the channels' duplicate rule would have had to catch them.
    expect(r.daemon.counterReport().redeliveriesSkipped).toBeGreaterThan(0);
    expect(r.daemon.counters.rejected.duplicate).toBe(0);
  });
});
