import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { connect, type NatsConnection } from '@nats-io/transport-node';
import { jetstream } from '@nats-io/jetstream';
import { analyzeFile } from '../../src/cli/analyze.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';
import { SeededRandom, ar1Series } from '../../src/core/random/seeded-random.js';
import { waitFor, within } from '../helpers/brokers.js';
import { getJson, killHard, startDaemonProcess, type DaemonProcess } from '../helpers/daemon-process.js';
import { startOwnNatsServer, type OwnNatsServer } from '../helpers/nats-server.js';

// Takeover from the shared checkpoints: two workers (`plateau run` processes from dist/) on a
// nats-server of the test's own, store.checkpointSamples 500. After 2000 samples per channel the
// worker holding the most channels is killed with SIGKILL; the survivor takes its partition, restores
// its channels from the partition's checkpoint in the shared bucket and reads the stream only after
// the checkpoint's sequence: at most 500 samples per channel are replayed (before, the whole
// partition from its first message). Then 1000 more samples: every channel equals `plateau analyze`
// on the same samples field for field, nothing lost, nothing counted twice. Skipped with a message
// when nats-server is not installed.

const P = 2;
const CHECKPOINT = 500;
const N = 2000;
const TOTAL = 3000;
const T0 = 1_765_000_000;
const CHANNELS = ['t0', 't1', 't2', 't3', 't4', 't5'];

interface Counters {
  samples: { accepted: number; rejected: Record<string, number> };
  scale?: {
    partitions: number[];
    channels: { name: string; partition: number | null; held: boolean }[];
    sharedCheckpoints: { written: number; restored: number; last: { seq: number; bytes: number } | null; lastRestore: { partition: number; seq: number; channels: number; bytes: number; from: Record<string, number> } | null } | null;
  };
}

let server: OwnNatsServer | null = null;
beforeAll(async () => {
  server = await startOwnNatsServer({ mappings: { 'lab.*.*': `part.{{partition(${P},1,2)}}.lab.{{wildcard(1)}}.{{wildcard(2)}}` } });
  if (server === null) console.log('nats-server is not installed: the takeover test is skipped');
}, 20_000);
afterAll(async () => {
  await server?.stop();
});

function workerConfig(worker: string, dir: string): Record<string, unknown> {
  return {
    broker: { url: (server as OwnNatsServer).url },
    scale: { partitions: P, stream: 'TAKE', worker, leaseSeconds: 2 },
    subscriptions: [{ topic: 'lab/+/+', format: 'json', channel: '{3}', valueField: 'v', timeField: 't', timeUnit: 's' }],
    channels: { defaults: { window: { kind: 'growing' } } },
    store: { path: join(dir, `${worker}.sqlite`), checkpointSamples: CHECKPOINT },
    http: { listen: '127.0.0.1:0' },
    log: { level: 'info' },
  };
}

const counters = (w: DaemonProcess) => getJson<Counters>(new URL('api/counters', w.url).href);
const channelsOf = async (w: DaemonProcess) => (await getJson<{ channels: Record<string, unknown>[] }>(new URL('api/channels', w.url).href)).channels;
const taken = (view: Record<string, unknown> | undefined) => (view === undefined ? -1 : Number(view.n) + Number(view.excluded));

