// Load generator for bench/e2e.js, run in its own process: publishes COUNT messages as fast as the
// client allows (QoS 0 or 1), each one sample or a pack of PACK samples, with payload time stamps.
// Usage: node bench/e2e-publisher.js URL QOS COUNT PACK PREFIX CHANNELS [RATE messages/s]
import mqtt from 'mqtt';

const [url, qosText, countText, packText, prefix, channelsText] = process.argv.slice(2);
const qos = Number(qosText);
const count = Number(countText);
const pack = Number(packText);
const channels = Number(channelsText ?? 8);
const rate = Number(process.argv[8] ?? 0);
const client = mqtt.connect(url, { clientId: `bench-pub-${process.pid}`, clean: true });
await new Promise((resolve) => client.once('connect', resolve));
// Many publishes wait for the socket to drain at once: that is the point of a load generator.
client.stream?.setMaxListeners?.(0);
const start = Date.now();
let t = Date.now() / 1000;
let inflight = 0;
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
  inflight++;
  client.publish(`${prefix}/${channel}`, payload, { qos }, () => inflight--);
  // Keep the client's own queue bounded so memory stays flat; hold a steady rate when asked.
  if (inflight > 2000) await new Promise((resolve) => setImmediate(resolve));
  if (rate > 0 && i % 50 === 49) {
    const due = start + ((i + 1) / rate) * 1000;
    const wait = due - Date.now();
    if (wait > 0) await new Promise((resolve) => setTimeout(resolve, wait));
  }
}
while (inflight > 0) await new Promise((resolve) => setTimeout(resolve, 5));
process.stdout.write(JSON.stringify({ published: count, ms: Date.now() - start }) + '\n');
client.end(true);
