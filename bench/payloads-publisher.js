// Load generator for bench/payloads.js, in its own process: COUNT packs of PACK samples at QoS 1 (or
// 0), as binary frames (float64) or SenML CBOR packs, on PREFIX/c<i> over CHANNELS channels, as fast
// as the client allows with at most 2000 publishes in flight. Prints {published, ms}.
// Usage: node bench/payloads-publisher.js URL QOS COUNT PACK PREFIX CHANNELS FORMAT
import mqtt from 'mqtt';
import { InflightWindow } from './inflight-window.js';
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
/** Messages published when the acknowledgements stopped for 60 s (0: they never did). */
let stalled = 0;
const inflight = new InflightWindow(2000, 60_000);
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
  inflight.track();
  client.publish(`${prefix}/c${c}`, payload, { qos }, inflight.acknowledged);
  // At most 2000 unacknowledged (bench/inflight-window.js says why); the wait is bounded.
  if (!(await inflight.room())) {
    stalled = i + 1;
    break;
  }
}
await inflight.drained();
process.stdout.write(JSON.stringify({ published: stalled || count, unacknowledged: inflight.count, ms: Date.now() - start, ...(stalled ? { failed: `no acknowledgement for 60 s: published ${stalled} of ${count}` } : {}) }) + '\n');
client.end(true);
