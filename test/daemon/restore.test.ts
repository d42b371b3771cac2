import { describe, expect, it } from 'vitest';
import pino from 'pino';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { testConfig } from '../helpers/daemon-config.js';
import { lcgAr1 } from '../helpers/lcg-series.js';

// A restart decides per channel what to do with its checkpoint and logs it: loaded as it is,
// migrated, or set aside and the channel replayed from its stored samples (the options changed).

const T0 = 1_790_000_000;
const VALUES = Array.from(lcgAr1(5, 0.6, 3000), (x) => 12 + 0.02 * x);

async function run(path: string, estimator: 'geyer' | 'sokal', publish: boolean): Promise<{ daemon: Daemon; logs: Record<string, unknown>[] }> {
  const logs: Record<string, unknown>[] = [];
  const config = testConfig({ url: 'mqtt://127.0.0.1:9', prefix: 'rig', clientId: 'restore-test', store: path, channels: { defaults: { window: { kind: 'growing' }, estimator } } });
  const source = new MemorySampleSource(daemonSubscriptions(config));
  const logger = pino({ level: 'info' }, { write: (line: string) => logs.push(JSON.parse(line) as Record<string, unknown>) });
  const daemon = new Daemon(config, { source, logger });
  await daemon.start();
  if (publish) {
    VALUES.forEach((v, i) => source.publish('rig/press.line_bar', JSON.stringify({ v, t: T0 + i * 0.1 })));
    daemon.commitNow();
  }
  return { daemon, logs };
}

describe('restore', () => {
  it('logs per channel whether its checkpoint was loaded or set aside and replayed, and why', async () => {
    const path = join(mkdtempSync(join(tmpdir(), 'plateau-restore-')), 'state.sqlite');
    const first = await run(path, 'geyer', true);
    await first.daemon.stop(); // a checkpoint of every channel

    const changed = await run(path, 'sokal', false);
    const line = changed.logs.find((l) => l.channel === 'press.line_bar');
    expect(line?.checkpoint).toBe('replayed');
    expect(line?.msg).toBe('restore press.line_bar: checkpoint replayed: the checkpoint was made under other options (estimator)');
    expect(changed.logs.find((l) => l.msg === 'state rebuilt from the store')?.checkpoints).toEqual({ fresh: 0, loaded: 0, replayed: 1 });
    await changed.daemon.stop(); // a new checkpoint, under the new options

    const again = await run(path, 'sokal', false);
    expect(again.logs.find((l) => l.msg === 'state rebuilt from the store')?.checkpoints).toEqual({ fresh: 0, loaded: 1, replayed: 0 });
    expect(again.logs.some((l) => l.channel === 'press.line_bar')).toBe(false);
    // What it holds is what the new options give on the same samples.
    const pipeline = new ChannelPipeline('press.line_bar', again.daemon.channelOptions('press.line_bar'));
    VALUES.forEach((v, i) => pipeline.push(v, T0 + i * 0.1));
    expect(again.daemon.registry.get('press.line_bar')?.pipeline.snapshot()).toEqual(pipeline.snapshot());
    await again.daemon.stop();
  });

  it('a source with durable positions resumes after the position committed with the samples', async () => {
    const path = join(mkdtempSync(join(tmpdir(), 'plateau-restore-')), 'state.sqlite');
    const config = testConfig({ url: 'mqtt://127.0.0.1:9', prefix: 'rig', clientId: 'position-test', store: path });
    const stream = (count: number) => {
      const source = new MemorySampleSource(daemonSubscriptions(config), 'stream');
      for (let i = 0; i < count; i++) source.publish('rig/press.line_bar', JSON.stringify({ v: VALUES[i], t: T0 + i * 0.1 }));
      return source;
    };
    const first = new Daemon(config, { source: stream(100), logger: pino({ level: 'silent' }) });
    await first.start();
    first.commitNow();
    expect(first.store.position('stream')).toEqual({ source: 'stream', sequence: 100, durable: true });
    await first.stop();
    // A new consumer of the same stream (nothing acknowledged is shared with it): it starts after the stored position.
    const second = new Daemon(config, { source: stream(150), logger: pino({ level: 'silent' }) });
    await second.start();
    second.commitNow();
    expect(second.registry.get('press.line_bar')?.nextSeq).toBe(150);
    expect(second.counters.rejected.duplicate).toBe(0);
    expect(second.store.position('stream')?.sequence).toBe(150);
    await second.stop();
  });

  it('a restart replays at most store.checkpointSamples samples per channel, whatever its window, and ends where the live channel was', async () => {
    // Before, a checkpoint waited for two window lengths as well: neither channel here (a growing
    // window of 5300 samples, a sliding one of 4096) would have had one, and a restart replayed every sample.
    const path = join(mkdtempSync(join(tmpdir(), 'plateau-restore-')), 'state.sqlite');
    const CHECKPOINT = 1000;
    const config = testConfig({
      url: 'mqtt://127.0.0.1:9',
      prefix: 'rig',
      clientId: 'bounded-restart',
      store: path,
      channels: { defaults: { window: { kind: 'growing' } }, groups: [{ match: 'oven.*', window: { kind: 'sliding', samples: 4096 } }] },
      extra: { store: { path, checkpointSamples: CHECKPOINT } },
    });
    const source = new MemorySampleSource(daemonSubscriptions(config), 'stream');
    const first = new Daemon(config, { source, logger: pino({ level: 'silent' }) });
    await first.start();
    const N = 5300;
    const oven = Array.from(lcgAr1(9, 0.3, N), (x) => 180 + 0.5 * x);
    for (let i = 0; i < N; i++) {
      source.publish('rig/press.line_bar', JSON.stringify({ v: VALUES[i % VALUES.length], t: T0 + i * 0.1 }));
      source.publish('rig/oven.zone_degC', JSON.stringify({ v: oven[i], t: T0 + i * 0.1 }));
      // Commits as the commit cycle makes them, every few hundred samples.
      if (i % 250 === 249) first.commitNow();
    }
    first.commitNow();
    const live = Object.fromEntries(['press.line_bar', 'oven.zone_degC'].map((name) => [name, first.registry.get(name)?.pipeline.snapshot()]));
    // A crash: no clean stop (which would checkpoint every channel); the file is left as the last commit left it.
    first.store.close();

    const logs: Record<string, unknown>[] = [];
    const second = new Daemon(config, { source: new MemorySampleSource(daemonSubscriptions(config), 'stream'), logger: pino({ level: 'info' }, { write: (line: string) => logs.push(JSON.parse(line) as Record<string, unknown>) }) });
    await second.start();
    const rebuilt = logs.find((l) => l.msg === 'state rebuilt from the store');
    expect(rebuilt?.checkpoints).toEqual({ fresh: 0, loaded: 2, replayed: 0 });
    for (const name of ['press.line_bar', 'oven.zone_degC']) {
      const checkpoint = second.store.checkpoint(name);
      const replayed = N - (checkpoint?.seq ?? 0);
      expect(replayed, `${name}: samples replayed after the checkpoint`).toBeLessThanOrEqual(CHECKPOINT);
      expect(second.registry.get(name)?.pipeline.snapshot(), name).toEqual(live[name]);
    }
    expect(second.counters.restoredSamples).toBeLessThanOrEqual(2 * CHECKPOINT);
    await second.stop();
  });
});
