// Load generator for bench/e2e.js, run in its own process: publishes COUNT messages as fast as the
// client allows (QoS 0 or 1), each one sample or a pack of PACK samples, with payload time stamps.
// Usage: node bench/e2e-publisher.js URL QOS COUNT PACK PREFIX CHANNELS [RATE messages/s] [ACK_WAIT_MS]
// Every wait is bounded: the connection (10 s), and the acknowledgements of QoS 1 messages after the
// last publish (ACK_WAIT_MS, default 60 s). It always prints what happened: messages published,
// how many the broker has not acknowledged, and the client's reconnections (a stall then shows which
// side lost the acknowledgements: the harness compares with what its subscriber received).
import mqtt from 'mqtt';
import { InflightWindow } from './inflight-window.js';

const [url, qosText, countText, packText, prefix, channelsText] = process.argv.slice(2);
const qos = Number(qosText);
const count = Number(countText);
const pack = Number(packText);
const channels = Number(channelsText ?? 8);
const rate = Number(process.argv[8] ?? 0);
const ackWaitMs = Number(process.argv[9] ?? 60_000);
const client = mqtt.connect(url, { clientId: `bench-pub-${process.pid}`, clean: true, connectTimeout: 10_000 });
let reconnects = 0;
client.on('reconnect', () => reconnects++);
const connected = await new Promise((resolve) => {
  const timer = setTimeout(() => resolve(false), 10_000);
  client.once('connect', () => (clearTimeout(timer), resolve(true)));
});
if (!connected) {
  process.stdout.write(JSON.stringify({ published: 0, unacknowledged: 0, reconnects, failed: `no connection to ${url} within 10 s` }) + '\n');
  process.exit(0);
}
// Many publishes wait for the socket to drain at once: that is the point of a load generator.
client.stream?.setMaxListeners?.(0);
const start = Date.now();
let t = Date.now() / 1000;
/** Messages published when the acknowledgements stopped for 60 s (0: they never did). */
let stalled = 0;
const inflight = new InflightWindow(2000, 60_000);
for (let i = 0; i < count; i++) {
  const channel = `c${i % channels}`;
  let payload;
  if (pack > 1) {
    const samples = [];
    for (let k = 0; k < pack; k++) {
      t += 1e-4;
      samples.push({ v: 20 + Math.sin(i + k * 0.1), t });
    }
    payload = JSON.stringify(samples);
  } else {
    t += 1e-4;
    payload = `{"v":${20 + Math.sin(i)},"t":${t}}`;
  }
  inflight.track();
  client.publish(`${prefix}/${channel}`, payload, { qos }, inflight.acknowledged);
  // Keep the client's own queue bounded so memory stays flat; hold a steady rate when asked.
  // At most 2000 unacknowledged (bench/inflight-window.js says why); the wait is bounded.
  if (!(await inflight.room())) {
    stalled = i + 1;
    break;
  }
  if (rate > 0 && i % 50 === 49) {
    const due = start + ((i + 1) / rate) * 1000;
    const wait = due - Date.now();
    if (wait > 0) await new Promise((resolve) => setTimeout(resolve, wait));
  }
}
await inflight.drained(ackWaitMs);
const result = { published: stalled || count, unacknowledged: inflight.count, reconnects, ms: Date.now() - start };
if (stalled) result.failed = `no acknowledgement for 60 s with ${inflight.count} QoS ${qos} messages in flight: published ${stalled} of ${count} (client connected: ${client.connected}, reconnections: ${reconnects})`;
else if (inflight.count > 0) {
  // What the client still holds: messages it sent and got no PUBACK for (its outgoing store), and
  // whether its connection is up; a broker that dropped acknowledgements leaves them here.
  result.failed = `${inflight.count} QoS ${qos} messages without an acknowledgement ${ackWaitMs / 1000} s after the last publish (client connected: ${client.connected}, reconnections: ${reconnects}, outgoing held by the client: ${Object.keys(client.outgoing ?? {}).length})`;
}
process.stdout.write(JSON.stringify(result) + '\n');
client.end(true);
process.exit(0);
