// End-to-end benchmark of the daemon (issue: the daemon). Figures and ratios from one run:
//  - samples/s from a publisher (its own process) through the broker into the daemon and SQLite,
//    against the same broker's ceiling with a bare subscriber: one-sample messages at QoS 0 and 1,
//    packs of 1000 samples at QoS 1; on the embedded broker (its own process) and on a Mosquitto of
//    the benchmark's own on a free port (its QoS 1 queue per client raised to 100,000 messages: with
//    Mosquitto's default of 1000 a subscriber that falls behind loses messages, which the broker
//    drops, not the client) or, when Mosquitto is not installed, the one at 127.0.0.1:1883;
//  - alert latency from publish to WebSocket (p50, p99) under a steady load;
//  - ingest lag when the daemon falls behind, and the warning event;
//  - row-wise against chunked sample storage in SQLite;
//  - memory per channel and in total at 10,000 channels;
//  - restart time: state rebuilt from 10 million stored samples.
// Every wait is bounded (connections, subscriptions, publishers, the broker's start, each section,
// and the whole run): a stall is printed as a FAILED figure with what was published, acknowledged
// and received, never as silence.
// Run: npm run bench:e2e
import { spawn } from 'node:child_process';
import { connect, createServer } from 'node:net';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import mqtt from 'mqtt';
import WebSocket from 'ws';
import Database from 'better-sqlite3';
import { parseConfig } from '../dist/config/load-config.js';
import { Daemon } from '../dist/daemon/daemon.js';
import { startServer } from '../dist/server/server.js';
import { SqliteStore } from '../dist/store/sqlite-store.js';
import { ChannelRegistry } from '../dist/engine/channel-registry.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../dist/engine/channel-options.js';
import { line, header, verdict } from './harness.js';

const here = dirname(fileURLToPath(import.meta.url));
const quick = process.env.QUICK === '1';

function reachable(port) {
  return new Promise((resolve) => {
    const socket = connect({ host: '127.0.0.1', port });
    socket.setTimeout(500, () => (socket.destroy(), resolve(false)));
    socket.once('connect', () => (socket.destroy(), resolve(true)));
    socket.once('error', () => resolve(false));
  });
}

/** The whole run's bound: past it the benchmark says where it stalled and exits (never hangs). */
const RUN_LIMIT_MS = Number(process.env.E2E_LIMIT_MS ?? (quick ? 15 : 40) * 60_000);
let section = 'start';
const children = new Set();
setTimeout(() => {
  console.log(`FAILED: the benchmark stalled in "${section}" and was stopped after ${RUN_LIMIT_MS / 60_000} min`);
  for (const child of children) child.kill('SIGKILL');
  process.exit(1);
}, RUN_LIMIT_MS).unref();

/** Resolves with the promise's value, or with `fallback` after ms (the wait is bounded). */
function bounded(promise, ms, fallback) {
  let timer;
  return Promise.race([promise, new Promise((resolve) => (timer = setTimeout(() => resolve(fallback), ms)))]).finally(() => clearTimeout(timer));
}

/**
 * The publisher in its own process. It bounds its own waits (connection, acknowledgements) and
 * reports what it published and what the broker left unacknowledged; killed when it has not ended
 * within limitMs. Never rejects: a failure is `{ failed }`.
 */
function runPublisher(url, qos, count, pack, prefix, channels = 8, rate = 0, limitMs = 180_000) {
  return new Promise((resolve) => {
    const child = spawn(process.execPath, [join(here, 'e2e-publisher.js'), url, String(qos), String(count), String(pack), prefix, String(channels), String(rate), '60000'], { stdio: ['ignore', 'pipe', 'inherit'] });
    children.add(child);
    let out = '';
    const timer = setTimeout(() => child.kill('SIGKILL'), limitMs);
    child.stdout.on('data', (d) => (out += d));
    child.on('exit', (code) => {
      clearTimeout(timer);
      children.delete(child);
      if (code !== 0) return resolve({ failed: `publisher ${code === null ? `killed after ${limitMs / 1000} s` : `exited ${code}`}` });
      try {
        resolve(JSON.parse(out));
      } catch {
        resolve({ failed: `publisher printed no result (${out.slice(0, 80)})` });
      }
    });
  });
}

