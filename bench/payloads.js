// Payload formats at line rate (issue 13). Figures and ratios from one run:
//  - decode cost per sample of a pack of 1000 samples in each format (in this process, best of 5);
//  - samples/s at QoS 1 with packs of 1000 samples through Mosquitto into the daemon and SQLite, in
//    binary frames and in SenML CBOR, against a bare subscriber's samples/s on the same broker in
//    the same run (it reads each pack as the daemon must: the frame header, or the CBOR document),
//    with the daemon's CPU time per sample; JSON packs as the baseline of the same run. Mosquitto: one
//    of the benchmark's own on a free port (the machine's at 127.0.0.1:1883 only when none is installed).
// Every wait is bounded: a stalled run is reported as a failed figure, never as silence.
// Run: npm run bench:payloads     (QUICK=1 for a shorter run)
import { spawn } from 'node:child_process';
import { connect, createServer } from 'node:net';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import mqtt from 'mqtt';
import { Decoder, Encoder } from 'cbor-x';
import { parseConfig } from '../dist/config/load-config.js';
import { Daemon } from '../dist/daemon/daemon.js';
import { decodePayload, PayloadDecoders, DECODER_DEFAULTS } from '../dist/ingest/payload-decoder.js';
import { encodeFrame, readFrameHeader, FRAME_FLOAT32 } from '../dist/ingest/binary-frame.js';
import { bestOf, header, line, nsPer, verdict } from './harness.js';

const here = dirname(fileURLToPath(import.meta.url));
const quick = process.env.QUICK === '1';
const PACK = 1000;
const COUNT = quick ? 400 : 2000;

header('payload decoding, per sample of a pack of 1000');
{
  const t = 1_764_300_000;
  const values = Array.from({ length: PACK }, (_, k) => 20 + Math.sin(k * 0.1));
  const json = Buffer.from(JSON.stringify(values.map((v, k) => ({ v, t: t + k * 1e-3 }))));
  const senml = Buffer.from(JSON.stringify(values.map((v, k) => (k === 0 ? { bn: 'c0', bt: t, v } : { t: k * 1e-3, v }))));
  const cbor = new Encoder({ mapsAsObjects: false, useRecords: false, variableMapSize: true }).encode(values.map((v, k) => (k === 0 ? new Map([[-2, 'c0'], [-3, t], [2, v]]) : new Map([[6, k * 1e-3], [2, v]]))));
  const cases = [
    ['json (array of {v, t})', json, 'json', '{2}'],
    ['senml (JSON)', senml, 'senml', '{name}'],
    ['senml-cbor', cbor, 'senml-cbor', '{name}'],
    ['binary, float64', Buffer.from(encodeFrame('c0', t, 1e-3, values)), 'binary', '{name}'],
    ['binary, float32', Buffer.from(encodeFrame('c0', t, 1e-3, values, FRAME_FLOAT32)), 'binary', '{name}'],
  ];
  for (const [label, payload, format, channel] of cases) {
    const spec = { ...DECODER_DEFAULTS, format, channel };
    const check = decodePayload('rig/c0', payload, spec, Date.now());
    const n = check.samples.length + (check.blocks?.[0]?.length ?? 0);
    if (n !== PACK || check.rejections.length > 0) throw new Error(`${label}: decoded ${n} samples, ${check.rejections.length} rejections`);
    // As the daemon decodes: one PayloadDecoders (binary frames reuse its typed arrays).
    const decoders = new PayloadDecoders();
    const ms = bestOf(5, () => {
      for (let r = 0; r < 50; r++) decoders.decode('rig/c0', payload, spec, Date.now());
    });
    line(`decode ${label}`, nsPer(ms, 50 * PACK).toFixed(1), 'ns/sample', `${payload.length} bytes per pack`);
  }
}

