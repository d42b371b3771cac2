import { afterEach, describe, expect, it } from 'vitest';
import pino from 'pino';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import type { StoredEvent } from '../../src/ports/store.js';
import { testConfig } from '../helpers/daemon-config.js';

// The MQTT command topic answers every command a sequencer sends: a refused one raises
// `command-refused` (stored, published on the event topic) naming the command, the reason and a
// code, whatever made it fail: a payload that is not JSON, an unknown action, or a refusal of
// the daemon.

const open: Daemon[] = [];
afterEach(async () => {
  for (const daemon of open.splice(0)) await daemon.stop().catch(() => undefined);
});

async function rig() {
  const config = testConfig({ url: 'mqtt://127.0.0.1:9', prefix: 'rig', clientId: 'commands-test' });
  const source = new MemorySampleSource(daemonSubscriptions(config));
  const daemon = new Daemon(config, { clock: new ManualClock(1_790_000_000_000), source, store: new MemoryStore(), logger: pino({ level: 'silent' }) });
  await daemon.start();
  open.push(daemon);
  const events: StoredEvent[] = [];
  daemon.onEvent((event) => events.push(event));
  const send = (action: string, payload: string) => {
    source.publish(`rig-plateau/command/${action}`, payload);
    daemon.commitNow();
  };
  // A test point names channels the daemon has heard from (an unseen one is refused).
  source.publish('rig/bath.t', JSON.stringify({ v: 20.01, t: 1_790_000_000 }));
  daemon.commitNow();
  return { daemon, events, send };
}

describe('the MQTT command topic', () => {
  it('a payload that is not JSON: command-refused with the reason and ERR_COMMAND_PAYLOAD', async () => {
    const { events, send } = await rig();
    send('test-point/start', 'start sp-3 please');
    const refused = events.filter((e) => e.kind === 'command-refused');
    expect(refused).toHaveLength(1);
    expect(refused[0]?.body).toMatchObject({ command: 'test-point/start', reason: 'payload is not a JSON object', code: 'ERR_COMMAND_PAYLOAD' });
  });

  it('JSON that is not an object, and an unknown action: each refused with its code', async () => {
    const { events, send } = await rig();
    send('test-point/stop', '[1, 2]');
    send('test-point/pause', '{"id": "sp-1"}');
    const refused = events.filter((e) => e.kind === 'command-refused').map((e) => e.body);
    expect(refused).toEqual([
      expect.objectContaining({ command: 'test-point/stop', code: 'ERR_COMMAND_PAYLOAD' }),
      expect.objectContaining({ command: 'test-point/pause', code: 'ERR_COMMAND_UNKNOWN' }),
    ]);
  });

  it('a command the daemon refuses (stopping an unknown test point) still answers with its own code; a good one raises no refusal', async () => {
    const { events, send } = await rig();
    send('test-point/stop', '{"id": "sp-9"}');
    send('test-point/start', '{"id": "sp-1", "channels": ["bath.t"]}');
    expect(events.filter((e) => e.kind === 'command-refused').map((e) => e.body)).toEqual([expect.objectContaining({ command: 'test-point/stop', code: 'ERR_TEST_POINT_UNKNOWN' })]);
    expect(events.some((e) => e.kind === 'test-point-started')).toBe(true);
  });
});

describe('counters across a restart', () => {
  it('commands and late samples carry on from the store, as accepted and messages do', async () => {
    const { mkdtempSync } = await import('node:fs');
    const { tmpdir } = await import('node:os');
    const { join } = await import('node:path');
    const { SqliteStore } = await import('../../src/store/sqlite-store.js');
    const path = join(mkdtempSync(join(tmpdir(), 'plateau-counters-')), 'state.sqlite');
    const config = testConfig({ url: 'mqtt://127.0.0.1:9', prefix: 'rig', clientId: 'counters-test', store: path });
    const first = new MemorySampleSource(daemonSubscriptions(config));
    const clock = new ManualClock(1_790_000_000_000);
    const daemon = new Daemon(config, { clock, source: first, store: new SqliteStore(path), logger: pino({ level: 'silent' }) });
    await daemon.start();
    // A sample older than the newest but within the remembered times (late), and two commands.
    first.publish('rig/bath', JSON.stringify({ v: 20.1, t: 1_790_000_000.1 }));
    first.publish('rig/bath', JSON.stringify({ v: 20.3, t: 1_790_000_000.3 }));
    first.publish('rig/bath', JSON.stringify({ v: 20.2, t: 1_790_000_000.2 }));
    first.publish('rig-plateau/command/test-point/stop', '{"id": "nope"}');
    first.publish('rig-plateau/command/test-point/start', 'text');
    daemon.commitNow();
    const before = daemon.counterReport() as { samples: { accepted: number; late: number }; commands: number; messages: number };
    expect(before.samples.late).toBe(1);
    expect(before.commands).toBe(2);
    await daemon.stop();
    const again = new Daemon(config, { clock, source: new MemorySampleSource(daemonSubscriptions(config)), store: new SqliteStore(path), logger: pino({ level: 'silent' }) });
    await again.start();
    open.push(again);
    const after = again.counterReport() as typeof before;
    expect([after.samples.accepted, after.samples.late, after.commands, after.messages]).toEqual([before.samples.accepted, 1, 2, before.messages]);
  });
});
