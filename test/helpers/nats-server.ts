import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { brokerReachable } from './brokers.js';

/**
 * A nats-server of the test's own (Debian's nats-server package) on free loopback ports, with
 * JetStream in a temporary folder, never the one the machine runs at 4222. Optionally its MQTT
 * listener (which needs a server_name and JetStream) and subject mappings (the partitioning of
 * rig subjects). Null when the binary is not installed (the caller skips with a message).
 */
export interface OwnNatsServer {
  url: string;
  port: number;
  /** The MQTT listener's URL, when asked for. */
  mqttUrl: string | null;
  pid: number;
  /** Stops it (SIGTERM, then SIGKILL), keeping its storage unless `wipe`. */
  stop(wipe?: boolean): Promise<void>;
}

const CANDIDATES = ['/usr/sbin/nats-server', '/usr/bin/nats-server', '/usr/local/bin/nats-server'];

export function natsServerBinary(): string | null {
  return CANDIDATES.find((path) => existsSync(path)) ?? null;
}

export interface NatsServerOptions {
  mqtt?: boolean;
  /** A member of a cluster: its name, its route port, and the route ports of all members. */
  cluster?: { name: string; port: number; routes: number[] };
  /** The client port (default: a free one). */
  port?: number;
  /** More lines of server configuration (tls { ... }, authorization { ... }). */
  extra?: string[];
  /** Subject mappings, source -> destination (the server config's `mappings`). */
  mappings?: Record<string, string>;
}

export async function startOwnNatsServer(options: NatsServerOptions = {}): Promise<OwnNatsServer | null> {
  const binary = natsServerBinary();
  if (binary === null) return null;
  const port = options.port ?? (await freePort());
  const mqttPort = options.mqtt ? await freePort() : 0;
  const dir = mkdtempSync(join(tmpdir(), 'plateau-nats-'));
  const lines = [`server_name: plateau_test_${port}`, `listen: 127.0.0.1:${port}`, `jetstream { store_dir: ${JSON.stringify(join(dir, 'js'))} }`];
  if (options.mqtt) lines.push(`mqtt { listen: 127.0.0.1:${mqttPort} }`);
  if (options.cluster) lines.push(`cluster { name: ${options.cluster.name}, listen: 127.0.0.1:${options.cluster.port}, routes: [${options.cluster.routes.map((p) => `nats-route://127.0.0.1:${p}`).join(', ')}] }`);
  if (options.mappings) lines.push(`mappings = { ${Object.entries(options.mappings).map(([from, to]) => `${JSON.stringify(from)}: ${JSON.stringify(to)}`).join(', ')} }`);
  if (options.extra) lines.push(...options.extra);
  const config = join(dir, 'nats.conf');
  writeFileSync(config, lines.join('\n') + '\n');
  const child: ChildProcess = spawn(binary, ['-c', config], { stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  child.stderr?.resume();
  child.stderr?.on('data', (chunk: Buffer) => (stderr += chunk.toString()));
  const deadline = Date.now() + 10_000;
  while (!(await brokerReachable('127.0.0.1', port, 200)) || (options.mqtt && !(await brokerReachable('127.0.0.1', mqttPort, 200)))) {
    if (child.exitCode !== null || Date.now() > deadline) {
      child.kill('SIGKILL');
      throw new Error(`nats-server did not start on port ${port}: ${stderr.slice(-2000)}`);
    }
    await new Promise((resolve) => setTimeout(resolve, 50));
  }
  return {
    url: `nats://127.0.0.1:${port}`,
    port,
    mqttUrl: options.mqtt ? `mqtt://127.0.0.1:${mqttPort}` : null,
    pid: child.pid as number,
    stop: (wipe = true) =>
      new Promise<void>((resolve) => {
        const done = () => {
          if (wipe) rmSync(dir, { recursive: true, force: true });
          resolve();
        };
        if (child.exitCode !== null || child.signalCode !== null) return done();
        const timer = setTimeout(() => child.kill('SIGKILL'), 5000);
        child.once('exit', () => {
          clearTimeout(timer);
          done();
        });
        child.kill('SIGTERM');
      }),
  };
}

export function freePort(): Promise<number> {
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

/** Three clustered servers with JetStream (R = 3 possible), each with the same mappings; null without the binary. */
export async function startOwnNatsCluster(options: Omit<NatsServerOptions, 'cluster' | 'port'> = {}): Promise<OwnNatsServer[] | null> {
  if (natsServerBinary() === null) return null;
  const routes = [await freePort(), await freePort(), await freePort()];
  const ports = [await freePort(), await freePort(), await freePort()];
  const name = `plateau_test_${routes[0]}`;
  return Promise.all(routes.map(async (route, i) => (await startOwnNatsServer({ ...options, port: ports[i] as number, cluster: { name, port: route, routes } })) as OwnNatsServer));
}
