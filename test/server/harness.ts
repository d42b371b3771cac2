import pino from 'pino';
import { join } from 'node:path';
import { loadConfigFile } from '../../src/config/load-config.js';
import { Daemon } from '../../src/daemon/daemon.js';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { RigSimulator } from '../../src/sim/rig-simulator.js';
import type { SubscriptionConfig } from '../../src/config/plateau-config.js';
import { ROOT } from '../helpers/reference.js';

/**
 * A daemon for the server tests, with no broker: the hx7 configuration, an in-memory store, and
 * samples handed to `daemon.onMessage` exactly as MQTT ingest would hand them over (topic, bytes,
 * matching subscription). Deterministic: the simulated rig is seeded and its samples carry their
 * own times; the daemon's clock is a counter the test moves.
 */
export interface TestDaemon {
  daemon: Daemon;
  clock: { nowMs: number };
  /** Publishes `seconds` of the simulated rig (10 samples per second per fast channel), then commits. */
  feedRig(seconds: number): void;
  /** Hands one JSON sample to the daemon on rig/hx7/<leaf>. */
  publish(leaf: string, value: number, timeSeconds: number): void;
  /** Hands a raw payload to the daemon on a topic of the JSON subscription. */
  publishRaw(topic: string, payload: string, subscription?: 'json' | 'senml'): void;
  close(): Promise<void>;
}

export const RIG_START_SECONDS = 1_790_000_000;

export function makeTestDaemon(options: { seed?: number } = {}): TestDaemon {
  const config = loadConfigFile(join(ROOT, 'config', 'hx7-heat-exchanger.yaml'));
  const clock = { nowMs: RIG_START_SECONDS * 1000 };
  const daemon = new Daemon({ ...config, store: { ...config.store, path: ':memory:' }, log: { level: 'silent' } }, { logger: pino({ level: 'silent' }), now: () => clock.nowMs });
  daemon.store = new SqliteStore(':memory:');
  const json = config.subscriptions.find((s) => s.format === 'json') as SubscriptionConfig;
  const senml = config.subscriptions.find((s) => s.format === 'senml') as SubscriptionConfig;
  const simulator = new RigSimulator({ seed: options.seed ?? 7, rate: 10, startSeconds: RIG_START_SECONDS });
  const publishRaw = (topic: string, payload: string, which: 'json' | 'senml' = 'json') => {
    daemon.onMessage(topic, Buffer.from(payload), which === 'json' ? json : senml);
  };
  return {
    daemon,
    clock,
    feedRig(seconds: number) {
      const until = simulator.nextTime + seconds;
      while (simulator.nextTime < until) {
        for (const sample of simulator.next()) {
          clock.nowMs = Math.max(clock.nowMs, Math.round(sample.timeSeconds * 1000));
          publishRaw(`rig/hx7/${sample.channel}`, JSON.stringify({ v: sample.value, t: sample.timeSeconds }));
        }
      }
      daemon.flush(false);
    },
    publish(leaf, value, timeSeconds) {
      publishRaw(`rig/hx7/${leaf}`, JSON.stringify({ v: value, t: timeSeconds }));
      daemon.flush(false);
    },
    publishRaw,
    async close() {
      await daemon.stop();
    },
  };
}