function freePort() {
  return new Promise((resolve, reject) => {
    const server = createServer();
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const { port } = server.address();
      server.close(() => resolve(port));
    });
  });
}

/** A Mosquitto of the benchmark's own on a free port, or null when it is not installed or does not answer within 5 s. */
async function ownMosquitto(dir) {
  const binary = ['/usr/sbin/mosquitto', '/usr/bin/mosquitto'].find((p) => existsSync(p));
  if (!binary) return null;
  const port = await freePort();
  writeFileSync(join(dir, 'mosquitto.conf'), [`listener ${port} 127.0.0.1`, 'allow_anonymous true', 'persistence false', 'max_queued_messages 100000', 'max_inflight_messages 0', 'log_dest none', ''].join('\n'));
  const child = spawn(binary, ['-c', join(dir, 'mosquitto.conf')], { stdio: 'ignore' });
  children.add(child);
  for (let i = 0; i < 100 && !(await reachable(port)); i++) await new Promise((r) => setTimeout(r, 50));
  if (!(await reachable(port))) {
    child.kill('SIGKILL');
    return null;
  }
  return { url: `mqtt://127.0.0.1:${port}`, stop: () => child.kill('SIGTERM') };
}

async function startBrokerProcess() {
  const child = spawn(process.execPath, [join(here, 'e2e-broker.js')], { stdio: ['ignore', 'pipe', 'inherit'] });
  children.add(child);
  const url = await bounded(new Promise((resolve) => child.stdout.once('data', (d) => resolve(String(d).trim()))), 15_000, null);
  if (url === null) child.kill('SIGKILL');
  return { url, stop: () => child.kill('SIGTERM') };
}

/** An MQTT client connected (and subscribed to `filter` when given) within 10 s, or null. */
async function connectClient(url, options, filter = null, qos = 0) {
  const client = mqtt.connect(url, { connectTimeout: 10_000, ...options });
  const ok = await bounded(new Promise((resolve) => client.once('connect', () => resolve(true))), 10_000, false);
  if (ok && filter !== null) {
    const subscribed = await bounded(new Promise((resolve) => client.subscribe(filter, { qos }, (error) => resolve(!error))), 10_000, false);
    if (subscribed) return client;
  } else if (ok) return client;
  client.end(true);
  return null;
}

/** What went wrong in a run, for the figure's line ('' when nothing did). */
function failure(result, published, expected) {
  const problems = [];
  if (result.connectFailed) problems.push(result.connectFailed);
  if (published?.failed) problems.push(published.failed);
  if (result.received < expected) problems.push(`stalled at ${result.received} of ${expected} samples${result.timedOut ? ` (no end within ${result.limitMs / 1000} s)` : ''}`);
  return problems.length > 0 ? `; FAILED: ${problems.join('; ')}` : '';
}

/** Counts samples received until `expected`, until the stream has been quiet for quietMs, or until limitMs. */
async function measure(receivedNow, expected, quietMs = 1500, limitMs = 180_000) {
  const start = Date.now();
  let first = 0;
  let last = 0;
  let lastCount = 0;
  let lastChange = Date.now();
  for (;;) {
    const n = receivedNow();
    const now = Date.now();
    if (n > 0 && first === 0) first = now;
    if (n !== lastCount) {
      lastCount = n;
      last = now;
      lastChange = now;
    }
    if (n >= expected || (first > 0 && now - lastChange > quietMs)) break;
    if (first === 0 && now - lastChange > 20000) break;
    if (now - start > limitMs) break;
    await new Promise((resolve) => setTimeout(resolve, 5));
  }
  const seconds = Math.max(1e-3, (last - first) / 1000);
  return { received: lastCount, rate: lastCount / seconds, timedOut: Date.now() - start > limitMs, limitMs };
}

