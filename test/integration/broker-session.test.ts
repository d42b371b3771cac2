import { describe, expect, it } from 'vitest';
import pino from 'pino';
import { startEmbeddedBroker } from '../../src/ingest/embedded-broker.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { unique, waitFor } from '../helpers/brokers.js';
import { testConfig } from '../helpers/daemon-config.js';
import type { StoredEvent } from '../../src/ports/store.js';

// A broker that comes back without this client's session (here: another embedded broker on the
// same port, which knows nothing of the first one's sessions) raises the `broker-session-lost`
// warning; the first connection, and a broker that resumes the session, do not.

describe('the broker loses the daemon\'s session', () => {
  it('a new session where the old one was expected is a warning event; a resumed one is not', async () => {
    let broker = await startEmbeddedBroker({ port: 0 });
    const port = broker.port;
    const daemon = new Daemon(testConfig({ url: broker.url, prefix: unique('session'), clientId: unique('plateau-session') }), { store: new MemoryStore(), logger: pino({ level: 'silent' }) });
    const events: StoredEvent[] = [];
    daemon.onEvent((event) => events.push(event));
    try {
      await daemon.start();
      await waitFor(() => daemon.ingest?.connected === true, 5000, 'the daemon to connect');
      // A restart of the same broker keeps the session: resumed, no warning.
      await broker.restart(300);
      await waitFor(() => events.filter((e) => e.kind === 'broker-connected').length >= 2, 10_000, 'the reconnection');
      expect(events.filter((e) => e.kind === 'broker-session-lost')).toEqual([]);
      // Another broker on the same port: the session is gone.
      await broker.close();
      broker = await startEmbeddedBroker({ port });
      expect(broker.port).toBe(port);
      await waitFor(() => events.some((e) => e.kind === 'broker-session-lost'), 15_000, 'the warning');
      const warning = events.find((e) => e.kind === 'broker-session-lost') as StoredEvent;
      expect(warning.body.detail).toMatch(/did not keep this client's session/);
      expect(events.filter((e) => e.kind === 'broker-session-lost')).toHaveLength(1);
    } finally {
      await daemon.stop();
      await broker.close();
    }
  }, 60_000);
});
