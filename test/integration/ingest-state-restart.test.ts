import { describe, expect, it } from 'vitest';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { parseConfig } from '../../src/config/load-config.js';
import { encodeFrame } from '../../src/ingest/binary-frame.js';
import { SparkplugPayload, SPARKPLUG_TYPES as T } from '../../src/ingest/sparkplug-schema.js';

// The Sparkplug B state of each edge node (aliases learned at birth, bdSeq, the seq of each node,
// needs-rebirth) and each channel's gap detector (expected interval, last time stamp, counters)
// survive a restart of the daemon on the same SQLite store: after the restart an NDATA naming its
// metrics by alias alone decodes without a rebirth, and a gap that spans the restart (samples and
// messages lost while the daemon was away, known by construction) is counted once.
// Sparkplug rules checked (Sparkplug 3.0.0 specification, as src/ingest/sparkplug-decoder.ts reads
// it): NDATA may carry aliases only, as announced in NBIRTH; seq goes up by one per message of the
// node, modulo 256, and a jump means that many messages were lost.

const T0 = 1_764_300_000_000; // ms

function setup() {
  const dir = mkdtempSync(join(tmpdir(), 'plateau-ingest-state-'));
  const config = parseConfig(
    {
      broker: { url: 'mqtt://127.0.0.1:1', clientId: 'ingest-state' },
      subscriptions: [
        { topic: 'spBv1.0/#', format: 'sparkplug' },
        { topic: 'rig/+', format: 'binary' },
      ],
      channels: { defaults: { window: { kind: 'growing' } } },
      store: { path: join(dir, 'state.sqlite') },
      http: { listen: '127.0.0.1:0' },
      log: { level: 'silent' },
    },
    'test',
  );
  // The broker's log (with durable positions, as a persistent session keeps), and a new daemon on
  // the same store file for each run of the daemon process.
  const source = new MemorySampleSource(daemonSubscriptions(config));
  const run = () => ({ daemon: new Daemon(config, { source }), source });
  return { run };
}

const spb = (seq: number, metrics: Record<string, unknown>[], ts: number) => Buffer.from(SparkplugPayload.encode(SparkplugPayload.fromObject({ timestamp: ts, seq, metrics })).finish());
const birth = (node: string, bdSeq: number) =>
  spb(0, [{ name: 'bdSeq', datatype: T.Int64, long_value: bdSeq }, { name: 'flow', alias: 1, datatype: T.Double, double_value: 1 }, { name: 'head', alias: 2, datatype: T.Float, float_value: 2 }], T0);
const data = (seq: number, s: number) => spb(seq % 256, [{ alias: 1, double_value: 10 + Math.sin(s) }, { alias: 2, float_value: 5 + Math.cos(s) }], T0 + s * 1000);
const frame = (first: number, n: number) => Buffer.from(encodeFrame('hx.t', T0 / 1000 + first * 0.1, 0.1, Array.from({ length: n }, (_, i) => 20 + Math.sin(first + i))));