async function bareSubscriber(url, qos, pack, prefix, count) {
  const client = await connectClient(url, { clientId: `bench-bare-${Date.now()}`, clean: true }, `${prefix}/+`, qos);
  if (client === null) return { received: 0, rate: 0, connectFailed: `the bare subscriber got no connection or subscription at ${url} within 10 s`, published: null };
  let samples = 0;
  client.on('message', (_topic, payload) => {
    // Parse like the daemon has to, so the ceiling includes reading the payload.
    const doc = JSON.parse(payload.toString());
    samples += Array.isArray(doc) ? doc.length : 1;
  });
  const publishing = runPublisher(url, qos, count, pack, prefix);
  const result = await measure(() => samples, count * pack);
  const published = await publishing; // bounded: the publisher ends or is killed
  client.end(true);
  return { ...result, published };
}

async function daemonRun(url, qos, pack, prefix, count, dir) {
  const config = parseConfig({
    broker: { url, clientId: `bench-daemon-${Date.now()}`, qos, reconnectPeriodMs: 200 },
    subscriptions: [{ topic: `${prefix}/+`, format: 'json', channel: '{2}' }],
    channels: { defaults: { window: { kind: 'sliding', samples: 4096 } } },
    store: { path: join(dir, `${prefix}.sqlite`) },
    http: { listen: '127.0.0.1:0' },
    topics: { events: `${prefix}-p/events`, status: `${prefix}-p/status`, command: `${prefix}-p/command` },
    log: { level: 'silent' },
  });
  const daemon = new Daemon(config);
  await daemon.start();
  await new Promise((resolve) => setTimeout(resolve, 300));
  const publishing = runPublisher(url, qos, count, pack, prefix);
  const result = await measure(() => daemon.counters.accepted, count * pack);
  const published = await publishing;
  const maxFlushMs = daemon.health().store.maxCommitMs;
  await bounded(daemon.stop(), 30_000, null);
  return { ...result, maxFlushMs, published };
}

const dir = mkdtempSync(join(tmpdir(), 'plateau-e2e-'));
const brokers = [];
section = 'embedded broker start';
const embedded = await startBrokerProcess();
if (embedded.url !== null) brokers.push(['embedded broker (aedes, own process)', embedded.url]);
else console.log('FAILED: the embedded broker process did not say its URL within 15 s: its figures (and the latency and lag sections) are skipped');
section = 'Mosquitto start';
const mosquitto = await ownMosquitto(dir);
if (mosquitto !== null) brokers.push(['Mosquitto (own, free port)', mosquitto.url]);
else if (await reachable(1883)) brokers.push(['Mosquitto 127.0.0.1:1883 (default queue of 1000 QoS 1 messages per client)', 'mqtt://127.0.0.1:1883']);
else console.log('Mosquitto is neither installed nor reachable at 127.0.0.1:1883: its figures are skipped');

const modes = [
  ['one sample per message, QoS 0', 0, 1, quick ? 40_000 : 150_000],
  ['one sample per message, QoS 1', 1, 1, quick ? 30_000 : 100_000],
  ['packs of 1000 samples, QoS 1', 1, 1000, quick ? 300 : 1500],
];
for (const [brokerLabel, url] of brokers) {
  header(`throughput into the daemon and SQLite: ${brokerLabel}`);
  for (const [label, qos, pack, count] of modes) {
    const prefix = `e2e${Math.floor(Math.random() * 1e9)}`;
    section = `${brokerLabel}, ${label}, bare subscriber`;
    const bare = await bareSubscriber(url, qos, pack, prefix, count);
    const bareFailure = failure(bare, bare.published, count * pack);
    if (bareFailure) line(`${label}: bare subscriber`, Math.round(bare.rate).toLocaleString('en'), 'samples/s', `received ${bare.received}/${count * pack}, published ${bare.published?.published ?? 0}, unacknowledged by the broker ${bare.published?.unacknowledged ?? 'unknown'}${bareFailure}`);
    const prefix2 = `e2e${Math.floor(Math.random() * 1e9)}`;
    section = `${brokerLabel}, ${label}, daemon`;
    const daemon = await daemonRun(url, qos, pack, prefix2, count, dir);
    const ratio = daemon.rate / bare.rate;
    const goal = pack > 1 ? `goal >= 1,000,000 samples/s: ${verdict(daemon.rate >= 1e6)}; goal ratio >= 0.8: ${verdict(ratio >= 0.8)}` : `goal ratio >= 0.8: ${verdict(ratio >= 0.8)}`;
    line(`${label}: daemon`, Math.round(daemon.rate).toLocaleString('en'), 'samples/s', `bare subscriber ${Math.round(bare.rate).toLocaleString('en')}/s, ratio ${ratio.toFixed(2)}; received ${daemon.received}/${count * pack} (bare ${bare.received}); longest flush ${daemon.maxFlushMs.toFixed(1)} ms; ${goal}${failure(daemon, daemon.published, count * pack)}${bareFailure ? '; the bare figure FAILED (above)' : ''}`);
  }
}

