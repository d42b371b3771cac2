import type { Server } from 'node:net';

/**
 * Listens on `port` (0: any free port); with `fallback`, on a free port when that one is taken
 * (EADDRINUSE), else the error. Resolves with the port in use.
 */
export function listen(server: Server, host: string, port: number, fallback: boolean): Promise<number> {
  return new Promise((resolve, reject) => {
    const tryPort = (p: number, fallback: boolean) => {
      const onError = (error: NodeJS.ErrnoException) => {
        server.off('listening', onListening);
        if (fallback && error.code === 'EADDRINUSE') tryPort(0, false);
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
    tryPort(port, fallback && port !== 0);
  });
}
