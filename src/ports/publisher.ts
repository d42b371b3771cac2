import type { StoredEvent } from './store.js';

/**
 * The publisher port: events and retained status go out to whoever follows the daemon (rig
 * sequencers over MQTT, the daemon's own WebSocket clients). Implementations: MqttPublisher
 * (src/ingest), ListenerPublisher (src/daemon: in-process listeners such as the WebSocket hub) and
 * MemoryPublisher (tests); test/contract/publisher.contract.ts runs the same suite against each.
 *
 * Contract:
 * - `event` is called with committed events only, ids ascending; a follower sees each once, in
 *   that order, with its kind, source, sample index and body intact;
 * - `volatileEvent` is for what cannot wait for a commit (the store itself failing): it goes out at
 *   once and is never stored by anyone;
 * - `status` is the latest state of one subject ('channel/<name>', 'test-point/<id>', 'daemon'): a
 *   follower that arrives later still gets the newest; a status equal to the one last sent for its
 *   subject is not sent again;
 * - nothing here throws, whether or not anyone follows or the transport is up.
 */
export interface VolatileEvent {
  timeMs: number;
  source: string;
  kind: string;
  body: Record<string, unknown>;
}

export interface Publisher {
  event(event: StoredEvent): void;
  volatileEvent(event: VolatileEvent): void;
  status(subject: string, body: Record<string, unknown>): void;
}