// Alert latency: a probe channel falls silent for longer than its stale time between samples, so
// each probe sample raises a "fresh" event; the WebSocket client and the probe publisher share this
// process's clock. Background load from the publisher process.
if (embedded.url !== null) {
  section = 'alert latency';
  header('alert latency, publish to WebSocket (embedded broker, steady background load)');
  const prefix = `lat${Math.floor(Math.random() * 1e9)}`;
  const config = parseConfig({
    broker: { url: embedded.url, clientId: `bench-lat-${Date.now()}`, qos: 1 },
    subscriptions: [{ topic: `${prefix}/+`, format: 'json', channel: '{2}' }],
    channels: { defaults: { window: { kind: 'sliding', samples: 4096 }, staleSeconds: 0.2 } },
    store: { path: join(dir, 'latency.sqlite') },
    http: { listen: '127.0.0.1:0' },
    topics: { events: `${prefix}-p/events`, status: `${prefix}-p/status`, command: `${prefix}-p/command` },
    log: { level: 'silent' },
  });
  const daemon = new Daemon(config);
  await daemon.start();
  const server = await startServer(daemon, { host: '127.0.0.1', port: 0, token: null, maxBodyBytes: 65536 });
  const socket = new WebSocket(`${server.url.replace('http', 'ws')}ws`);
  const sent = new Map();
  const latencies = [];
  socket.on('message', (data) => {
    const message = JSON.parse(String(data));
    if (message.type === 'event' && message.event.kind === 'fresh' && message.event.source === 'probe') {
      const at = message.event.at;
      const t0 = sent.get(at);
      if (t0 !== undefined) latencies.push(performance.now() - t0);
    }
  });
  const opened = await bounded(new Promise((resolve) => socket.once('open', () => resolve(true))), 10_000, false);
  const probe = await connectClient(embedded.url, { clientId: `bench-probe-${Date.now()}` });
  if (!opened || probe === null) {
    line('alert latency', 'n/a', 'ms', `FAILED: ${!opened ? 'the WebSocket did not open' : 'the probe publisher got no connection'} within 10 s`);
    probe?.end(true);
    socket.terminate();
    await server.close();
    await bounded(daemon.stop(), 30_000, null);
  } else {
  const loadRate = 5_000;
  const load = runPublisher(embedded.url, 1, quick ? 100_000 : 300_000, 1, prefix, 8, loadRate);
  const probes = quick ? 15 : 40;
  for (let i = 0; i < probes; i++) {
    await new Promise((resolve) => setTimeout(resolve, 1300)); // longer than staleSeconds plus the 1 s stale check
    sent.set(i, performance.now());
    probe.publish(`${prefix}/probe`, JSON.stringify({ v: i, t: Date.now() / 1000 }), { qos: 1 });
  }
  await new Promise((resolve) => setTimeout(resolve, 500));
  latencies.sort((a, b) => a - b);
  const p = (q) => latencies[Math.min(latencies.length - 1, Math.floor(q * latencies.length))];
  line(`alert latency p50 (background ${loadRate.toLocaleString('en')} msgs/s, QoS 1)`, p(0.5)?.toFixed(1), 'ms', `${latencies.length} of ${probes - 1} alerts seen (the first probe creates the channel: no alert)`);
  line('alert latency p99', p(0.99)?.toFixed(1), 'ms', `goal p99 < 50 ms: ${verdict(p(0.99) < 50)}; longest flush ${daemon.health().store.maxCommitMs.toFixed(1)} ms${latencies.length < probes - 1 ? `; FAILED: ${probes - 1 - latencies.length} of ${probes - 1} alerts never seen` : ''}`);
  const loaded = await load;
  if (loaded.failed) line('alert latency: background load', loaded.published ?? 0, 'messages', `FAILED: ${loaded.failed}`);
  probe.end(true);
  socket.close();
  await server.close();
  await bounded(daemon.stop(), 30_000, null);
  }
}

