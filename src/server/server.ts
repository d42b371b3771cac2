import type { FastifyInstance } from 'fastify';
import { buildHttpApp } from './http-app.js';
import { WsHub } from './ws-hub.js';
import type { Logger } from 'pino';
import { listen } from '../net/listen.js';
import type { DaemonApi } from '../ports/daemon-api.js';

/** The daemon's HTTP server: the API, the dashboard and the WebSocket hub on /ws. */
export interface RunningServer {
  app: FastifyInstance;
  hub: WsHub;
  url: string;
  port: number;
  close(): Promise<void>;
}

export async function startServer(daemon: DaemonApi, options: { host: string; port: number; token: string | null; maxBodyBytes: number; fallbackPort?: boolean; log?: Logger; sampleClock?: string }): Promise<RunningServer> {
  const app = buildHttpApp(daemon, { token: options.token, maxBodyBytes: options.maxBodyBytes, ...(options.log ? { log: options.log } : {}), ...(options.sampleClock !== undefined ? { sampleClock: options.sampleClock } : {}) });
  const hub = new WsHub(daemon);
  app.server.on('upgrade', (request, socket, head) => {
    const path = (request.url ?? '').split('?')[0];
    if (path === '/ws') hub.handleUpgrade(request, socket, head);
    else socket.destroy();
  });
  await app.ready();
  const port = await listen(app.server, options.host, options.port, options.fallbackPort === true);
  const host = options.host.includes(':') ? `[${options.host}]` : options.host;
  return {
    app,
    hub,
    port,
    url: `http://${host}:${port}/`,
    close: async () => {
      hub.close();
      await app.close();
    },
  };
}
