import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { createServer, type Server } from 'node:http';
import { WebSocket } from 'ws';
import { WsHub, type HubSocket, type WsHubOptions } from '../../src/server/ws-hub.js';
import { makeTestDaemon, RIG_START_SECONDS, type TestDaemon } from './harness.js';

// The WebSocket hub with real ws clients on loopback, and with stand-in sockets whose send buffer
// the test controls (a slow client cannot be made reliably slow through the kernel's buffers).

interface Received {
  atMs: number;
  message: { type: string; [key: string]: unknown };
}

let t: TestDaemon;
const servers: { server: Server; hub: WsHub }[] = [];
const sockets: WebSocket[] = [];

beforeAll(async () => {
  t = await makeTestDaemon();
  t.feedRig(60);
});

afterEach(async () => {
  for (const socket of sockets.splice(0)) socket.terminate();
  for (const { server, hub } of servers.splice(0)) {
    hub.close();
    await new Promise<void>((resolve) => server.close(() => resolve()));
  }
});

afterAll(async () => {
  await t.close();
});

async function startHub(options: WsHubOptions = {}): Promise<{ url: string; hub: WsHub }> {
  const hub = new WsHub(t.daemon, options);
  const server = createServer((_request, response) => response.end());
  server.on('upgrade', (request, socket, head) => hub.handleUpgrade(request, socket, head));
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  servers.push({ server, hub });
  const address = server.address() as { port: number };
  return { url: `ws://127.0.0.1:${address.port}/ws`, hub };
}

function connect(url: string, headers: Record<string, string> = {}): Promise<{ socket: WebSocket; received: Received[] }> {
  return new Promise((resolve, reject) => {
    const socket = new WebSocket(url, { headers });
    sockets.push(socket);
    const received: Received[] = [];
    socket.on('message', (data) => received.push({ atMs: Date.now(), message: JSON.parse(String(data)) }));
    socket.once('open', () => resolve({ socket, received }));
    socket.once('unexpected-response', (_request, response) => reject(new Error(`HTTP ${response.statusCode}`)));
    socket.once('error', reject);
  });
}

async function until(check: () => boolean, timeoutMs = 3000): Promise<void> {
  const end = Date.now() + timeoutMs;
  while (!check()) {
    if (Date.now() > end) throw new Error('timed out');
    await new Promise((resolve) => setTimeout(resolve, 10));
  }
}

