import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { brokerReachable } from './brokers.js';

/**
 * A Mosquitto of the test's own on a free loopback port (Debian's mosquitto package), so a test
 * neither depends on nor disturbs a broker the machine runs. Null when the binary is not installed
 * (the caller skips with a message). No persistence; QoS 1 queues raised above the default 1000 so
 * a burst is never dropped by the broker.
 */
export interface OwnMosquitto {
  url: string;
  port: number;
  stop(): Promise<void>;
}

const CANDIDATES = ['/usr/sbin/mosquitto', '/usr/bin/mosquitto', '/usr/local/sbin/mosquitto'];

export function mosquittoBinary(): string | null {
  return CANDIDATES.find((path) => existsSync(path)) ?? null;
}

export async function startOwnMosquitto(): Promise<OwnMosquitto | null> {
  const binary = mosquittoBinary();
  if (binary === null) return null;
  const port = await freePort();
  const dir = mkdtempSync(join(tmpdir(), 'plateau-mosquitto-'));
  const config = join(dir, 'mosquitto.conf');
  writeFileSync(config, [`listener ${port} 127.0.0.1`, 'allow_anonymous true', 'persistence false', 'max_queued_messages 100000', 'log_dest none', ''].join('\n'));
  const child: ChildProcess = spawn(binary, ['-c', config], { stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  child.stderr?.on('data', (chunk: Buffer) => (stderr += chunk.toString()));
  const deadline = Date.now() + 5000;
  while (!(await brokerReachable('127.0.0.1', port, 200))) {
    if (child.exitCode !== null || Date.now() > deadline) {
      child.kill('SIGKILL');
      throw new Error(`mosquitto did not start on port ${port}: ${stderr}`);
    }
    await new Promise((resolve) => setTimeout(resolve, 50));
  }
  return {
    url: `mqtt://127.0.0.1:${port}`,
    port,
    stop: () =>
      new Promise<void>((resolve) => {
        if (child.exitCode !== null) return resolve();
        child.once('exit', () => resolve());
        child.kill('SIGTERM');
      }),
  };
}

function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const server = createServer();
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const address = server.address();
      const port = typeof address === 'object' && address ? address.port : 0;
      server.close(() => resolve(port));
    });
  });
}
