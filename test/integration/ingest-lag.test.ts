import { describe, expect, it } from 'vitest';
import pino from 'pino';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import { testConfig } from '../helpers/daemon-config.js';
import { unique } from '../helpers/brokers.js';

// Ingest lag is the excess of (arrival - time stamp) over its usual value, so a rig clock that runs
// behind (or a replay of old data) does not raise it, and samples handled later and later do.
describe('ingest lag', () => {
  it('ignores a constant clock offset, and warns once when samples fall behind', async () => {
    const clock = new ManualClock(1_764_800_000_000);
    const prefix = unique('lag');
    const config = testConfig({ url: 'mqtt://127.0.0.1:9', prefix, clientId: unique('lag') });
    const source = new MemorySampleSource(daemonSubscriptions(config));
    const daemon = new Daemon(config, { clock, lagWarningMs: 2000, store: new MemoryStore(), source, logger: pino({ level: 'silent' }) });
    await daemon.start();
    const warnings: string[] = [];
    daemon.onEvent((event) => {
      if (event.kind === 'ingest-lag') warnings.push(event.kind);
    });
    // A rig clock one hour behind, steady: no lag.
    for (let i = 0; i < 100; i++) {
      clock.advance(100);
      source.publish(`${prefix}/bath`, JSON.stringify({ v: 60, t: (clock.now() - 3_600_000) / 1000 }));
    }
    daemon.commitNow();
    expect(daemon.counters.ingestLagMs).toBe(0);
    expect(warnings).toHaveLength(0);
    // Now each sample is handled later than the last: the lag grows and one warning is raised.
    let stamp = clock.now() - 3_600_000;
    for (let i = 0; i < 60; i++) {
      clock.advance(200);
      stamp += 100;
      source.publish(`${prefix}/bath`, JSON.stringify({ v: 60, t: stamp / 1000 }));
    }
    daemon.commitNow();
    expect(daemon.counters.ingestLagMs).toBeGreaterThan(5000);
    expect(warnings).toHaveLength(1);
    await daemon.stop();
  });

  it('is judged per source: one publisher whose clock is behind (and slipping) is not the daemon falling behind', async () => {
    const clock = new ManualClock(1_764_800_000_000);
    const prefix = unique('lag');
    const config = testConfig({ url: 'mqtt://127.0.0.1:9', prefix, clientId: unique('lag') });
    const source = new MemorySampleSource(daemonSubscriptions(config));
    const daemon = new Daemon(config, { clock, lagWarningMs: 2000, store: new MemoryStore(), source, logger: pino({ level: 'silent' }) });
    await daemon.start();
    const warnings: string[] = [];
    daemon.onEvent((event) => {
      if (event.kind === 'ingest-lag') warnings.push(event.kind);
    });
    // Two publishers: one in step with the daemon's clock, one 30 s behind and slipping a further
    // 50 ms per 100 ms; the daemon handles every sample at once.
    let slipping = clock.now() - 30_000;
    for (let i = 0; i < 200; i++) {
      clock.advance(100);
      slipping += 50;
      source.publish(`${prefix}/bath`, JSON.stringify({ v: 60, t: clock.now() / 1000 }));
      source.publish(`${prefix}/probe`, JSON.stringify({ v: 61, t: slipping / 1000 }));
    }
    daemon.commitNow();
    expect(warnings).toHaveLength(0);
    expect(daemon.counters.ingestLagMs).toBe(0);
    // The slipping publisher is named, with its own lag (10 s slipped over the 20 s).
    const report = daemon.counterReport() as { laggingSource: { topic: string; lagMs: number } | null };
    expect(report.laggingSource?.topic).toBe(`${prefix}/probe`);
    expect(report.laggingSource?.lagMs).toBeGreaterThan(5000);
    // When every source is handled late, the daemon is falling behind: one warning.
    let stamp = clock.now();
    let stampSlipping = slipping;
    for (let i = 0; i < 60; i++) {
      clock.advance(200);
      stamp += 100;
      stampSlipping += 100;
      source.publish(`${prefix}/bath`, JSON.stringify({ v: 60, t: stamp / 1000 }));
      source.publish(`${prefix}/probe`, JSON.stringify({ v: 61, t: stampSlipping / 1000 }));
    }
    daemon.commitNow();
    expect(daemon.counters.ingestLagMs).toBeGreaterThan(5000);
    expect(warnings).toHaveLength(1);
    await daemon.stop();
  });
});
