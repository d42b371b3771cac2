import { describe, expect, it } from 'vitest';
import { createServer, type Server } from 'node:net';
import { listen, NEXT_PORTS_TRIED } from '../../src/net/listen.js';

// A busy preferred port: the next ones are tried first (the demo's 8080 becomes 8081, a number a
// person can guess), and only then any free port.

async function freeRun(length: number): Promise<number> {
  // A run of `length` free ports: probe from a random base until every one of them binds.
  for (let attempt = 0; attempt < 50; attempt++) {
    const base = 20000 + Math.floor(Math.random() * 30000);
    const servers: Server[] = [];
    let ok = true;
    for (let p = base; p < base + length && ok; p++) {
      const s = createServer();
      ok = await new Promise<boolean>((resolve) => {
        s.once('error', () => resolve(false));
        s.listen(p, '127.0.0.1', () => resolve(true));
      });
      if (ok) servers.push(s);
    }
    await Promise.all(servers.map((s) => new Promise((r) => s.close(r))));
    if (ok) return base;
  }
  throw new Error('no run of free ports found');
}

const hold = (port: number) =>
  new Promise<Server>((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(port, '127.0.0.1', () => resolve(s));
  });

describe('listen with fallback', () => {
  it('the preferred port busy: the next one', async () => {
    const base = await freeRun(3);
    const blocker = await hold(base);
    const server = createServer();
    try {
      expect(await listen(server, '127.0.0.1', base, true)).toBe(base + 1);
    } finally {
      server.close();
      blocker.close();
    }
  });

  it('the preferred port and the next ones busy: any free port after them', async () => {
    const base = await freeRun(NEXT_PORTS_TRIED + 1);
    const blockers = await Promise.all(Array.from({ length: NEXT_PORTS_TRIED + 1 }, (_, i) => hold(base + i)));
    const server = createServer();
    try {
      const port = await listen(server, '127.0.0.1', base, true);
      expect(port < base || port > base + NEXT_PORTS_TRIED).toBe(true);
    } finally {
      server.close();
      blockers.forEach((b) => b.close());
    }
  });

  it('without fallback, a busy port is an error', async () => {
    const base = await freeRun(1);
    const blocker = await hold(base);
    try {
      await expect(listen(createServer(), '127.0.0.1', base, false)).rejects.toMatchObject({ code: 'EADDRINUSE' });
    } finally {
      blocker.close();
    }
  });
});
