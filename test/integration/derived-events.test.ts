import { describe, expect, it } from 'vitest';
import pino from 'pino';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { analyzeFile, channelOptionsFromFlags } from '../../src/cli/analyze.js';
import { parseDeriveFlags } from '../../src/cli/analyze-derived.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import type { StoredEvent } from '../../src/ports/store.js';
import { testConfig } from '../helpers/daemon-config.js';
import { tempFile } from '../helpers/cli.js';
import { correlatedRows } from '../engine/derived/correlated-channels.js';

// The precision verdict of derived results lives in the engine (src/engine/derived/
// derived-monitor.ts), so `plateau analyze` raises the same derived events as the daemon on the same
// samples: the daemon brings its results up to date at each commit (here after bursts of random
// length), analyze after every row, and the checks still fall on the same rows with the inputs
// judged at the same samples.

const T0 = 1_764_000_000;
const STEPS = 8000;
const NAMES = ['rig.a', 'rig.b', 'rig.c'];
const EXPRESSION = 'rig.a - rig.b + 0.5 * rig.c';
const TARGET = 0.012; // relative U: about 0.015 on a value near 1.25

function samples(): Float64Array[] {
  const columns = correlatedRows(new SeededRandom(21), STEPS);
  // A warm-up on the first channel: the derived result must wait for it to be steady.
  for (let i = 0; i < 300; i++) (columns[0] as Float64Array)[i] = ((columns[0] as Float64Array)[i] as number) + 0.3 * (1 - i / 300);
  return columns;
}

describe('derived events: the daemon and plateau analyze', () => {
  it('raise the same precision-reached events, at the same rows, on the same samples', async () => {
    const columns = samples();
    const config = testConfig({
      url: 'mqtt://127.0.0.1:9',
      prefix: 'rig',
      clientId: 'derived-events',
      channels: { defaults: { window: { kind: 'growing' }, target: { relativeU: TARGET } } },
      extra: { derived: [{ name: 'rig.q', expression: EXPRESSION, target: { relativeU: TARGET } }] },
    });
    const source = new MemorySampleSource(daemonSubscriptions(config));
    const daemon = new Daemon(config, { source, store: new MemoryStore(), logger: pino({ level: 'silent' }) });
    await daemon.start();
    const events: StoredEvent[] = [];
    daemon.onEvent((event) => events.push(event));
    const random = new SeededRandom(4);
    let nextCommit = 1;
    for (let i = 0; i < STEPS; i++) {
      const t = T0 + i * 0.1;
      NAMES.forEach((name, c) => source.publish(`rig/${name}`, JSON.stringify({ v: (columns[c] as Float64Array)[i], t })));
      if (i === nextCommit) {
        daemon.commitNow();
        nextCommit = i + 1 + random.integer(300);
      }
    }
    daemon.commitNow();
    await daemon.stop();
    const fromDaemon = events.filter((e) => e.source === 'rig.q' && e.kind === 'precision-reached').map((e) => ({ kind: e.kind, at: e.at, rows: e.body.rows, value: e.body.value, expandedUncertainty: e.body.expandedUncertainty }));

    const file = tempFile('derived-events.csv', `${['time', ...NAMES].join(',')}\n${Array.from({ length: STEPS }, (_, i) => [T0 + i * 0.1, ...columns.map((c) => c[i])].join(',')).join('\n')}\n`);
    const report = await analyzeFile(file, channelOptionsFromFlags({ 'target-rel': String(TARGET) }), {}, parseDeriveFlags([`rig.q=${EXPRESSION}`], 0));
    const entry = report.derived[0];
    const fromAnalyze = (entry?.events ?? []).map((e) => ({ kind: e.kind, at: e.at, rows: e.rows, value: e.value, expandedUncertainty: e.expandedUncertainty }));

    expect(fromDaemon.length).toBeGreaterThan(0);
    // The first input became steady late (its warm-up): the event waited for it.
    const aSteady = events.find((e) => e.source === 'rig.a' && e.kind === 'steady');
    expect(aSteady?.at as number).toBeGreaterThan(300);
    // (A derived event's `at` counts the rows in the inputs' common windows, which begin at their
    // warm-up cuts, so it is not a sample index: the order of the events tells.)
    const firstDerived = events.find((e) => e.source === 'rig.q' && e.kind === 'precision-reached');
    expect(events.indexOf(firstDerived as StoredEvent)).toBeGreaterThan(events.indexOf(aSteady as StoredEvent));
    expect(fromAnalyze).toEqual(fromDaemon);
    // The channels' own events agree as well (as test/integration/daemon-analyze.test.ts checks over MQTT).
    for (const name of NAMES) {
      const live = events.filter((e) => e.source === name && e.kind !== 'stale' && e.kind !== 'fresh').map((e) => `${e.kind}@${e.at}`);
      const replay = (report.channels.find((c) => c.name === name)?.events ?? []).map((e) => `${e.kind}@${e.at}`);
      expect(live).toEqual(replay);
    }
  });
});
