import pino from 'pino';
import { join } from 'node:path';
import { loadConfigFile } from '../../src/config/load-config.js';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { RigSimulator } from '../../src/sim/rig-simulator.js';
import type { Clock } from '../../src/ports/clock.js';
import type { Store } from '../../src/ports/store.js';
import { SystemClock } from '../../src/clock/system-clock.js';
import { ROOT } from '../helpers/reference.js';

/**
 * A daemon for the server tests, with no broker: the hx7 configuration, an in-memory SQLite store,
 * and samples published to an in-memory sample source exactly as MQTT would deliver them (topic,
 * bytes; the source matches the subscription). Deterministic: the simulated rig is seeded and its
 * samples carry their own times; the daemon's wall clock is a counter the test moves (its timers
 * are real).
 */
export interface TestDaemon {
  daemon: Daemon;
  source: MemorySampleSource;
  clock: { nowMs: number };
  /** Publishes `seconds` of the simulated rig (10 samples per second per fast channel), then commits. */
  feedRig(seconds: number): void;
  /** Hands one JSON sample to the daemon on rig/hx7/<leaf>, then commits. */
  publish(leaf: string, value: number, timeSeconds: number): void;
  /** Hands a raw payload to the daemon on a topic (rig/hx7/senml is the SenML subscription). */
  publishRaw(topic: string, payload: string): void;
  close(): Promise<void>;
}

export const RIG_START_SECONDS = 1_790_000_000;

export async function makeTestDaemon(options: { seed?: number; store?: Store } = {}): Promise<TestDaemon> {
  const config = loadConfigFile(join(ROOT, 'config', 'hx7-heat-exchanger.yaml'));
  const time = { nowMs: RIG_START_SECONDS * 1000 };
  const system = new SystemClock();
  const clock: Clock = { now: () => time.nowMs, monotonicMs: () => system.monotonicMs(), setTimer: (ms, callback) => system.setTimer(ms, callback) };
  const testConfig = { ...config, store: { ...config.store, path: ':memory:' }, log: { level: 'silent' as const } };
  const source = new MemorySampleSource(daemonSubscriptions(testConfig));
  const daemon = new Daemon(testConfig, { logger: pino({ level: 'silent' }), clock, store: options.store ?? new SqliteStore(':memory:'), source });
  await daemon.start();
  const simulator = new RigSimulator({ seed: options.seed ?? 7, rate: 10, startSeconds: RIG_START_SECONDS });
  const publishRaw = (topic: string, payload: string) => {
    source.publish(topic, payload);
  };
  return {
    daemon,
    source,
    clock: time,
    feedRig(seconds: number) {
      const until = simulator.nextTime + seconds;
      while (simulator.nextTime < until) {
        for (const sample of simulator.next()) {
          time.nowMs = Math.max(time.nowMs, Math.round(sample.timeSeconds * 1000));
          publishRaw(`rig/hx7/${sample.channel}`, JSON.stringify({ v: sample.value, t: sample.timeSeconds }));
        }
      }
      daemon.commitNow();
    },
    publish(leaf, value, timeSeconds) {
      publishRaw(`rig/hx7/${leaf}`, JSON.stringify({ v: value, t: timeSeconds }));
      daemon.commitNow();
    },
    publishRaw,
    async close() {
      await daemon.stop();
    },
  };
}