describe('ingest state across a restart (SQLite)', () => {
  it('aliases, seq and gap detectors continue: an NDATA with aliases decodes without a rebirth, a gap across the restart is counted once', async () => {
    const { run } = setup();
    const first = run();
    await first.daemon.start();
    try {
      first.source.publish('spBv1.0/plant/NBIRTH/n1', birth('n1', 7));
      first.source.publish('spBv1.0/plant/NBIRTH/n2', birth('n2', 3));
      // n1: seq 1..250 (the restart comes near the wrap-around at 255).
      for (let s = 1; s <= 250; s++) first.source.publish('spBv1.0/plant/NDATA/n1', data(s, s));
      for (let s = 1; s <= 5; s++) first.source.publish('spBv1.0/plant/NDATA/n2', data(s, s));
      first.source.publish('rig/f', frame(0, 100));
      first.source.publish('rig/f', frame(100, 100)); // samples 0..199, none missing
      first.daemon.commitNow();
      expect(first.daemon.counters.gaps).toBe(0);
      expect(first.daemon.counters.rejected['unknown-alias']).toBe(0);
    } finally {
      await first.daemon.stop();
    }

    // While the daemon was away: n2's messages with seq 6, 7 and 8 and frame samples 200..202 were lost.
    const second = run();
    await second.daemon.start();
    try {
      const accepted = second.daemon.counters.accepted;
      expect(accepted).toBe(2 * 2 + 250 * 2 + 5 * 2 + 200); // the births carry a value of each metric
      // n1 goes on at seq 251 with aliases only, across the wrap-around of seq at 255.
      for (let s = 251; s <= 260; s++) second.source.publish('spBv1.0/plant/NDATA/n1', data(s, s));
      for (let s = 9; s <= 12; s++) second.source.publish('spBv1.0/plant/NDATA/n2', data(s, s));
      second.source.publish('rig/f', frame(203, 97));
      second.daemon.commitNow();
      const report = second.daemon.counterReport() as { sparkplug: Record<string, unknown> & { nodesNeedingRebirth: string[] }; gaps: { channels: Record<string, { gaps: number; missing: number }> } };
      // The aliases were known: every metric decoded, nothing refused, no rebirth needed for n1.
      expect(second.daemon.counters.rejected['unknown-alias']).toBe(0);
      expect(second.daemon.counters.rejected['bad-sequence']).toBe(0);
      expect(second.daemon.counters.accepted - accepted).toBe(10 * 2 + 4 * 2 + 97);
      // n2: the lost messages are one sequence gap of 3 messages, and the node needs a rebirth; n1 does not.
      expect(report.sparkplug.nodesNeedingRebirth).toEqual(['plant/n2']);
      expect(report.sparkplug).toMatchObject({ births: 2, sequenceGaps: 1, missedMessages: 3, needsRebirth: 1, unknownAliases: 0 });
      // The gaps: the frame's three samples by the time stamps (the interval learned before the
      // restart), n2's three messages on each of its channels by the sequence numbers, each once.
      const gaps = second.daemon.events(0, 100_000).filter((e) => e.kind === 'gap');
      expect(gaps.map((e) => [e.source, e.body.missing, e.body.source]).sort()).toEqual([
        ['hx.t', 3, 'time-stamps'],
        ['n2.flow', 3, 'sequence'],
        ['n2.head', 3, 'sequence'],
      ]);
      expect(gaps.find((e) => e.source === 'hx.t')?.body.from).toBe(new Date(T0 + 199 * 100).toISOString());
      expect(second.daemon.counters.gaps).toBe(3);
      expect(second.daemon.counters.missingSamples).toBe(9);
      // The sequence gap is not counted again by the time stamps of n2's next sample (4 s after its last).
      expect(report.gaps.channels['n2.flow']).toMatchObject({ gaps: 1, missing: 3 });
      expect(report.gaps.channels['hx.t']).toMatchObject({ gaps: 1, missing: 3 });
    } finally {
      await second.daemon.stop();
    }

    // And once more: the counts and the kept gaps (the trace's, the records') are still there.
    const third = run();
    await third.daemon.start();
    try {
      expect(third.daemon.counters.gaps).toBe(3);
      expect((third.daemon.counterReport() as { sparkplug: Record<string, unknown> }).sparkplug).toMatchObject({ births: 2, sequenceGaps: 1, missedMessages: 3, nodesNeedingRebirth: ['plant/n2'] });
      // The bdSeq of n1's birth is known: its NDEATH with that bdSeq is taken (not refused as stale).
      third.source.publish('spBv1.0/plant/NDEATH/n1', spb(0, [{ name: 'bdSeq', datatype: T.Int64, long_value: 7 }], T0 + 400_000));
      third.daemon.commitNow();
      expect(third.daemon.counters.rejected['stale-death']).toBe(0);
      expect((third.daemon.counterReport() as { sparkplug: Record<string, unknown> }).sparkplug).toMatchObject({ deaths: 1 });
      expect(third.daemon.channel('hx.t')?.trace(1000).gaps).toEqual([{ from: (T0 + 199 * 100) / 1000, to: (T0 + 203 * 100) / 1000, missing: 3, source: 'time-stamps' }]);
    } finally {
      await third.daemon.stop();
    }
  });
});
