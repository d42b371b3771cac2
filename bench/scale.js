// Scale-out benchmark on NATS JetStream (issue 12). Figures and ratios from one run:
//  - samples/s through JetStream into one worker (the daemon with SQLite, acknowledged after each
//    commit) with packs of samples, against a bare JetStream pull consumer that acknowledges every
//    message, on the same stream contents in the same run (goal >= 0.7x);
//  - takeover: from kill -9 of a worker process to the first sample of its partitions taken by
//    the survivor (goal < 5 s with the default lease of 3 s);
//  - the time and bytes to checkpoint 1,000 channels of a partition to the shared key-value bucket
//    and to restore them from it (what a takeover does before it reads the stream);
//  - a projection of the workers a 10^7 samples/s lab needs from the measured worker rate.
// It starts its own nats-server (Debian's package) on free loopback ports. Run: npm run bench:scale
// (FETCH=n sets scale.fetchBatch of the worker; SKIP_TAKEOVER=1 and SKIP_CHECKPOINTS=1 leave those out;
// CK_SAMPLES=n samples per channel in the checkpoint figures; QUICK=1 is smaller).
import { spawn } from 'node:child_process';
import { createServer, connect as tcp } from 'node:net';
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { performance } from 'node:perf_hooks';
import { connect } from '@nats-io/transport-node';
import { jetstream, jetstreamManager, AckPolicy } from '@nats-io/jetstream';
import { stringify } from 'yaml';
import { parseConfig } from '../dist/config/load-config.js';
import { Daemon } from '../dist/daemon/daemon.js';
import { serialize, deserialize } from 'node:v8';
import { Channel, memoryHistory } from '../dist/engine/channel.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../dist/engine/channel-options.js';
import { SharedCheckpoints } from '../dist/ingest/shared-checkpoints.js';
import { line, header, verdict } from './harness.js';

const here = dirname(fileURLToPath(import.meta.url));
const quick = process.env.QUICK === '1';
const PACK = 100; // samples per message
const MESSAGES = quick ? 2000 : 10_000;
const CHANNELS = 16;

const freePort = () => new Promise((resolve) => { const s = createServer(); s.listen(0, '127.0.0.1', () => { const p = s.address().port; s.close(() => resolve(p)); }); });
const reachable = (port) => new Promise((resolve) => { const s = tcp({ host: '127.0.0.1', port }); s.once('connect', () => (s.destroy(), resolve(true))); s.once('error', () => resolve(false)); });
const sleep = (ms) => new Promise((r) => setTimeout(r, ms));

async function natsServer(dir, partitions) {
  const port = await freePort();
  const conf = join(dir, 'nats.conf');
  writeFileSync(conf, [`server_name: bench_${port}`, `listen: 127.0.0.1:${port}`, `jetstream { store_dir: ${JSON.stringify(join(dir, 'js'))} }`, `mappings = { "lab.*.*": "part.{{partition(${partitions},1,2)}}.lab.{{wildcard(1)}}.{{wildcard(2)}}" }`].join('\n'));
  const child = spawn('/usr/sbin/nats-server', ['-c', conf], { stdio: 'ignore' });
  for (let i = 0; i < 200 && !(await reachable(port)); i++) await sleep(50);
  return { url: `nats://127.0.0.1:${port}`, stop: () => new Promise((r) => { child.once('exit', r); child.kill('SIGTERM'); }) };
}

// Seeded noise (Park-Miller minimal standard generator, as test/helpers/lcg-series.ts): a sine would
// keep the engine's spectral-line refinement busy and measure that instead of the ingest path.
let seed = 42;
const uniform = () => (seed = (seed * 16807) % 2147483647) / 2147483647;
function pack(c, i) {
  const s = [];
  for (let k = 0; k < PACK; k++) s.push({ v: 20 + c + uniform() - 0.5, t: 1_764_000_000 + (i * PACK + k) * 0.001 });
  return JSON.stringify({ s });
}

async function fill(url, stream) {
  const nc = await connect({ servers: url });
  const jsm = await jetstreamManager(nc);
  await jsm.streams.add({ name: stream, subjects: ['part.*.>'] });
  const js = jetstream(nc);
  let acks = [];
  for (let i = 0; i < MESSAGES; i++) {
    const c = i % CHANNELS;
    acks.push(js.publish(`lab.rig${c % 4}.c${c}`, pack(c, Math.floor(i / CHANNELS))));
    if (acks.length >= 500) { await Promise.all(acks); acks = []; }
  }
  await Promise.all(acks);
  await nc.close();
}

