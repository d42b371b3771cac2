import { describe, expect, it } from 'vitest';
import { Daemon } from '../../src/daemon/daemon.js';
import { testConfig } from '../helpers/daemon-config.js';
import { unique } from '../helpers/brokers.js';

// Ingest lag is the excess of (arrival - time stamp) over its usual value, so a rig clock that runs
// behind (or a replay of old data) does not raise it, and samples handled later and later do.
describe('ingest lag', () => {
  it('ignores a constant clock offset, and warns once when samples fall behind', () => {
    let now = 1_764_800_000_000;
    const prefix = unique('lag');
    const daemon = new Daemon(testConfig({ url: 'mqtt://127.0.0.1:9', prefix, clientId: unique('lag') }), { now: () => now, lagWarningMs: 2000 });
    // Not started: the handler is fed directly, with a store opened by hand.
    (daemon as unknown as { store: unknown }).store = { addChannel: () => 1 };
    const subscription = daemon.config.subscriptions[0] as (typeof daemon.config.subscriptions)[number];
    const warnings = () => (daemon as unknown as { pendingEvents: { kind: string }[] }).pendingEvents.filter((e) => e.kind === 'ingest-lag').length;
    // A rig clock one hour behind, steady: no lag.
    for (let i = 0; i < 100; i++) {
      now += 100;
      daemon.onMessage(`${prefix}/bath`, Buffer.from(JSON.stringify({ v: 60, t: (now - 3_600_000) / 1000 })), subscription);
    }
    expect(daemon.counters.ingestLagMs).toBe(0);
    expect(warnings()).toBe(0);
    // Now each sample is handled later than the last: the lag grows and one warning is raised.
    let stamp = now - 3_600_000;
    for (let i = 0; i < 60; i++) {
      now += 200;
      stamp += 100;
      daemon.onMessage(`${prefix}/bath`, Buffer.from(JSON.stringify({ v: 60, t: stamp / 1000 })), subscription);
    }
    expect(daemon.counters.ingestLagMs).toBeGreaterThan(5000);
    expect(warnings()).toBe(1);
  });
});
