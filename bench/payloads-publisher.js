// Load generator for bench/payloads.js, in its own process: COUNT packs of PACK samples at QoS 1 (or
// 0), as binary frames (float64) or SenML CBOR packs, on PREFIX/c<i> over CHANNELS channels, as fast
// as the client allows with at most 2000 publishes in flight. Prints {published, ms}.
// Usage: node bench/payloads-publisher.js URL QOS COUNT PACK PREFIX CHANNELS FORMAT
import mqtt from 'mqtt';
import { Encoder } from 'cbor-x';
import { encodeFrame } from '../dist/ingest/binary-frame.js';

const [url, qosText, countText, packText, prefix, channelsText, format] = process.argv.slice(2);
const qos = Number(qosText);
const count = Number(countText);
const pack = Number(packText);
const channels = Number(channelsText);
const cbor = new Encoder({ mapsAsObjects: false, useRecords: false, variableMapSize: true });
const client = mqtt.connect(url, { clientId: `bench-pl-pub-${process.pid}`, clean: true });
await new Promise((resolve) => client.once('connect', resolve));
client.stream?.setMaxListeners?.(0);
const start = Date.now();
const t0 = Date.now() / 1000 - 3600;
const values = new Float64Array(pack);
let x = 0;
let inflight = 0;
/** Messages published when the acknowledgements stopped for 60 s (0: they never did). */
let stalled = 0;
const MAX_INFLIGHT = 2000;
let wake = null;
function acknowledged() {
  inflight--;
  if (wake !== null && inflight < MAX_INFLIGHT) {
    const resolve = wake;
    wake = null;
    resolve(true);
  }
}
/** Resolves once fewer than MAX_INFLIGHT messages wait for their acknowledgement, or after 60 s (false). */
function belowLimit() {
  return new Promise((resolve) => {
    const timer = setTimeout(() => ((wake = null), resolve(false)), 60_000);
    wake = (ok) => (clearTimeout(timer), resolve(ok));
  });
}
for (let i = 0; i < count; i++) {
  const c = i % channels;
  const first = t0 + Math.floor(i / channels) * pack * 1e-3;
  // AR(1) noise (phi 0.5) about 20: a measurement, not a pure sinusoid (whose spectral line the
  // channel's diagnosis would refine at every check).
  for (let k = 0; k < pack; k++) values[k] = 20 + (x = 0.5 * x + Math.random() - 0.5);
  let payload;
  if (format === 'binary') payload = Buffer.from(encodeFrame(`c${c}`, first, 1e-3, values));
  else if (format === 'json') payload = JSON.stringify(Array.from(values, (v, k) => ({ v, t: first + k * 1e-3 })));
  else {
    const records = new Array(pack);
    records[0] = new Map([[-2, `c${c}`], [-3, first], [2, values[0]]]);
    for (let k = 1; k < pack; k++) records[k] = new Map([[6, k * 1e-3], [2, values[k]]]);
    payload = cbor.encode(records);
  }
  inflight++;
  client.publish(`${prefix}/c${c}`, payload, { qos }, acknowledged);
  // At most MAX_INFLIGHT unacknowledged: the client's 16-bit message ids wrap after 65,535 and
  // reuse the id of a message still in flight, whose acknowledgement callback is then lost (with
  // 'yield once per publish' here, a broker slower than the publisher let bench:e2e's 100,000
  // one-sample messages pass that and the publisher waited forever). The wait is bounded.
  if (inflight >= MAX_INFLIGHT && !(await belowLimit())) {
    stalled = i + 1;
    break;
  }
}
const deadline = Date.now() + 60_000;
while (inflight > 0 && Date.now() < deadline) await new Promise((resolve) => setTimeout(resolve, 5));
process.stdout.write(JSON.stringify({ published: stalled || count, unacknowledged: inflight, ms: Date.now() - start, ...(stalled ? { failed: `no acknowledgement for 60 s: published ${stalled} of ${count}` } : {}) }) + '\n');
client.end(true);
