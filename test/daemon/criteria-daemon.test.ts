import { afterEach, describe, expect, it } from 'vitest';
import pino from 'pino';
import { parseConfig } from '../../src/config/load-config.js';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Store } from '../../src/ports/store.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import type { Publisher } from '../../src/ports/publisher.js';
import type { StoredEvent } from '../../src/ports/store.js';
import type { TestPointRecord } from '../../src/engine/test-point-record.js';

// The stability rules in the daemon: their events go out through the event feed (the publishers
// the MQTT topic and the WebSocket hub follow); a test point under the policy "both" becomes ready
// only when the statistical verdict and every rule hold, and its record states which rules held
// over the recorded window. The checks are the readiness policy's own definition (no outside
// source); the rig (chiller loop CL-3) and its signal are invented.

const T0 = 1_790_000_000; // seconds

const CONFIG = {
  broker: { url: 'embedded' },
  subscriptions: [{ topic: 'rig/cl3/+', format: 'json', channel: 'cl3.{3}' }],
  channels: {
    defaults: { window: { kind: 'growing' } },
    groups: [
      {
        match: 'cl3.supply_degC',
        unit: 'degC',
        criteria: {
          policy: 'both',
          rules: [
            { name: 'band', statistic: 'range', windowSeconds: 300, tolerance: 0.5 },
            { name: 'on-set-point', statistic: 'setpoint-deviation', windowSeconds: 300, setPoint: 'test-point', tolerance: 0.3, holdSeconds: 240 },
          ],
        },
      },
    ],
  },
  store: { path: ':memory:' },
  log: { level: 'silent' },
};

const daemons: Daemon[] = [];
afterEach(async () => {
  for (const d of daemons.splice(0)) await d.stop();
});

async function start(store: Store = new MemoryStore(), document: unknown = CONFIG): Promise<{ daemon: Daemon; source: MemorySampleSource; clock: ManualClock; published: StoredEvent[]; fed: StoredEvent[] }> {
  const config = parseConfig(document);
  const source = new MemorySampleSource(daemonSubscriptions(config));
  const clock = new ManualClock(T0 * 1000);
  const published: StoredEvent[] = [];
  const publisher: Publisher = { event: (e) => published.push(e), volatileEvent: () => {}, status: () => {} };
  const daemon = new Daemon(config, { logger: pino({ level: 'silent' }), clock, store, source, publisher });
  daemons.push(daemon);
  await daemon.start();
  const fed: StoredEvent[] = [];
  daemon.onEvent((e) => fed.push(e));
  return { daemon, source, clock, published, fed };
}

