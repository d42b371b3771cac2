import type { Server } from 'node:net';

/** How many ports after a busy preferred one are tried before any free port is taken. */
export const NEXT_PORTS_TRIED = 9;

/**
 * Listens on `port` (0: any free port); with `fallback`, when that one is taken (EADDRINUSE), on
 * the next free one of the NEXT_PORTS_TRIED after it (8081, 8082, ... for 8080: easy to guess
 * and to type), and only then on any free port; without it, the error. Resolves with the port in use.
 */
export function listen(server: Server, host: string, port: number, fallback: boolean): Promise<number> {
  return new Promise((resolve, reject) => {
    const tryPort = (p: number, left: number) => {
      const onError = (error: NodeJS.ErrnoException) => {
        server.off('listening', onListening);
        if (left > 0 && error.code === 'EADDRINUSE') tryPort(left === 1 || p >= 65535 ? 0 : p + 1, left === 1 || p >= 65535 ? 0 : left - 1);
        else reject(error);
      };
      const onListening = () => {
        server.off('error', onError);
        const address = server.address();
        resolve(typeof address === 'object' && address ? address.port : p);
      };
      server.once('error', onError);
      server.once('listening', onListening);
      server.listen(p, host);
    };
    tryPort(port, fallback && port !== 0 ? NEXT_PORTS_TRIED + 1 : 0);
  });
}
