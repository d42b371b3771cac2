// Profiling aid: a daemon on the embedded broker taking packs of 1000 samples (node --cpu-prof).
import { spawn } from 'node:child_process';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseConfig } from '../dist/config/load-config.js';
import { Daemon } from '../dist/daemon/daemon.js';

const here = dirname(fileURLToPath(import.meta.url));
const broker = spawn(process.execPath, [join(here, 'e2e-broker.js')], { stdio: ['ignore', 'pipe', 'inherit'] });
const url = process.env.BROKER ?? await new Promise((resolve) => broker.stdout.once('data', (d) => resolve(String(d).trim())));
const [qos, count, pack] = (process.argv[2] ?? '1,600,1000').split(',').map(Number);
const dir = mkdtempSync(join(tmpdir(), 'plateau-prof-'));
const daemon = new Daemon(parseConfig({ broker: { url, clientId: 'prof', qos }, subscriptions: [{ topic: 'p/+', format: 'json', channel: '{2}' }], channels: { defaults: { window: { kind: 'sliding', samples: 4096 } } }, store: { path: join(dir, 'p.sqlite') }, log: { level: 'silent' } }));
await daemon.start();
await new Promise((r) => setTimeout(r, 300));
const t0 = Date.now();
const pub = spawn(process.execPath, [join(here, 'e2e-publisher.js'), url, String(qos), String(count), String(pack), 'p', '8'], { stdio: 'ignore' });
while (daemon.counters.accepted < count * pack && Date.now() - t0 < 30000) await new Promise((r) => setTimeout(r, 20));
console.log('accepted', daemon.counters.accepted, 'in', Date.now() - t0, 'ms', 'commits', daemon.health().store.commits);
pub.kill(); broker.kill(); await daemon.stop(); process.exit(0);