describe('stability rules in the daemon', () => {
  it('events go out through the feed; a test point under "both" is ready only when both hold, and its record shows the rules', async () => {
    const { daemon, source, clock, published, fed } = await start();
    const random = new SeededRandom(5);
    let noise = 0;
    let t = T0;
    /** `seconds` of the supply temperature at 10 Hz: 7.0 degC with AR(1) noise, committed each second. */
    const feed = (seconds: number, onSecond?: () => void) => {
      for (let s = 0; s < seconds; s++) {
        for (let k = 0; k < 10; k++) {
          noise = 0.5 * noise + 0.02 * random.normal();
          t += 0.1;
          source.publish('rig/cl3/supply_degC', JSON.stringify({ v: 7 + noise, t }));
        }
        clock.advance(Math.max(0, Math.round(t * 1000) - clock.now()));
        daemon.commitNow();
        onSecond?.();
      }
    };
    // Before the test point: the band rule holds already (no set point yet, so the other cannot).
    feed(400);
    const channel = daemon.channel('cl3.supply_degC')!;
    expect(channel.summary().criteria.map((c) => [c.name, c.holds])).toEqual([
      ['band', true],
      ['on-set-point', false],
    ]);
    const holds = fed.filter((e) => e.kind === 'criterion-holds');
    expect(holds.map((e) => e.body.rule)).toEqual(['band']);
    expect(holds[0]).toMatchObject({ source: 'cl3.supply_degC', body: { channel: 'cl3.supply_degC', rule: 'band', tolerance: 0.5 } });
    // The same events, in the same order, to the publisher the MQTT topic is written by.
    expect(published.filter((e) => e.kind.startsWith('criterion-')).map((e) => e.id)).toEqual(fed.filter((e) => e.kind.startsWith('criterion-')).map((e) => e.id));

    const view = daemon.startTestPoint({ id: 'tp-cl3-7', channels: ['cl3.supply_degC'], setPoints: { 'cl3.supply_degC': 7 } });
    expect(view.setPoints).toEqual({ 'cl3.supply_degC': 7 });
    let statisticalFirst: number | null = null;
    let readyAt: number | null = null;
    feed(400, () => {
      const summary = channel.summary();
      const rulesHold = summary.criteria.every((c) => c.holds);
      const point = daemon.testPoint('tp-cl3-7');
      if (summary.verdict.ready && !rulesHold && statisticalFirst === null) statisticalFirst = t;
      if (point?.state === 'ready' && readyAt === null) {
        readyAt = t;
        // Ready: both hold now.
        expect(summary.verdict.ready && rulesHold).toBe(true);
      } else if (point?.state === 'running') expect(summary.verdict.ready && rulesHold).toBe(false);
    });
    // The statistical verdict came first; the test point waited for the rule's 240 s hold.
    expect(statisticalFirst).not.toBeNull();
    expect(readyAt).not.toBeNull();
    expect(readyAt! - statisticalFirst!).toBeGreaterThan(60);
    expect(readyAt! - (T0 + 400)).toBeGreaterThanOrEqual(240);

    const record = daemon.records('tp-cl3-7')[0]?.body as TestPointRecord;
    const entry = record.entries[0]!;
    expect(entry.criteria).toMatchObject({ policy: 'both', ready: true, statisticalReady: true, rulesReady: true });
    const [band, onSetPoint] = entry.criteria!.rules;
    // The band rule held before the test point began: over the whole recorded window.
    expect(band).toMatchObject({ name: 'band', holds: true, heldOverWindow: true, tolerance: 0.5 });
    expect(band!.margin).toBeCloseTo(0.5 - band!.value!, 12);
    // The set-point rule began with the test point's set point and held only after its hold: not over the whole window.
    expect(onSetPoint).toMatchObject({ name: 'on-set-point', holds: true, heldOverWindow: false, setPoint: 7, tolerance: 0.3 });
    expect(onSetPoint!.holdsFrom).toBeGreaterThan(Date.parse(entry.windowStartTime!) / 1000);
  });

  it('the MQTT command topic takes set points too', async () => {
    const { daemon, source } = await start();
    // A test point names channels the daemon has heard from (an unseen one is refused).
    source.publish('rig/cl3/supply_degC', JSON.stringify({ v: 7, t: T0 }));
    daemon.commitNow();
    source.publish('plateau/command/test-point/start', JSON.stringify({ id: 'tp-mqtt', channels: ['cl3.supply_degC'], setPoints: { 'cl3.supply_degC': 6.5 } }));
    daemon.commitNow();
    expect(daemon.testPoint('tp-mqtt')?.setPoints).toEqual({ 'cl3.supply_degC': 6.5 });
    expect(daemon.channel('cl3.supply_degC')!.snapshot().criteria[1]).toMatchObject({ name: 'on-set-point', setPoint: 6.5 });
  });

  it('across a restart on SQLite: the set point and the rules come back, from the checkpoint or replayed with the set-point mark', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'plateau-criteria-'));
    try {
      const file = join(dir, 'cl3.sqlite');
      const first = await start(new SqliteStore(file));
      let t = T0;
      const feed = (d: { daemon: Daemon; source: MemorySampleSource; clock: ManualClock }, seconds: number) => {
        for (let s = 0; s < seconds; s++) {
          for (let k = 0; k < 10; k++) {
            t += 0.1;
            d.source.publish('rig/cl3/supply_degC', JSON.stringify({ v: 7 + 0.05 * Math.sin(t), t }));
          }
          d.clock.advance(Math.max(0, Math.round(t * 1000) - d.clock.now()));
          d.daemon.commitNow();
        }
      };
      feed(first, 60);
      first.daemon.startTestPoint({ id: 'tp-r', channels: ['cl3.supply_degC'], setPoints: { 'cl3.supply_degC': 7 } });
      feed(first, 600);
      const before = first.daemon.channel('cl3.supply_degC')!.snapshot().criteria;
      expect(before.map((c) => c.holds)).toEqual([true, true]);
      await first.daemon.stop();
      daemons.splice(daemons.indexOf(first.daemon), 1);
      // Loaded from the checkpoint the clean stop wrote.
      const second = await start(new SqliteStore(file));
      expect(second.daemon.channel('cl3.supply_degC')!.snapshot().criteria).toEqual(before);
      await second.daemon.stop();
      daemons.splice(daemons.indexOf(second.daemon), 1);
      // Other rules: the checkpoint is set aside and the channel replayed from SQLite, the set point at its mark.
      const changed = JSON.parse(JSON.stringify(CONFIG));
      changed.channels.groups[0].criteria.rules[0].tolerance = 0.6;
      const third = await start(new SqliteStore(file), changed);
      const after = third.daemon.channel('cl3.supply_degC')!.snapshot().criteria;
      expect(after[1]).toEqual(before[1]);
      expect(after[0]).toMatchObject({ name: 'band', tolerance: 0.6, holds: true });
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('a set point for a channel that is not in the test point is refused', async () => {
    const { daemon, source } = await start();
    source.publish('rig/cl3/supply_degC', JSON.stringify({ v: 7, t: T0 }));
    daemon.commitNow();
    expect(() => daemon.startTestPoint({ channels: ['cl3.supply_degC'], setPoints: { 'cl3.return_degC': 7 } })).toThrow(/set point for "cl3.return_degC": not a channel of this test point/);
  });
});