function reachable(port) {
  return new Promise((resolve) => {
    const socket = connect({ host: '127.0.0.1', port });
    socket.setTimeout(500, () => (socket.destroy(), resolve(false)));
    socket.once('connect', () => (socket.destroy(), resolve(true)));
    socket.once('error', () => resolve(false));
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

async function ownMosquitto() {
  const binary = ['/usr/sbin/mosquitto', '/usr/bin/mosquitto'].find((p) => existsSync(p));
  if (!binary) return null;
  const port = await freePort();
  const dir = mkdtempSync(join(tmpdir(), 'plateau-bench-mosq-'));
  writeFileSync(join(dir, 'm.conf'), [`listener ${port} 127.0.0.1`, 'allow_anonymous true', 'persistence false', 'max_queued_messages 100000', 'max_inflight_messages 0', 'log_dest none', ''].join('\n'));
  const child = spawn(binary, ['-c', join(dir, 'm.conf')], { stdio: 'ignore' });
  for (let i = 0; i < 100 && !(await reachable(port)); i++) await new Promise((r) => setTimeout(r, 50));
  return { url: `mqtt://127.0.0.1:${port}`, stop: () => child.kill('SIGTERM') };
}

/** The publisher in its own process; killed (and reported) when it has not finished within limitMs. */
function runPublisher(url, format, prefix, limitMs) {
  return new Promise((resolve) => {
    const child = spawn(process.execPath, [join(here, 'payloads-publisher.js'), url, '1', String(COUNT), String(PACK), prefix, '8', format], { stdio: ['ignore', 'pipe', 'inherit'] });
    let out = '';
    const timer = setTimeout(() => child.kill('SIGKILL'), limitMs);
    child.stdout.on('data', (d) => (out += d));
    child.on('exit', (code) => {
      clearTimeout(timer);
      resolve(code === 0 ? JSON.parse(out) : { failed: `publisher ${code === null ? 'killed after a stall' : `exited ${code}`}` });
    });
  });
}

/** Samples counted until all arrived, or the stream was quiet for quietMs, or limitMs passed. */
async function measure(receivedNow, expected, quietMs = 3000, limitMs = 120_000) {
  const start = Date.now();
  let first = 0;
  let last = 0;
  let lastCount = 0;
  let lastChange = start;
  for (;;) {
    const n = receivedNow();
    const now = Date.now();
    if (n > 0 && first === 0) first = now;
    if (n !== lastCount) {
      lastCount = n;
      last = now;
      lastChange = now;
    }
    if (n >= expected || (first > 0 && now - lastChange > quietMs) || now - start > limitMs || (first === 0 && now - start > 20_000)) break;
    await new Promise((resolve) => setTimeout(resolve, 5));
  }
  return { received: lastCount, rate: lastCount / Math.max(1e-3, (last - first) / 1000), stalled: lastCount < expected };
}

async function bare(url, format, prefix) {
  const client = mqtt.connect(url, { clientId: `bench-pl-bare-${Date.now()}`, clean: true });
  await new Promise((resolve) => client.once('connect', resolve));
  await client.subscribeAsync(`${prefix}/+`, { qos: 1 });
  const decoder = new Decoder({ mapsAsObjects: false, useRecords: false });
  let samples = 0;
  client.on('message', (_topic, payload) => {
    // Read each pack as the daemon has to before it can take a sample from it.
    if (format === 'binary') {
      const h = readFrameHeader(payload, 1e6);
      if ('count' in h) samples += h.count;
    } else if (format === 'json') samples += JSON.parse(payload.toString()).length;
    else samples += decoder.decode(payload).length;
  });
  const publishing = runPublisher(url, format, prefix, 180_000);
  const result = await measure(() => samples, COUNT * PACK);
  const published = await publishing;
  client.end(true);
  return { ...result, published };
}

async function daemonRun(url, format, prefix, dir) {
  const config = parseConfig({
    broker: { url, clientId: `bench-pl-daemon-${Date.now()}`, qos: 1, reconnectPeriodMs: 200 },
    subscriptions: [format === 'json' ? { topic: `${prefix}/+`, format, channel: '{2}' } : { topic: `${prefix}/+`, format, maxSamples: 10_000 }],
    channels: { defaults: { window: { kind: 'sliding', samples: 4096 } } },
    store: { path: join(dir, `${prefix}.sqlite`) },
    http: { listen: '127.0.0.1:0' },
    topics: { events: `${prefix}-p/events`, status: `${prefix}-p/status`, command: `${prefix}-p/command` },
    log: { level: 'silent' },
  });
  const daemon = new Daemon(config);
  await daemon.start();
  await new Promise((resolve) => setTimeout(resolve, 300));
  const cpu0 = process.cpuUsage();
  const publishing = runPublisher(url, format, prefix, 180_000);
  const result = await measure(() => daemon.counters.accepted, COUNT * PACK);
  const cpu = process.cpuUsage(cpu0);
  const published = await publishing;
  const rejected = Object.values(daemon.counters.rejected).reduce((a, b) => a + b, 0);
  await daemon.stop();
  return { ...result, published, cpuUsPerSample: (cpu.user + cpu.system) / Math.max(1, result.received), rejected };
}

header(`packs of ${PACK} samples at QoS 1 through Mosquitto (${COUNT} packs per run, 8 channels, AR(1) noise)`);
// A Mosquitto of the benchmark's own (its QoS 1 queue raised so that nothing is dropped, and no
// one else's traffic on it); the machine's at 127.0.0.1:1883 only when Mosquitto is not installed.
let broker = null;
const own = await ownMosquitto();
if (own) broker = { ...own, label: 'Mosquitto (own, free port)' };
else if (await reachable(1883)) broker = { url: 'mqtt://127.0.0.1:1883', stop: () => {}, label: 'Mosquitto 127.0.0.1:1883' };
if (broker === null) console.log('Mosquitto is neither reachable at 127.0.0.1:1883 nor installed: the throughput figures are skipped');
else {
  const dir = mkdtempSync(join(tmpdir(), 'plateau-bench-pl-'));
  // JSON packs (the format bench:e2e measures) are the baseline of the same run.
  for (const format of ['binary', 'senml-cbor', 'json']) {
    const stamp = Date.now().toString(36);
    const b = await bare(broker.url, format, `bpl-bare-${format}-${stamp}`);
    const d = await daemonRun(broker.url, format, `bpl-d-${format}-${stamp}`, dir);
    const ratio = d.rate / b.rate;
    const failed = [b, d].map((r) => r.published.failed ?? (r.stalled ? `stalled at ${r.received} of ${COUNT * PACK}` : null)).filter(Boolean);
    line(`${format}: bare subscriber`, Math.round(b.rate).toLocaleString('en'), 'samples/s', `received ${b.received}/${COUNT * PACK}`);
    line(
      `${format}: daemon`,
      Math.round(d.rate).toLocaleString('en'),
      'samples/s',
      `ratio ${ratio.toFixed(2)} (goal >= 0.8: ${verdict(ratio >= 0.8)}); goal >= 1,000,000/s: ${verdict(d.rate >= 1e6)}; CPU ${d.cpuUsPerSample.toFixed(2)} us/sample; received ${d.received}/${COUNT * PACK}, rejected ${d.rejected}${failed.length ? `; FAILED: ${failed.join('; ')}` : ''}`,
    );
  }
  broker.stop();
}
console.log(`load average ${(await import('node:os')).loadavg().map((x) => x.toFixed(1)).join(' ')} on ${(await import('node:os')).cpus().length} cores`);
process.exit(0);