async function bareConsumer(url, stream) {
  const nc = await connect({ servers: url });
  const jsm = await jetstreamManager(nc);
  await jsm.consumers.add(stream, { durable_name: 'bare', ack_policy: AckPolicy.Explicit, filter_subject: 'part.0.>', max_ack_pending: 20_000 });
  const info = await jsm.consumers.info(stream, 'bare');
  const total = info.num_pending;
  const consumer = await jetstream(nc).consumers.get(stream, 'bare');
  const t0 = performance.now();
  let n = 0;
  let samples = 0;
  const messages = await consumer.consume({ max_messages: 256 });
  for await (const m of messages) {
    samples += JSON.parse(new TextDecoder().decode(m.data)).s.length; // the decoding a consumer needs
    m.ack();
    if (++n >= total) break;
  }
  const ms = performance.now() - t0;
  await nc.close();
  return { samples, ms };
}

async function oneWorker(url, stream, dir) {
  const config = parseConfig({
    broker: { url },
    scale: { worker: 'bench-1', partitions: 1, stream, leaseSeconds: 3, fetchBatch: Number(process.env.FETCH ?? 256) },
    subscriptions: [{ topic: 'lab/+/+', format: 'json', channel: '{3}', samplesField: 's', valueField: 'v', timeField: 't', timeUnit: 's', maxSamples: 10_000 }],
    channels: { defaults: { window: { kind: 'sliding', samples: 4096 } } },
    store: { path: join(dir, 'worker.sqlite') },
    log: { level: 'warn' },
  });
  const daemon = new Daemon(config);
  const expected = MESSAGES * PACK;
  // Timed from the end of start() (connection, server objects, the first heartbeat and the
  // partition's consumer are set up by then), as the bare consumer is timed from its consume().
  await daemon.start();
  const t0 = performance.now();
  const before = daemon.counters.accepted;
  while (daemon.counters.accepted < expected) await sleep(5);
  const ms = performance.now() - t0;
  await daemon.stop();
  return { samples: daemon.counters.accepted - before, ms };
}

/**
 * 1,000 channels (growing windows, CK_SAMPLES samples each, the default engine) checkpointed as a
 * worker does for a partition (src/daemon/partition-checkpoints.ts: the channel records and their
 * recent times, v8-serialised, written in chunks to the bucket), then read back and restored into
 * new channels as a takeover does. Times are wall times on this machine, one run each.
 */
const CK_CHANNELS = 1000;
const CK_SAMPLES = Number(process.env.CK_SAMPLES ?? 1000);
async function checkpoints(url) {
  const channels = [];
  for (let c = 0; c < CK_CHANNELS; c++) {
    const channel = new Channel(`c${c}`, 'degC', DEFAULT_CHANNEL_OPTIONS);
    for (let i = 0; i < CK_SAMPLES; i++) channel.accept(20 + uniform() - 0.5, 1_764_000_000_000 + i * 10, true);
    channels.push(channel);
  }
  const nc = await connect({ servers: url });
  const bucket = await SharedCheckpoints.open(nc, 'BENCH_checkpoints', 1);
  const t0 = performance.now();
  const record = { record: 'partition-checkpoint', version: 1, partition: 0, seq: CK_CHANNELS * CK_SAMPLES, channels: channels.map((c) => ({ name: c.name, unit: c.unit, checkpoint: c.checkpoint(), memory: c.timeMemory(64) })) };
  const bytes = serialize(record);
  const t1 = performance.now();
  await bucket.write(0, record.seq, bytes, 'bench');
  const t2 = performance.now();
  const found = await bucket.read(0);
  const t3 = performance.now();
  const back = deserialize(found.bytes);
  let loaded = 0;
  for (const c of back.channels) {
    const channel = new Channel(c.name, c.unit, DEFAULT_CHANNEL_OPTIONS);
    if (channel.restore(c.checkpoint, memoryHistory(c.checkpoint.seq, c.memory)).outcome === 'loaded') loaded++;
  }
  const t4 = performance.now();
  await nc.close();
  return { bytes: bytes.length, serializeMs: t1 - t0, writeMs: t2 - t1, readMs: t3 - t2, restoreMs: t4 - t3, loaded };
}

