import { describe, expect, it } from 'vitest';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Daemon, daemonSubscriptions, type PublishedEvent } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import type { PlateauConfig } from '../../src/config/plateau-config.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import type { DerivedReportEntry } from '../../src/engine/derived/derived-record.js';
import type { TestPointRecord } from '../../src/engine/test-point-record.js';
import { testConfig } from '../helpers/daemon-config.js';
import { unique } from '../helpers/brokers.js';
import { correlatedRows } from '../engine/derived/correlated-channels.js';

// The daemon end to end with a derived result: samples go in through an in-memory sample source
// (the path of an MQTT message after the broker), test points, records, events and a restart on
// the same SQLite file.

const T0 = 1_764_000_000;
const NAMES = ['rig.a', 'rig.b', 'rig.c'];
const STEPS = 4000;
const COLUMNS = correlatedRows(new SeededRandom(5), STEPS);

function makeConfig(store: string, prefix: string): PlateauConfig {
  return testConfig({
    url: 'mqtt://127.0.0.1:9',
    prefix,
    clientId: unique('plateau'),
    store,
    // Loose channel targets (reached after a few hundred samples), a tighter one on the derived result.
    channels: { defaults: { window: { kind: 'growing' }, target: { U: 0.03 } } },
    extra: { derived: [{ name: 'rig.q', unit: 'kW', expression: 'rig.a - rig.b + 0.5 * rig.c', target: { U: 0.009 } }] },
  });
}

/** A daemon fed from memory: returns it with its source. */
function makeDaemon(config: PlateauConfig): { daemon: Daemon; source: MemorySampleSource } {
  const source = new MemorySampleSource(daemonSubscriptions(config));
  return { daemon: new Daemon(config, { source }), source };
}

/** Feeds steps [from, to) of the three channels, one message per sample, and commits every 50 steps. */
function feed(daemon: Daemon, source: MemorySampleSource, prefix: string, from: number, to: number, onCommit: (step: number) => void = () => {}): void {
  for (let i = from; i < to; i++) {
    const t = T0 + i * 0.1;
    NAMES.forEach((name, c) => source.publish(`${prefix}/${name}`, JSON.stringify({ v: (COLUMNS[c] as Float64Array)[i], t })));
    if (i % 50 === 49) {
      daemon.commitNow();
      onCommit(i);
    }
  }
  daemon.commitNow();
}

describe('derived results in the daemon', () => {
  it('a test point with a derived result is ready only when the derived result is at target; its record holds the derived entry; a restart gives the same result', async () => {
    const prefix = unique('derived');
    const store = join(mkdtempSync(join(tmpdir(), 'plateau-derived-')), 'state.sqlite');
    const config = makeConfig(store, prefix);
    const { daemon, source } = makeDaemon(config);
    await daemon.start();
    const events: PublishedEvent[] = [];
    daemon.onEvent((e) => events.push(e));
    daemon.startTestPoint({ id: 'tp-q', channels: NAMES, derived: ['rig.q'] });
    let channelsPrecise = -1;
    let derivedAtTarget = -1;
    let ready = -1;
    feed(daemon, source, prefix, 0, STEPS, (step) => {
      if (channelsPrecise < 0 && NAMES.every((n) => daemon.registry.get(n)?.pipeline.state === 'precise')) channelsPrecise = step;
      if (derivedAtTarget < 0 && daemon.derived.atTarget('rig.q') === true) derivedAtTarget = step;
      if (ready < 0 && daemon.testPoints.get('tp-q')?.state === 'ready') ready = step;
    });
    console.log(`channels precise at step ${channelsPrecise}, derived at target at ${derivedAtTarget}, test point ready at ${ready}`);
    // The channels were at their targets long before the derived result, and the test point waited for it.
    expect(channelsPrecise).toBeGreaterThan(0);
    expect(derivedAtTarget).toBeGreaterThan(channelsPrecise + 500);
    expect(ready).toBe(derivedAtTarget);

    // The record, as published and as stored.
    const readyEvent = events.find((e) => e.kind === 'test-point-ready') as PublishedEvent;
    const record = readyEvent.body.record as TestPointRecord;
    const entry = record.derived[0] as DerivedReportEntry;
    expect(entry.name).toBe('rig.q');
    expect(entry.atTarget).toBe(true);
    expect(entry.expandedUncertainty as number).toBeLessThanOrEqual(0.009);
    // JCGM 100:2008 7.2.4 wording, as the channels' statements (test-point-record.ts).
    expect(entry.statement).toMatch(/^rig\.q = \(1\.24\d+ ± 0\.00\d+\) kW, where the number following ± is the expanded uncertainty U = k·u with u = .* based on the t-distribution for ν_eff = \d+(\.\d+)? effective degrees of freedom, which defines an interval estimated to have a coverage probability of 95 %$/);
    expect(entry.budget.map((b) => b.channel)).toEqual(NAMES);
    expect(entry.monteCarlo !== null && 'validated' in entry.monteCarlo ? entry.monteCarlo.trials : 0).toBeGreaterThan(0);
    expect(typeof entry.bootstrap?.agrees).toBe('boolean');
    const stored = daemon.store.records('tp-q');
    expect(((stored[0]?.body as TestPointRecord).derived[0] as DerivedReportEntry).statement).toBe(entry.statement);
    const reached = events.filter((e) => e.source === 'rig.q' && e.kind === 'precision-reached');
    expect(reached).toHaveLength(1);

    // A clean restart on the same SQLite file: the channel windows come back from checkpoints and
    // the derived result from them, identical.
    const before = daemon.derived.snapshots();
    await daemon.stop();
    const { daemon: again } = makeDaemon(makeConfig(store, prefix));
    await again.start();
    const republished: PublishedEvent[] = [];
    again.onEvent((e) => republished.push(e));
    expect(again.derived.snapshots()).toEqual(before);
    again.commitNow();
    expect(republished.filter((e) => e.kind === 'precision-reached')).toHaveLength(0);
    await again.stop();
  }, 60_000);

  it('after a crash (no final checkpoint), the replay of the stored samples rebuilds the same derived result', async () => {
    const prefix = unique('derived-crash');
    const store = join(mkdtempSync(join(tmpdir(), 'plateau-derived-')), 'state.sqlite');
    const { daemon, source } = makeDaemon(makeConfig(store, prefix));
    await daemon.start();
    feed(daemon, source, prefix, 0, 300);
    daemon.startTestPoint({ id: 'tp-crash', channels: NAMES, derived: ['rig.q'] });
    feed(daemon, source, prefix, 300, 2300);
    const before = daemon.derived.snapshots();
    expect(before[0]?.ready).toBe(true);
    // Crash: the last commit is durable, nothing else happens (no final commit, no checkpoints).
    await source.stop();
    daemon.store.close();
    const { daemon: again } = makeDaemon(makeConfig(store, prefix));
    await again.start();
    expect(again.counters.restoredSamples).toBe(3 * 2300);
    expect(again.derived.snapshots()).toEqual(before);
    // The window starts at the test point's marks, as before the crash.
    expect(before[0]?.window?.startSeconds as number).toBeGreaterThanOrEqual(T0 + 30);
    await again.stop();
  }, 60_000);
});
