import { createServer, type Socket } from 'node:net';
import { listen } from '../net/listen.js';
import { Aedes } from 'aedes';

/**
 * The in-process MQTT broker of the embedded default (npm aedes, MQTT 3.1.1, sessions and QoS 1
 * kept in memory). It takes the preferred port when it is free and any free port otherwise, and
 * says which. It is for the demo and for tests: a rig in production talks to its own broker.
 */
export interface EmbeddedBroker {
  port: number;
  host: string;
  url: string;
  close(): Promise<void>;
  /**
   * Drops every connection and stops listening for `downMs`, then listens again on the same port
   * with the sessions and queued QoS 1 messages kept: a restart of a broker that persists its state.
   */
  restart(downMs: number): Promise<void>;
}

export async function startEmbeddedBroker(options: { host?: string; port?: number } = {}): Promise<EmbeddedBroker> {
  const host = options.host ?? '127.0.0.1';
  const broker = await Aedes.createBroker({ drainTimeout: 10_000 });
  const sockets = new Set<Socket>();
  const makeServer = () => {
    const created = createServer((socket) => {
      sockets.add(socket);
      socket.once('close', () => sockets.delete(socket));
      (broker.handle as (socket: Socket) => void)(socket);
    });
    return created;
  };
  let server = makeServer();
  const port = await listen(server, host, options.port ?? 0, true);
  return {
    port,
    host,
    url: `mqtt://${host}:${port}`,
    restart: async (downMs: number) => {
      await new Promise<void>((resolve) => {
        server.close(() => resolve());
        for (const socket of sockets) socket.destroy();
      });
      await new Promise((resolve) => setTimeout(resolve, downMs));
      server = makeServer();
      await listen(server, host, port, false);
    },
    close: () =>
      new Promise<void>((resolve) => {
        for (const socket of sockets) socket.destroy();
        broker.close(() => server.close(() => resolve()));
        // Connected clients keep the server open: end them.
        setTimeout(() => resolve(), 2000).unref();
      }),
  };
}
