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
  /** The monitoring endpoint's URL (http://127.0.0.1:port), for readiness checks. */
  monitorUrl: string;
  /** The last lines the server wrote (for failure messages). */
  log(): string;
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
  const monitorPort = await freePort();
  const dir = mkdtempSync(join(tmpdir(), 'plateau-nats-'));
  const lines = [`server_name: plateau_test_${port}`, `listen: 127.0.0.1:${port}`, `jetstream { store_dir: ${JSON.stringify(join(dir, 'js'))} }`, `http: 127.0.0.1:${monitorPort}`];
  if (options.mqtt) lines.push(`mqtt { listen: 127.0.0.1:${mqttPort} }`);
  if (options.cluster) lines.push(`cluster { name: ${options.cluster.name}, listen: 127.0.0.1:${options.cluster.port}, routes: [${options.cluster.routes.map((p) => `nats-route://127.0.0.1:${p}`).join(', ')}] }`);
  if (options.mappings) lines.push(`mappings = { ${Object.entries(options.mappings).map(([from, to]) => `${JSON.stringify(from)}: ${JSON.stringify(to)}`).join(', ')} }`);
  if (options.extra) lines.push(...options.extra);
  const config = join(dir, 'nats.conf');
  writeFileSync(config, lines.join('\n') + '\n');
  const child: ChildProcess = spawn(binary, ['-c', config], { stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  child.stderr?.resume();
  child.stderr?.on('data', (chunk: Buffer) => {
    stderr = (stderr + chunk.toString()).slice(-20_000);
  });
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
    monitorUrl: `http://127.0.0.1:${monitorPort}`,
    log: () => stderr.split('\n').slice(-15).join('\n'),
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

/**
 * Three clustered servers with JetStream (R = 3 possible), each with the same mappings; null without
 * the binary. Returns once the cluster is ready (bounded, else an error naming what is missing and
 * the servers' last lines): every node has routes to the two others and sees the same JetStream meta
 * leader. An open client port alone is not a cluster: a stream with R = 3 asked for before the routes
 * and the meta leader are there waits on the server's side.
 */
export async function startOwnNatsCluster(options: Omit<NatsServerOptions, 'cluster' | 'port'> = {}, readyMs = 30_000): Promise<OwnNatsServer[] | null> {
  if (natsServerBinary() === null) return null;
  const routes = [await freePort(), await freePort(), await freePort()];
  const ports = [await freePort(), await freePort(), await freePort()];
  const name = `plateau_test_${routes[0]}`;
  const started = await Promise.allSettled(routes.map((route, i) => startOwnNatsServer({ ...options, port: ports[i] as number, cluster: { name, port: route, routes } })));
  const nodes = started.flatMap((r) => (r.status === 'fulfilled' && r.value ? [r.value] : []));
  const failed = started.find((r): r is PromiseRejectedResult => r.status === 'rejected');
  if (failed) {
    for (const n of nodes) await n.stop();
    throw failed.reason;
  }
  const end = Date.now() + readyMs;
  let last = '';
  for (;;) {
    last = await clusterReadiness(nodes);
    if (last === '') return nodes;
    if (Date.now() > end) {
      const logs = nodes.map((n) => `--- ${n.url}\n${n.log()}`).join('\n');
      for (const n of nodes) await n.stop();
      throw new Error(`the 3-node NATS cluster was not ready after ${readyMs} ms: ${last}\n${logs}`);
    }
    await new Promise((resolve) => setTimeout(resolve, 100));
  }
}

/** What the cluster still lacks ('' when ready): routes to every other node, one JetStream meta leader seen by all. */
export async function clusterReadiness(nodes: OwnNatsServer[]): Promise<string> {
  const leaders = new Set<string>();
  for (const n of nodes) {
    const routez = (await monitor(n, '/routez')) as { num_routes?: number } | null;
    if (routez === null) return `${n.url} does not answer on its monitoring port`;
    if ((routez.num_routes ?? 0) < nodes.length - 1) return `${n.url} has ${routez.num_routes ?? 0} route(s) of ${nodes.length - 1}`;
    const jsz = (await monitor(n, '/jsz')) as { meta_cluster?: { leader?: string } } | null;
    const leader = jsz?.meta_cluster?.leader ?? '';
    if (leader === '') return `${n.url} sees no JetStream meta leader yet`;
    leaders.add(leader);
  }
  return leaders.size === 1 ? '' : `the nodes see different meta leaders: ${[...leaders].join(', ')}`;
}

async function monitor(node: OwnNatsServer, path: string): Promise<unknown> {
  try {
    const response = await fetch(`${node.monitorUrl}${path}`, { signal: AbortSignal.timeout(2000) });
    return response.ok ? await response.json() : null;
  } catch {
    return null;
  }
}
