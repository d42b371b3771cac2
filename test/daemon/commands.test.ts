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
