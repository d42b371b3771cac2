import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { Daemon } from '../../src/daemon/daemon.js';
import type { StoredEvent } from '../../src/ports/store.js';
import { testConfig } from '../helpers/daemon-config.js';
import { unique, waitFor } from '../helpers/brokers.js';

// The event log across a restart on the same SQLite file: the newest event id comes back from the
// store, the acknowledgements are rebuilt from the stored acknowledgement events, and new events
// continue the ids.

let broker: EmbeddedBroker;
beforeAll(async () => {
  broker = await startEmbeddedBroker({ port: 0 });
});
afterAll(async () => {
  await broker.close();
});

describe('event log after a restart', () => {
  it('keeps the last event id and the acknowledgements', async () => {
    const prefix = unique('evlog');
    const first = new Daemon(testConfig({ url: broker.url, prefix, clientId: unique('evlog-a') }));
    await first.start();
    await waitFor(() => first.ingest?.connected === true, 5000, 'the first daemon to connect');
    first.queueEvent('bath.probe', 'stale', 12, { seconds: 30 });
    first.queueEvent('bath.probe', 'averaging-limit', 40, { m: 64 });
    first.commitNow();
    const byKind = (kind: string) => first.events(0, 1000).find((e) => e.kind === kind) as StoredEvent;
    const stale = byKind('stale');
    const limit = byKind('averaging-limit');
    const ackStale = first.acknowledgeEvent(stale.id, 'bath refilled').acknowledgement;
    const ackLimit = first.acknowledgeEvent(limit.id, null).acknowledgement;
    expect(first.lastEventId).toBe(first.events(0, 1000).at(-1)!.id);
    const path = first.config.store.path;
    await first.stop();

    const second = new Daemon(testConfig({ url: broker.url, prefix, clientId: unique('evlog-b'), store: path }));
    await second.start();
    const stored = second.events(0, 1000);
    expect(second.lastEventId).toBe(stored.at(-1)!.id);
    expect(second.acknowledgement(stale.id)).toEqual(ackStale);
    expect(second.acknowledgement(limit.id)).toEqual(ackLimit);
    expect(second.acknowledgementsAfter(0)).toEqual([ackStale, ackLimit]);
    expect(second.acknowledgeEvent(stale.id, 'again').already).toBe(true);
    const before = second.lastEventId;
    second.queueEvent('bath.probe', 'stale', 80, { seconds: 30 });
    second.commitNow();
    expect(second.lastEventId).toBeGreaterThan(before);
    expect(second.lastEventId).toBe(second.events(0, 1000).at(-1)!.id);
    await second.stop();
  }, 30_000);
});