describe('takeover from the shared checkpoints', () => {
  it('kill -9: the survivor restores from the checkpoint, replays at most checkpointSamples per channel, and ends equal to plateau analyze', async (context) => {
    if (server === null) return context.skip();
    const dir = mkdtempSync(join(tmpdir(), 'plateau-takeover-'));
    const workers = new Map<string, DaemonProcess>();
    const nc: NatsConnection = await within(10_000, 'a client connection', connect({ servers: server.url }));
    try {
      for (const name of ['w1', 'w2']) workers.set(name, await startDaemonProcess(dir, workerConfig(name, dir), `${name}.yaml`, join(dir, `${name}.log`)));
      await waitFor(async () => (await Promise.all([...workers.values()].map(async (w) => (await counters(w)).scale?.partitions.length ?? 0))).every((n) => n === 1), 20_000, 'one partition each', 200);
      const random = new SeededRandom(31);
      const data = Object.fromEntries(CHANNELS.map((c, i) => [c, Array.from(ar1Series(random, 0.4, TOTAL), (v) => 50 + i + 0.2 * v)])) as Record<string, number[]>;
      const rows = [`time,${CHANNELS.join(',')}`];
      const js = jetstream(nc);
      const publish = async (from: number, to: number) => {
        let acks: Promise<unknown>[] = [];
        for (let i = from; i < to; i++) {
          const t = T0 + i * 0.01;
          rows.push(`${t},${CHANNELS.map((c) => data[c]?.[i]).join(',')}`);
          for (const c of CHANNELS) acks.push(js.publish(`lab.rig${c}.${c}`, JSON.stringify({ v: data[c]?.[i], t })));
          if (i % 100 === 99) {
            await Promise.all(acks);
            acks = [];
          }
        }
        await Promise.all(acks);
      };
      await within(60_000, `the first ${N} samples of each channel to be stored by the stream`, publish(0, N));
      // Every sample taken, and the checkpoints written, before the kill.
      const held = async () => {
        const out = new Map<string, { worker: string; n: number }>();
        for (const [name, w] of workers) {
          const status = (await counters(w)).scale;
          const views = await channelsOf(w);
          for (const ch of status?.channels ?? []) if (ch.held) out.set(ch.name, { worker: name, n: taken(views.find((v) => v.name === ch.name)) });
        }
        return out;
      };
      await waitFor(async () => {
        const h = await held();
        return CHANNELS.every((c) => h.get(c)?.n === N);
      }, 60_000, `every channel to take ${N} samples`, 250);
      const before = await held();
      const perWorker = new Map<string, string[]>();
      for (const [c, h] of before) perWorker.set(h.worker, [...(perWorker.get(h.worker) ?? []), c]);
      const [victim, orphaned] = [...perWorker].sort((a, b) => b[1].length - a[1].length)[0] as [string, string[]];
      const survivor = [...workers.keys()].find((name) => name !== victim) as string;
      await waitFor(async () => (await counters(workers.get(victim) as DaemonProcess)).scale?.sharedCheckpoints?.last != null, 20_000, `a shared checkpoint from ${victim}`, 200);
      // Whatever is being written when the worker dies, the checkpoint before it stands.
      await new Promise((resolve) => setTimeout(resolve, 500));
      await killHard(workers.get(victim) as DaemonProcess);
      const killedAt = Date.now();
      workers.delete(victim);
      const next = workers.get(survivor) as DaemonProcess;
      await waitFor(async () => (await counters(next)).scale?.partitions.length === P, 20_000, 'the survivor to hold both partitions', 100);
      const takeoverMs = Date.now() - killedAt;
      await within(60_000, `the last ${TOTAL - N} samples of each channel to be stored by the stream`, publish(N, TOTAL));
      await waitFor(async () => (await channelsOf(next)).filter((v) => taken(v) === TOTAL).length === CHANNELS.length, 60_000, `every channel to take ${TOTAL} samples on the survivor`, 250);
      const shared = (await counters(next)).scale?.sharedCheckpoints;
      // Restored from the victim's partition checkpoint, each channel at most CHECKPOINT samples behind what it had taken.
      expect(shared?.lastRestore, 'a restore from the shared checkpoint').not.toBeNull();
      const from = shared?.lastRestore?.from ?? {};
      expect(Object.keys(from).sort()).toEqual([...orphaned].sort());
      for (const c of orphaned) expect(N - (from[c] ?? 0), `${c}: samples replayed from the stream after the takeover`).toBeLessThanOrEqual(CHECKPOINT);
      const log = readFileSync(join(dir, `${survivor}.log`), 'utf8');
      const restoreLine = log.split('\n').find((l) => l.includes('restored from the shared checkpoint'));
      expect(restoreLine, 'the survivor says it restored from the shared checkpoint').toBeDefined();
      // Exact: every channel equals plateau analyze on the same samples, field for field (nothing lost, nothing counted twice).
      const file = join(dir, 'same.csv');
      writeFileSync(file, `${rows.join('\n')}\n`);
      const report = await analyzeFile(file, DEFAULT_CHANNEL_OPTIONS);
      const views = await channelsOf(next);
      for (const c of CHANNELS) {
        const fromLab = views.find((v) => v.name === c) as Record<string, unknown>;
        const fromFile = report.channels.find((x) => x.name === c) as unknown as Record<string, unknown>;
        expect(taken(fromFile)).toBe(TOTAL);
        for (const key of ['n', 'mean', 'sd', 'acf', 'tauInt', 'nEff', 'standardUncertainty', 'dof', 'coverageFactor', 'expandedUncertainty', 'confidence', 'state', 'excluded', 'stationarity', 'allan', 'estimators']) {
          expect(fromLab[key], `${c}.${key}`).toEqual(fromFile[key]);
        }
      }
      const k = await counters(next);
      expect(k.samples.rejected.duplicate).toBe(0);
      expect(k.samples.rejected['out-of-order']).toBe(0);
      const replayed = orphaned.map((c) => N - (from[c] ?? 0));
      console.log(`takeover: ${victim} (channels ${orphaned.join(',')}) killed after ${N} samples each; ${survivor} held both partitions ${takeoverMs} ms later, restored ${shared?.lastRestore?.channels} channels (${shared?.lastRestore?.bytes} bytes) at stream sequence ${shared?.lastRestore?.seq} and replayed ${replayed.join(',')} samples per channel (checkpointSamples ${CHECKPOINT})`);
    } catch (error) {
      for (const [name, w] of workers) console.log(`--- ${name}\n${w.stderr().slice(-3000)}`);
      console.log(`logs in ${dir}`);
      throw error;
    } finally {
      await nc.close();
      for (const w of workers.values()) await killHard(w);
    }
  }, 180_000);
});