async function takeover(url, dir) {
  const cfg = (worker) => ({ broker: { url }, scale: { worker, partitions: 2, stream: 'TAKE', leaseSeconds: 3 }, subscriptions: [{ topic: 'lab/+/+', format: 'json', channel: '{3}' }], store: { path: join(dir, `${worker}.sqlite`), checkpointSamples: 250 }, http: { listen: '127.0.0.1:0' }, log: { level: 'warn' } });
  const start = (worker) => new Promise((resolve, reject) => {
    const file = join(dir, `${worker}.yaml`);
    writeFileSync(file, stringify(cfg(worker)));
    const child = spawn(process.execPath, [join(here, '..', 'bin', 'plateau.js'), 'run', '--config', file], { stdio: ['ignore', 'ignore', 'pipe'] });
    let text = '';
    child.stderr.on('data', (d) => { text += d; const m = /dashboard at (http:\/\/\S+)/.exec(text); if (m) resolve({ child, url: m[1] }); });
    child.once('exit', () => reject(new Error(text)));
  });
  const counters = async (w) => (await fetch(new URL('api/counters', w.url))).json();
  const a = await start('take-a');
  const b = await start('take-b');
  while (!((await counters(a)).scale?.partitions.length === 1 && (await counters(b)).scale?.partitions.length === 1)) await sleep(100);
  const nc = await connect({ servers: url });
  const js = jetstream(nc);
  let i = 0;
  let stop = false;
  const publisher = (async () => { while (!stop) { await Promise.all(Array.from({ length: 8 }, (_, c) => js.publish(`lab.rig${c}.c${c}`, JSON.stringify({ v: 1, t: 1_764_000_000 + i * 0.01 })))); i++; await sleep(2); } })();
  // Long enough for shared checkpoints (every 250 samples per channel) before the kill.
  await sleep(2500);
  const victimHeld = (await counters(a)).scale.partitions;
  const victimChannels = (await counters(a)).scale.channels.filter((c) => c.held).map((c) => c.name);
  const t0 = performance.now();
  a.child.kill('SIGKILL');
  // The first sample of the victim's partitions processed by the survivor: one of the victim's
  // channels on the survivor has taken more samples than it was restored with (its shared
  // checkpoint's count; none when there was no checkpoint).
  let first = null;
  while (first === null && performance.now() - t0 < 30_000) {
    const k = await counters(b);
    const base = k.scale.sharedCheckpoints?.lastRestore?.from ?? {};
    const views = (await (await fetch(new URL('api/channels', b.url))).json()).channels;
    if (k.scale.partitions.length === 2 && views.some((v) => victimChannels.includes(v.name) && v.received > (base[v.name] ?? 0) && k.scale.channels.some((c) => c.name === v.name && c.held))) first = performance.now() - t0;
    else await sleep(20);
  }
  stop = true;
  await publisher;
  const restored = (await counters(b)).scale?.sharedCheckpoints?.lastRestore ?? null;
  await nc.close();
  b.child.kill('SIGKILL');
  return { ms: first, victimHeld, restored };
}

header('scale-out on NATS JetStream');
const dir = mkdtempSync(join(tmpdir(), 'plateau-bench-scale-'));
const server = await natsServer(dir, 1);
try {
  await fill(server.url, 'BENCH');
  const bare = await bareConsumer(server.url, 'BENCH');
  const worker = await oneWorker(server.url, 'BENCH', dir);
  const bareRate = bare.samples / (bare.ms / 1000);
  const workerRate = worker.samples / (worker.ms / 1000);
  line(`bare JetStream consumer, packs of ${PACK}, ack each`, Math.round(bareRate), 'samples/s', `${MESSAGES} messages`);
  line(`one worker (decode, engine, SQLite, ack after commit)`, Math.round(workerRate), 'samples/s', `${(workerRate / bareRate).toFixed(2)}x the bare consumer; ${verdict(workerRate / bareRate >= 0.7)} (>= 0.7x)`);
  line('workers for a 10^7 samples/s lab at this rate', Math.ceil(1e7 / workerRate), 'workers', 'one core each, before the broker\'s own limits');
  const ck = process.env.SKIP_CHECKPOINTS === '1' ? null : await checkpoints(server.url);
  if (ck) line(`checkpoint ${CK_CHANNELS} channels (${CK_SAMPLES} samples, growing windows)`, Math.round(ck.serializeMs + ck.writeMs), 'ms', `${(ck.bytes / 1e6).toFixed(1)} MB: serialise ${Math.round(ck.serializeMs)} ms, write to the bucket ${Math.round(ck.writeMs)} ms`);
  if (ck) line(`restore ${CK_CHANNELS} channels from the bucket`, Math.round(ck.readMs + ck.restoreMs), 'ms', `read ${Math.round(ck.readMs)} ms, deserialise and load ${Math.round(ck.restoreMs)} ms; ${ck.loaded} loaded`);
} finally {
  await server.stop();
}
mkdirSync(join(dir, 'two'));
if (process.env.SKIP_TAKEOVER === '1') process.exit(0);
const server2 = await natsServer(join(dir, 'two'), 2);
try {
  const t = await takeover(server2.url, join(dir, 'two'));
  line('takeover: kill -9 to the survivor taking the victim\'s samples', t.ms === null ? 'none' : Math.round(t.ms), 'ms', `lease 3 s (default); ${verdict(t.ms !== null && t.ms < 5000)} (< 5 s); ${t.restored ? `restored ${t.restored.channels} channels from the shared checkpoint at sequence ${t.restored.seq} (${t.restored.bytes} bytes)` : 'no shared checkpoint restored'}`);
} finally {
  await server2.stop();
  rmSync(dir, { recursive: true, force: true });
}
