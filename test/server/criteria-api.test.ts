import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import pino from 'pino';
import { parseConfig } from '../../src/config/load-config.js';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import { buildHttpApp } from '../../src/server/http-app.js';
import { WsHub, type HubSocket } from '../../src/server/ws-hub.js';
import type { FastifyInstance } from 'fastify';

// The stability rules on every surface of the daemon: GET /api/channels/:name (the snapshot) and
// ?view=summary, the WebSocket's channel summaries and events, the test-point start with set
// points, the printable report. The rig (chiller loop CL-3) and its signal are invented; the checks
// are the surfaces' own contract (no outside source).

const T0 = 1_790_000_000;

let daemon: Daemon;
let app: FastifyInstance;
let source: MemorySampleSource;
let clock: ManualClock;
let t = T0;

function feed(seconds: number, level = 7): void {
  const random = new SeededRandom(Math.round(t));
  for (let s = 0; s < seconds; s++) {
    for (let k = 0; k < 5; k++) {
      t += 0.2;
      source.publish('rig/cl3/supply_degC', JSON.stringify({ v: level + 0.01 * random.normal(), t }));
    }
    clock.advance(Math.max(0, Math.round(t * 1000) - clock.now()));
    daemon.commitNow();
  }
}

beforeAll(async () => {
  const config = parseConfig({
    subscriptions: [{ topic: 'rig/cl3/+', format: 'json', channel: 'cl3.{3}' }],
    channels: {
      groups: [
        {
          match: 'cl3.supply_degC',
          unit: 'degC',
          criteria: { rules: ['iec-60335-2-6', { name: 'on-set-point', statistic: 'setpoint-deviation', windowSeconds: 60, setPoint: 'test-point', tolerance: 0.2 }] },
        },
      ],
    },
    store: { path: ':memory:' },
    log: { level: 'silent' },
  });
  source = new MemorySampleSource(daemonSubscriptions(config));
  clock = new ManualClock(T0 * 1000);
  daemon = new Daemon(config, { logger: pino({ level: 'silent' }), clock, store: new MemoryStore(), source });
  await daemon.start();
  app = buildHttpApp(daemon, { token: null, maxBodyBytes: 65536 });
  await app.ready();
  feed(1000);
});

afterAll(async () => {
  await app.close();
  await daemon.stop();
});

class StandInSocket implements HubSocket {
  readonly OPEN = 1;
  readyState = 1;
  bufferedAmount = 0;
  sent: { type: string; [key: string]: unknown }[] = [];
  send(text: string): void {
    this.sent.push(JSON.parse(text));
  }
  ping(): void {}
  terminate(): void {
    this.readyState = 3;
  }
  on(): this {
    return this;
  }
}

describe('stability rules through the API, the WebSocket and the report', () => {
  it('GET /api/channels/:name carries criteria and readiness; the summary view carries the rule strip', async () => {
    const full = (await app.inject({ method: 'GET', url: '/api/channels/cl3.supply_degC' })).json();
    const channel = full.channel ?? full;
    expect(channel.criteria.map((c: { name: string; holds: boolean }) => [c.name, c.holds])).toEqual([
      ['iec-60335-2-6', true],
      ['on-set-point', false],
    ]);
    expect(channel.criteria[0]).toMatchObject({ tolerance: 1, preset: 'iec-60335-2-6', source: expect.stringContaining('IEC 60335-2-6') });
    expect(channel.criteria[1].pending).toMatch(/no set point/);
    expect(channel.readiness).toMatchObject({ policy: 'both', ready: false });
    const list = (await app.inject({ method: 'GET', url: '/api/channels?view=summary' })).json();
    const summary = (list.channels ?? list).find((c: { name: string }) => c.name === 'cl3.supply_degC');
    expect(summary.criteria).toEqual([
      expect.objectContaining({ name: 'iec-60335-2-6', holds: true, since: expect.any(Number), value: expect.any(Number), tolerance: 1, margin: expect.any(Number) }),
      expect.objectContaining({ name: 'on-set-point', holds: false, since: null, value: null, tolerance: 0.2, margin: null }),
    ]);
    expect(summary.readyUnderPolicy).toBe(false);
  });

  it('a test point started with a set point over HTTP; the WebSocket carries the summaries with rules and the criterion events', async () => {
    const hub = new WsHub(daemon, { updateIntervalMs: 10 });
    const socket = new StandInSocket();
    hub.attach(socket);
    const hello = socket.sent[0] as { type: string; channels: { name: string; criteria: unknown[] }[] };
    expect(hello.type).toBe('hello');
    expect(hello.channels.find((c) => c.name === 'cl3.supply_degC')?.criteria).toHaveLength(2);
    const started = await app.inject({ method: 'POST', url: '/api/test-points', payload: { id: 'tp-7', channels: ['cl3.supply_degC'], setPoints: { 'cl3.supply_degC': 7 } } });
    expect(started.statusCode).toBe(201);
    expect(started.json().testPoint.setPoints).toEqual({ 'cl3.supply_degC': 7 });
    const refused = await app.inject({ method: 'POST', url: '/api/test-points', payload: { channels: ['cl3.supply_degC'], setPoints: { 'cl3.supply_degC': 'seven' } } });
    expect(refused.statusCode).toBe(400);
    feed(5);
    await new Promise((resolve) => setTimeout(resolve, 50));
    const events = socket.sent.filter((m) => m.type === 'event').map((m) => (m as unknown as { event: { kind: string; body: { rule: string } } }).event);
    expect(events.some((e) => e.kind === 'criterion-holds' && e.body.rule === 'on-set-point')).toBe(true);
    const updates = socket.sent.filter((m) => m.type === 'channels') as unknown as { channels: { name: string; criteria: { name: string; holds: boolean }[] }[] }[];
    const last = updates.at(-1)?.channels.find((c) => c.name === 'cl3.supply_degC');
    expect(last?.criteria.map((c) => c.holds)).toEqual([true, true]);
    hub.close();
  });

  it('the report shows the rules, with the preset\'s document', async () => {
    feed(60);
    const html = (await app.inject({ method: 'GET', url: '/api/test-points/tp-7/report' })).body;
    expect(html).toContain('<h3>Stability rules</h3>');
    expect(html).toContain('Readiness policy: the statistical verdict and every stability rule');
    expect(html).toMatch(/<td>on-set-point<\/td><td>setpoint-deviation [^<]*<\/td><td>(holds, but not over the whole window|held over the whole window|does not hold)<\/td>/);
    expect(html).toContain('IEC 60335-2-6');
  });
});