describe('WsHub with ws clients', () => {
  it('hello: every channel with its unit, the test points, the latest events and the id of the newest one', async () => {
    const { url } = await startHub();
    const { received } = await connect(url);
    await until(() => received.length > 0);
    const hello = received[0]?.message as { type: string; channels: { name: string; unit: string | null }[]; lastEventId: number; events: { id: number }[]; testPoints: unknown[] };
    expect(hello.type).toBe('hello');
    expect(hello.channels.map((c) => c.name).sort()).toEqual(t.daemon.registry.all().map((c) => c.name).sort());
    expect(hello.channels.find((c) => c.name === 'hx7.shell_dp_kPa')?.unit).toBe('kPa');
    const stored = t.daemon.events(0, 10_000);
    // The id of the newest stored event, not a count of anything.
    expect(hello.lastEventId).toBe(stored.at(-1)?.id);
    expect(hello.events.map((e) => e.id)).toEqual(stored.slice(-100).map((e) => e.id));
    expect(Array.isArray(hello.testPoints)).toBe(true);
  });

  it('lastEventId stays right after events arrive and for a hub started later', async () => {
    t.daemon.startTestPoint({ id: 'ws-a', channels: ['hx7.shell_dp_kPa'] });
    t.daemon.stopTestPoint('ws-a');
    const { url } = await startHub();
    const { received } = await connect(url);
    await until(() => received.length > 0);
    expect((received[0]?.message as unknown as { lastEventId: number }).lastEventId).toBe(t.daemon.events(0, 10_000).at(-1)?.id);
  });

  it('events are pushed at once, not at the next update tick', async () => {
    const { url } = await startHub({ updateIntervalMs: 10_000 });
    const { received } = await connect(url);
    await until(() => received.length > 0);
    const sent = Date.now();
    t.daemon.startTestPoint({ id: 'ws-b', channels: ['hx7.water_flow_kg_s'] });
    await until(() => received.some((r) => r.message.type === 'event'));
    const event = received.find((r) => r.message.type === 'event') as Received;
    expect((event.message.event as { kind: string; source: string }).kind).toBe('test-point-started');
    // Loopback delivery; the update interval (10 s here) plays no part.
    expect(event.atMs - sent).toBeLessThan(500);
    t.daemon.stopTestPoint('ws-b');
  });

  it('channel updates are throttled per client whatever the sample rate, and carry only what changed', async () => {
    const { url } = await startHub({ updateIntervalMs: 250 });
    const { received } = await connect(url);
    await until(() => received.length > 0);
    let time = RIG_START_SECONDS + 1000;
    // About 400 samples per second on one channel for 1.5 s.
    const feeder = setInterval(() => {
      for (let i = 0; i < 4; i++) {
        time += 0.01;
        t.publish('probe_rate', Math.sin(time), time);
      }
    }, 10);
    await new Promise((resolve) => setTimeout(resolve, 1500));
    clearInterval(feeder);
    const updates = received.filter((r) => r.message.type === 'channels');
    // 1500 ms / 250 ms = 6 ticks (+1 for timer phase); at least 4 even on a loaded machine.
    expect(updates.length).toBeLessThanOrEqual(7);
    expect(updates.length).toBeGreaterThanOrEqual(4);
    for (let i = 1; i < updates.length; i++) expect((updates[i] as Received).atMs - (updates[i - 1] as Received).atMs).toBeGreaterThanOrEqual(150);
    for (const update of updates) {
      const names = (update.message.channels as { name: string }[]).map((c) => c.name);
      expect(names).toEqual(['hx7.probe_rate']);
    }
  });

  it('a test point change sends the test points with their verdicts', async () => {
    const { url } = await startHub({ updateIntervalMs: 50 });
    const { received } = await connect(url);
    await until(() => received.length > 0);
    t.daemon.startTestPoint({ id: 'ws-c', name: 'verdict check', channels: ['hx7.glycol_flow_kg_s'] });
    await until(() => received.some((r) => r.message.type === 'testPoints'));
    const message = received.find((r) => r.message.type === 'testPoints')?.message as unknown as { testPoints: { id: string; verdict: { channel: string }[] }[] };
    expect(message.testPoints.find((p) => p.id === 'ws-c')?.verdict.map((v) => v.channel)).toEqual(['hx7.glycol_flow_kg_s']);
    t.daemon.stopTestPoint('ws-c');
  });

  it('a connection whose Origin names another site is refused (403); the own origin is accepted', async () => {
    const { url, hub } = await startHub();
    await expect(connect(url, { origin: 'http://evil.example' })).rejects.toThrow('HTTP 403');
    const host = new URL(url).host;
    const own = await connect(url, { origin: `http://${host}` });
    expect(own.socket.readyState).toBe(WebSocket.OPEN);
    expect(hub.stats().refused).toBe(1);
  });

  it('clients beyond maxClients are refused (503)', async () => {
    const { url } = await startHub({ maxClients: 1 });
    await connect(url);
    await expect(connect(url)).rejects.toThrow('HTTP 503');
  });

  it('a client that sends more than 4096 bytes in one frame is closed (1009)', async () => {
    const { url, hub } = await startHub();
    const { socket } = await connect(url);
    await until(() => hub.clientCount === 1);
    const closed = new Promise<number>((resolve) => socket.once('close', (code) => resolve(code)));
    socket.send('x'.repeat(5000));
    expect(await closed).toBe(1009);
    await until(() => hub.clientCount === 0);
  });

  it('hello carries every derived result, as GET /api/derived gives it (budget and statement included)', async () => {
    const { url } = await startHub();
    const { received } = await connect(url);
    await until(() => received.length > 0);
    const hello = received[0]?.message as unknown as { type: string; derived: { name: string; inputs: string[]; budget: { channel: string }[]; statement: string; rows: number }[] };
    expect(hello.type).toBe('hello');
    expect(hello.derived.map((d) => d.name)).toEqual(t.daemon.derived.names());
    const duty = hello.derived[0] as (typeof hello.derived)[number];
    expect(duty.budget.map((b) => b.channel)).toEqual(duty.inputs);
    expect(duty.statement).toMatch(/^hx7\.heat_duty_kW = \(/);
    // Nothing was fed since the hello: the same result as the HTTP API's.
    expect(hello.derived).toEqual(JSON.parse(JSON.stringify(t.daemon.derivedResults())));
  });

  it('derived results are updated in their own message, throttled like the channels, only when they changed', async () => {
    const { url } = await startHub({ updateIntervalMs: 250 });
    const { received } = await connect(url);
    await until(() => received.length > 0);
    // Rig samples into the derived result's inputs every 20 ms for 1.5 s.
    const feeder = setInterval(() => t.feedRig(0.2), 20);
    await new Promise((resolve) => setTimeout(resolve, 1500));
    clearInterval(feeder);
    const updates = received.filter((r) => r.message.type === 'derived');
    // 1500 ms / 250 ms = 6 ticks (+1 for timer phase); at least 4 even on a loaded machine.
    expect(updates.length).toBeLessThanOrEqual(7);
    expect(updates.length).toBeGreaterThanOrEqual(4);
    const rows = updates.map((u) => ((u.message.derived as { name: string; rows: number }[])[0] as { rows: number }).rows);
    for (let i = 1; i < rows.length; i++) expect(rows[i]).toBeGreaterThan(rows[i - 1] as number);
    for (let i = 1; i < updates.length; i++) expect((updates[i] as Received).atMs - (updates[i - 1] as Received).atMs).toBeGreaterThanOrEqual(150);
    // Without new samples the result does not change: no further derived message.
    const count = received.filter((r) => r.message.type === 'derived').length;
    await new Promise((resolve) => setTimeout(resolve, 600));
    expect(received.filter((r) => r.message.type === 'derived').length).toBeLessThanOrEqual(count + 1);
  });

  it('disconnectAll ends every connection (clients reconnect by themselves)', async () => {
    const { url, hub } = await startHub();
    const { socket } = await connect(url);
    await until(() => hub.clientCount === 1);
    const closed = new Promise<void>((resolve) => socket.once('close', () => resolve()));
    hub.disconnectAll();
    await closed;
    expect(hub.clientCount).toBe(0);
    const again = await connect(url);
    await until(() => again.received.some((r) => r.message.type === 'hello'));
  });
});

/** A socket whose send buffer the test sets. */
class StandInSocket implements HubSocket {
  readonly OPEN = 1;
  readyState = 1;
  bufferedAmount = 0;
  sent: { type: string; [key: string]: unknown }[] = [];
  terminated = false;
  private readonly listeners = new Map<string, ((...args: unknown[]) => void)[]>();
  send(text: string): void {
    this.sent.push(JSON.parse(text));
  }
  ping(): void {}
  terminate(): void {
    this.terminated = true;
    this.readyState = 3;
    for (const listener of this.listeners.get('close') ?? []) listener();
  }
  on(event: string, listener: (...args: unknown[]) => void): this {
    this.listeners.set(event, [...(this.listeners.get(event) ?? []), listener]);
    return this;
  }
}

describe('WsHub with a slow client (stand-in socket)', () => {
  it('over skipBytes: channel updates are skipped (events still go); once drained, one update carries every channel', async () => {
    const { hub } = await startHub({ updateIntervalMs: 20, skipBytes: 1000, dropBytes: 100_000 });
    const slow = new StandInSocket();
    hub.attach(slow);
    expect(slow.sent[0]?.type).toBe('hello');
    slow.bufferedAmount = 5000;
    let time = RIG_START_SECONDS + 2000;
    for (let i = 0; i < 5; i++) {
      time += 0.1;
      t.publish('probe_slow', i, time);
      await new Promise((resolve) => setTimeout(resolve, 30));
    }
    expect(slow.sent.filter((m) => m.type === 'channels')).toHaveLength(0);
    expect(hub.stats().skipped).toBeGreaterThan(0);
    // Events are not skipped.
    t.daemon.startTestPoint({ id: 'ws-slow', channels: ['hx7.shell_dp_kPa'] });
    expect(slow.sent.some((m) => m.type === 'event')).toBe(true);
    t.daemon.stopTestPoint('ws-slow');
    slow.bufferedAmount = 0;
    await until(() => slow.sent.some((m) => m.type === 'channels'));
    const update = slow.sent.find((m) => m.type === 'channels') as unknown as { channels: { name: string }[] };
    expect(update.channels.map((c) => c.name).sort()).toEqual(t.daemon.registry.all().map((c) => c.name).sort());
    expect(slow.terminated).toBe(false);
  });

  it('over dropBytes: the client is dropped, never buffered without bound', async () => {
    const { hub } = await startHub({ updateIntervalMs: 20, skipBytes: 1000, dropBytes: 10_000 });
    const slow = new StandInSocket();
    const fine = new StandInSocket();
    hub.attach(slow);
    hub.attach(fine);
    expect(hub.clientCount).toBe(2);
    slow.bufferedAmount = 20_000;
    t.publish('probe_slow', 42, RIG_START_SECONDS + 3000);
    await until(() => slow.terminated);
    expect(hub.clientCount).toBe(1);
    expect(hub.stats().dropped).toBe(1);
    const sentBefore = slow.sent.length;
    t.publish('probe_slow', 43, RIG_START_SECONDS + 3001);
    await until(() => fine.sent.filter((m) => m.type === 'channels').length > 0);
    expect(slow.sent.length).toBe(sentBefore);
  });

  it('a beat goes out when nothing else did for beatMs', async () => {
    const { hub } = await startHub({ updateIntervalMs: 20, beatMs: 100 });
    const idle = new StandInSocket();
    hub.attach(idle);
    await until(() => idle.sent.some((m) => m.type === 'beat'), 2000);
    expect(typeof (idle.sent.find((m) => m.type === 'beat') as unknown as { serverTimeMs: number }).serverTimeMs).toBe('number');
  });
});
