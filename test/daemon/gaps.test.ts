import { describe, expect, it } from 'vitest';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { parseConfig } from '../../src/config/load-config.js';
import { encodeFrame } from '../../src/ingest/binary-frame.js';
import { SparkplugPayload, SPARKPLUG_TYPES as T } from '../../src/ingest/sparkplug-schema.js';
import type { TestPointRecord } from '../../src/engine/test-point-record.js';

// Gaps through a running daemon: a stream with dropped samples (known by construction) gives gap
// events and counters, a configured rate is used as the expected interval, the test point's record
// says how many samples its window is missing, and Sparkplug sequence gaps feed the same counters.

function daemonWith(subscriptions: Record<string, unknown>[], channels: Record<string, unknown> = { defaults: { window: { kind: 'growing' } } }) {
  const dir = mkdtempSync(join(tmpdir(), 'plateau-gaps-'));
  const config = parseConfig({ broker: { url: 'mqtt://127.0.0.1:1', clientId: 'gaps' }, subscriptions, channels, store: { path: join(dir, 'state.sqlite') }, http: { listen: '127.0.0.1:0' }, log: { level: 'silent' } }, 'test');
  const source = new MemorySampleSource(daemonSubscriptions(config));
  return { daemon: new Daemon(config, { source }), source };
}

const T0 = 1_764_300_000;

describe('gaps in the daemon', () => {
  it('binary frames with dropped samples: gap events, counters, and the missing samples in the test point record', async () => {
    const { daemon, source } = daemonWith([{ topic: 'rig/+', format: 'binary' }]);
    await daemon.start();
    try {
      const send = (first: number, n: number) => source.publish('rig/f', Buffer.from(encodeFrame('hx.t', T0 + first * 0.1, 0.1, Array.from({ length: n }, (_, i) => 20 + Math.sin(first + i)))));
      send(0, 100);
      daemon.startTestPoint({ id: 'tp-gaps', channels: ['hx.t'] });
      send(100, 50); // samples 100..149
      send(153, 47); // 150, 151, 152 never came
      send(200, 100);
      send(301, 99); // 300 never came
      daemon.commitNow();
      const gaps = daemon.events(0, 10_000).filter((e) => e.kind === 'gap');
      expect(gaps.map((e) => [e.source, e.body.missing, e.body.source])).toEqual([['hx.t', 3, 'time-stamps'], ['hx.t', 1, 'time-stamps']]);
      expect(gaps[0]?.body.from).toBe(new Date((T0 + 149 * 0.1) * 1000).toISOString());
      expect(daemon.counters.gaps).toBe(2);
      expect(daemon.counters.missingSamples).toBe(4);
      // The channel's trace marks them (seconds since the epoch).
      expect(daemon.channel('hx.t')?.trace(1000).gaps).toEqual([
        { from: T0 + 149 * 0.1, to: T0 + 153 * 0.1, missing: 3, source: 'time-stamps' },
        { from: T0 + 299 * 0.1, to: T0 + 301 * 0.1, missing: 1, source: 'time-stamps' },
      ]);
      daemon.stopTestPoint('tp-gaps');
      const record = daemon.records('tp-gaps').at(-1)?.body as TestPointRecord;
      expect(record.entries[0]?.gaps).toMatchObject({ count: 2, missingSamples: 4 });
      expect((daemon.counterReport() as { gaps: { channels: Record<string, unknown> } }).gaps.channels['hx.t']).toMatchObject({ gaps: 2, missing: 4, learned: true });
    } finally {
      await daemon.stop();
    }
  });

  it('a configured rate is the expected interval: JSON samples at 2 Hz with one missing', async () => {
    const { daemon, source } = daemonWith([{ topic: 'rig/+', format: 'json', channel: '{2}' }], { defaults: { window: { kind: 'growing' }, rate: 2 } });
    await daemon.start();
    try {
      for (let i = 0; i < 5; i++) if (i !== 3) source.publish('rig/p', JSON.stringify({ v: i, t: T0 + i / 2 }));
      daemon.commitNow();
      expect(daemon.events(0, 100).filter((e) => e.kind === 'gap').map((e) => [e.body.missing, e.body.intervalMs])).toEqual([[1, 500]]);
    } finally {
      await daemon.stop();
    }
  });

  it('a Sparkplug sequence gap counts the lost messages on each channel of the node, once', async () => {
    const { daemon, source } = daemonWith([{ topic: 'spBv1.0/#', format: 'sparkplug' }]);
    await daemon.start();
    const payload = (seq: number, metrics: Record<string, unknown>[], ts: number) => Buffer.from(SparkplugPayload.encode(SparkplugPayload.fromObject({ timestamp: ts, seq, metrics })).finish());
    try {
      source.publish('spBv1.0/g/NBIRTH/n1', payload(0, [{ name: 'bdSeq', datatype: T.Int64, long_value: 0 }, { name: 'a', alias: 1, datatype: T.Double, double_value: 1 }, { name: 'b', alias: 2, datatype: T.Double, double_value: 1 }], T0 * 1000));
      for (let s = 1; s <= 20; s++) if (s !== 12 && s !== 13) source.publish('spBv1.0/g/NDATA/n1', payload(s, [{ alias: 1, double_value: s }, { alias: 2, double_value: -s }], T0 * 1000 + s * 1000));
      daemon.commitNow();
      const gaps = daemon.events(0, 1000).filter((e) => e.kind === 'gap');
      expect(gaps.map((e) => [e.source, e.body.missing, e.body.source])).toEqual([['n1.a', 2, 'sequence'], ['n1.b', 2, 'sequence']]);
      expect(daemon.counters.missingSamples).toBe(4);
    } finally {
      await daemon.stop();
    }
  });
});