// Ingest lag: samples stamped at publish time arrive faster than the daemon can take them.
if (embedded.url !== null) {
  section = 'ingest lag';
  header('ingest lag when the daemon falls behind');
  const prefix = `lag${Math.floor(Math.random() * 1e9)}`;
  const config = parseConfig({
    broker: { url: embedded.url, clientId: `bench-lag-${Date.now()}`, qos: 1 },
    subscriptions: [{ topic: `${prefix}/+`, format: 'json', channel: '{2}' }],
    channels: { defaults: { window: { kind: 'growing' } } },
    store: { path: join(dir, 'lag.sqlite') },
    http: { listen: '127.0.0.1:0' },
    topics: { events: `${prefix}-p/events`, status: `${prefix}-p/status`, command: `${prefix}-p/command` },
    log: { level: 'silent' },
  });
  const daemon = new Daemon(config, { lagWarningMs: 500 });
  await daemon.start();
  let warned = null;
  daemon.onEvent((event) => {
    if (event.kind === 'ingest-lag' && warned === null) warned = event.body.lagMs;
  });
  let maxLag = 0;
  const timer = setInterval(() => (maxLag = Math.max(maxLag, daemon.counters.ingestLagMs)), 100);
  // Packs of 1000 samples as fast as the publisher can: far more than one core takes.
  const loaded = await runPublisher(embedded.url, 0, quick ? 1000 : 3000, 1000, prefix, 4);
  await new Promise((resolve) => setTimeout(resolve, 3000));
  clearInterval(timer);
  line('largest ingest lag seen in the counters', Math.round(maxLag), 'ms', `${warned !== null ? `warning event (threshold 500 ms here, 5 s by default) raised at ${Math.round(warned)} ms lag` : 'no warning event (the daemon kept up)'}${loaded.failed ? `; FAILED: ${loaded.failed}` : ''}`);
  await bounded(daemon.stop(), 30_000, null);
}

// Row-wise against chunked samples in SQLite.
{
  section = 'sample storage';
  header('sample storage in SQLite (WAL, synchronous NORMAL): 1,000,000 samples in 1000 flushes');
  const rowDb = new Database(join(dir, 'rows.sqlite'));
  rowDb.pragma('journal_mode = WAL');
  rowDb.pragma('synchronous = NORMAL');
  rowDb.exec('CREATE TABLE s (channel INTEGER, seq INTEGER, t REAL, v REAL, PRIMARY KEY (channel, seq)) WITHOUT ROWID');
  const insert = rowDb.prepare('INSERT INTO s VALUES (?, ?, ?, ?)');
  const flushRows = rowDb.transaction((from) => {
    for (let i = from; i < from + 1000; i++) insert.run(i % 8, i, 1.7e12 + i, Math.sin(i));
  });
  let t0 = performance.now();
  for (let f = 0; f < 1000; f++) flushRows(f * 1000);
  const rowsMs = performance.now() - t0;
  rowDb.close();
  const store = new SqliteStore(join(dir, 'chunks.sqlite'));
  const id = 'c';
  t0 = performance.now();
  for (let f = 0; f < 1000; f++) {
    const times = new Float64Array(1000);
    const values = new Float64Array(1000);
    for (let i = 0; i < 1000; i++) {
      times[i] = 1.7e12 + f * 1000 + i;
      values[i] = Math.sin(f * 1000 + i);
    }
    store.commit({ channels: [], chunks: [{ channel: id, firstSeq: f * 1000, times, values, unstamped: null }], events: [], checkpoints: [], marks: [], testPoints: [], records: [], counters: {}, positions: [] }, 0);
  }
  const chunkMs = performance.now() - t0;
  store.close();
  line('row per sample', ((rowsMs * 1000) / 1e6).toFixed(3), 'us/sample');
  line('chunk per channel and flush (chosen)', ((chunkMs * 1000) / 1e6).toFixed(3), 'us/sample', `ratio ${(rowsMs / chunkMs).toFixed(1)}x faster`);
}

