import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { eventLogFor } from '../../src/server/event-log.js';
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
    const log = eventLogFor(first);
    const byKind = (kind: string) => first.events(0, 1000).find((e) => e.kind === kind) as StoredEvent;
    const stale = byKind('stale');
    const limit = byKind('averaging-limit');
    const ackStale = log.acknowledge(stale, 'bath refilled').acknowledgement;
    const ackLimit = log.acknowledge(limit, null).acknowledgement;
    expect(log.lastId).toBe(first.events(0, 1000).at(-1)!.id);
    const path = first.config.store.path;
    await first.stop();

    const second = new Daemon(testConfig({ url: broker.url, prefix, clientId: unique('evlog-b'), store: path }));
    await second.start();
    const reopened = eventLogFor(second);
    const stored = second.events(0, 1000);
    expect(reopened.lastId).toBe(stored.at(-1)!.id);
    expect(reopened.acknowledgement(stale.id)).toEqual(ackStale);
    expect(reopened.acknowledgement(limit.id)).toEqual(ackLimit);
    expect(reopened.acknowledgementsAfter(0)).toEqual([ackStale, ackLimit]);
    expect(reopened.acknowledge(stale, 'again').already).toBe(true);
    const before = reopened.lastId;
    second.queueEvent('bath.probe', 'stale', 80, { seconds: 30 });
    second.commitNow();
    expect(reopened.lastId).toBeGreaterThan(before);
    expect(reopened.lastId).toBe(second.events(0, 1000).at(-1)!.id);
    await second.stop();
  }, 30_000);
});
