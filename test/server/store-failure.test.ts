import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createServer, type Server } from 'node:http';
import { WebSocket } from 'ws';
import type { FastifyInstance } from 'fastify';
import { buildHttpApp } from '../../src/server/http-app.js';
import { WsHub } from '../../src/server/ws-hub.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { makeTestDaemon, RIG_START_SECONDS, type TestDaemon } from './harness.js';

// While commits to the store fail, the API says so: /healthz answers 503 with the error, changes
// (test points, acknowledgements) are refused with ERR_STORE_UNAVAILABLE, WebSocket clients get the
// health at once (and in the hello of a new connection); when commits succeed again, all of it
// turns back by itself and the store-recovered event arrives as any event does.

let t: TestDaemon;
let store: MemoryStore;
let app: FastifyInstance;
let server: Server;
let hub: WsHub;
let url: string;

beforeAll(async () => {
  store = new MemoryStore();
  t = await makeTestDaemon({ store });
  t.feedRig(30);
  app = buildHttpApp(t.daemon, { token: null, maxBodyBytes: 4096 });
  hub = new WsHub(t.daemon);
  server = createServer((_request, response) => response.end());
  server.on('upgrade', (request, socket, head) => hub.handleUpgrade(request, socket, head));
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  url = `ws://127.0.0.1:${(server.address() as { port: number }).port}/ws`;
});

afterAll(async () => {
  hub.close();
  await new Promise((resolve) => server.close(resolve));
  await app.close();
  await t.close();
});

function listen(): Promise<{ messages: Record<string, unknown>[]; socket: WebSocket }> {
  return new Promise((resolve, reject) => {
    const socket = new WebSocket(url);
    const messages: Record<string, unknown>[] = [];
    socket.on('message', (data) => messages.push(JSON.parse(String(data)) as Record<string, unknown>));
    socket.once('open', () => resolve({ messages, socket }));
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

describe('the API while commits to the store fail', () => {
  it('503 with the error, changes refused, WebSocket clients told at once; all back by itself after', async () => {
    const before = await listen();
    await until(() => before.messages.length > 0);
    expect((before.messages[0]?.health as { status: string }).status).toBe('ok');
    const alert = t.daemon.events(0, 1000).find((e) => e.kind === 'steady' || e.kind === 'precision-reached');
    expect(alert).toBeDefined();

    // Six failed attempts: the retries (50 ms doubling) leave about 1.5 s of failing for the checks
    // below, so a loaded machine does not see the store recover before they run.
    store.failNextCommits(6, 'ERR_STORE_FULL');
    t.publish('glycol_in_degC', 40.01, RIG_START_SECONDS + 31);
    const health = await app.inject({ method: 'GET', url: '/healthz' });
    expect(health.statusCode).toBe(503);
    expect(health.json()).toMatchObject({ status: 'failing', store: 'failing', error: { code: 'ERR_STORE_FULL' } });
    const start = await app.inject({ method: 'POST', url: '/api/test-points', payload: { channels: ['hx7.glycol_in_degC'] } });
    expect(start.statusCode).toBe(503);
    expect(start.json()).toMatchObject({ error: 'ERR_STORE_UNAVAILABLE' });
    expect(t.daemon.testPointViews()).toEqual([]);
    const ack = await app.inject({ method: 'POST', url: `/api/events/${alert?.id}/acknowledge`, payload: {} });
    expect(ack.statusCode).toBe(503);
    expect(ack.json()).toMatchObject({ error: 'ERR_STORE_UNAVAILABLE' });
    await until(() => before.messages.some((m) => m.type === 'health' && (m.health as { status: string }).status === 'failing'));
    const later = await listen();
    await until(() => later.messages.length > 0);
    expect((later.messages[0]?.health as { status: string; store: { lastError: { code: string } } }).store.lastError.code).toBe('ERR_STORE_FULL');

    // The retries (50, 100, 200, 400, 800 ms later) fail until the sixth attempt, then succeed: no one
    // has to do anything.
    const end = Date.now() + 10_000;
    while ((await app.inject({ method: 'GET', url: '/healthz' })).statusCode !== 200) {
      if (Date.now() > end) throw new Error('the daemon did not recover');
      await new Promise((resolve) => setTimeout(resolve, 20));
    }
    await until(() => before.messages.some((m) => m.type === 'health' && (m.health as { status: string }).status === 'ok'));
    await until(() => before.messages.some((m) => m.type === 'event' && (m.event as { kind: string }).kind === 'store-recovered'));
    const recovered = t.daemon.events(0, 10_000).find((e) => e.kind === 'store-recovered');
    expect(recovered?.body).toMatchObject({ failedAttempts: 6, error: { code: 'ERR_STORE_FULL' }, samples: 1 });
    expect((await app.inject({ method: 'POST', url: '/api/test-points', payload: { channels: ['hx7.glycol_in_degC'] } })).statusCode).toBe(201);
    before.socket.close();
    later.socket.close();
  });
});