// Memory at 10,000 channels.
{
  section = 'memory';
  header('memory at 10,000 channels (sliding windows of 1024 samples, each filled)');
  global.gc?.();
  const before = process.memoryUsage();
  // Through the registry, as the daemon holds them: the pipeline and the remembered payload times.
  const registry = new ChannelRegistry(() => ({ ...DEFAULT_CHANNEL_OPTIONS, window: { kind: 'sliding', samples: 1024, maxSamples: 1024 } }));
  for (let c = 0; c < 10_000; c++) {
    for (let i = 0; i < 1100; i++) registry.accept(`c${c}`, Math.sin(i * 0.1 + c), 1_790_000_000_000 + i * 100, true);
  }
  global.gc?.();
  const after = process.memoryUsage();
  const total = after.heapUsed + after.arrayBuffers - before.heapUsed - before.arrayBuffers;
  line('memory per channel', Math.round(total / 10_000).toLocaleString('en'), 'bytes', `window 1024 samples: ${(total / 10_000 / 1024).toFixed(1)} bytes per windowed sample including fixed state`);
  line('memory for 10,000 channels', (total / 2 ** 20).toFixed(0), 'MiB', `(heap + array buffers; run with --expose-gc for exact figures)`);
  if (registry.size !== 10_000) throw new Error('memory bench: channels missing');
}

// Restart: 10 million stored samples, no checkpoint, replayed through the engine.
{
  section = 'restart';
  header('restart: state rebuilt from 10 million stored samples');
  const total = quick ? 2_000_000 : 10_000_000;
  const channels = 100;
  const path = join(dir, 'restart.sqlite');
  const store = new SqliteStore(path);
  const ids = [];
  for (let c = 0; c < channels; c++) ids.push(`ch${c}`);
  const per = total / channels;
  for (let start = 0; start < per; start += 10_000) {
    const chunks = ids.map((id, c) => {
      const times = new Float64Array(10_000);
      const values = new Float64Array(10_000);
      for (let i = 0; i < 10_000; i++) {
        times[i] = 1.7e12 + (start + i) * 100;
        values[i] = 20 + Math.sin((start + i) * 0.01 + c);
      }
      return { channel: id, firstSeq: start, times, values, unstamped: null };
    });
    store.commit({ channels: [], chunks, events: [], checkpoints: [], marks: [], testPoints: [], records: [], counters: {}, positions: [] }, 0);
  }
  store.close();
  const config = parseConfig({
    broker: { url: embedded.url ?? 'mqtt://127.0.0.1:1', clientId: `bench-restart-${Date.now()}`, qos: 1 },
    subscriptions: [{ topic: 'restart-bench/+', format: 'json' }],
    channels: { defaults: { window: { kind: 'sliding', samples: 4096 } } },
    store: { path },
    http: { listen: '127.0.0.1:0' },
    log: { level: 'silent' },
  });
  const t0 = performance.now();
  const daemon = new Daemon(config);
  await daemon.start();
  const ms = performance.now() - t0;
  line(`restart with ${total.toLocaleString('en')} samples to replay (${channels} channels)`, (ms / 1000).toFixed(1), 's', `${Math.round(total / (ms / 1000)).toLocaleString('en')} samples/s replayed`);
  const t1 = performance.now();
  await daemon.stop(); // writes a checkpoint of every channel
  const daemon2 = new Daemon(config);
  await daemon2.start();
  line('restart again, from the checkpoints written at stop', ((performance.now() - t1) / 1000).toFixed(2), 's', `${daemon2.counters.restoredSamples} samples replayed`);
  await daemon2.stop();
}

embedded.stop();
mosquitto?.stop();
rmSync(dir, { recursive: true, force: true });
process.exit(0);
