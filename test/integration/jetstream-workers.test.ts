import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { connect, type NatsConnection } from '@nats-io/transport-node';
import { jetstream, jetstreamManager } from '@nats-io/jetstream';
import type { MqttClient } from 'mqtt';
import { analyzeFile } from '../../src/cli/analyze.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';
import { SeededRandom, ar1Series } from '../../src/core/random/seeded-random.js';
import { mqttClient, publishAsync, waitFor } from '../helpers/brokers.js';
import { getJson, killHard, startDaemonProcess, type DaemonProcess } from '../helpers/daemon-process.js';
import { startOwnNatsServer, type OwnNatsServer } from '../helpers/nats-server.js';

// A lab of three workers (`plateau run` processes from dist/, each with its own SQLite file) on a
// nats-server of the test's own (JetStream, its MQTT listener, the subject mapping into four
// partitions). Seeded series are published, half over NATS into the stream, half at QoS 1 over
// MQTT into the server's MQTT listener; mid-stream one worker is killed with SIGKILL. The others
// take its partitions over, and every channel's result, read from the worker that owns its
// partition, equals `plateau analyze` on the same samples field for field: nothing lost, nothing
// counted twice. Skipped with a message when nats-server is not installed.

const P = 4;
/** Samples per channel before the victim rejoins, and in all. */
const N = 1200;
const TOTAL = 1800;
const T0 = 1_764_000_000;
const NATS_CHANNELS = ['c0', 'c1', 'c2', 'c3'];
const MQTT_CHANNELS = ['c4', 'c5', 'c6', 'c7'];
const CHANNELS = [...NATS_CHANNELS, ...MQTT_CHANNELS];
const LEASE_SECONDS = 2;

function series(): Record<string, number[]> {
  const random = new SeededRandom(12);
  const out: Record<string, number[]> = {};
  CHANNELS.forEach((name, i) => {
    out[name] = Array.from(ar1Series(random, 0.2 + 0.1 * i, TOTAL), (v) => 20 + i + 0.05 * v);
  });
  return out;
}

function topicOf(channel: string): string {
  return `lab/${NATS_CHANNELS.includes(channel) ? 'rigA' : 'rigB'}/${channel}`;
}

interface Counters {
  samples: { accepted: number; rejected: Record<string, number> };
  redeliveriesSkipped: number;
  scale?: { worker: string; partitions: number[]; workers: string[]; channels: { name: string; partition: number | null; held: boolean }[] };
}

let server: OwnNatsServer | null = null;
beforeAll(async () => {
  server = await startOwnNatsServer({ mqtt: true, mappings: { 'lab.*.*': `part.{{partition(${P},1,2)}}.lab.{{wildcard(1)}}.{{wildcard(2)}}` } });
  if (server === null) console.log('nats-server is not installed: the JetStream lab test is skipped');
}, 20_000);
afterAll(async () => {
  await server?.stop();
});

function workerConfig(worker: string, dir: string): Record<string, unknown> {
  return {
    broker: { url: (server as OwnNatsServer).url },
    scale: { partitions: P, stream: 'LAB', worker, leaseSeconds: LEASE_SECONDS },
    subscriptions: [{ topic: 'lab/+/+', format: 'json', channel: '{3}', valueField: 'v', timeField: 't', timeUnit: 's' }],
    channels: { defaults: { window: { kind: 'growing' } } },
    store: { path: join(dir, `${worker}.sqlite`) },
    http: { listen: '127.0.0.1:0' },
    log: { level: process.env.PLATEAU_TEST_LOG === '1' ? 'info' : 'warn' },
  };
}

async function counters(w: DaemonProcess): Promise<Counters> {
  return getJson<Counters>(new URL("api/counters", w.url).href);
}

/** Samples a channel took: those in its window and those its warm-up cut. */
function taken(view: Record<string, unknown> | undefined): number {
  return view === undefined ? -1 : Number(view.n) + Number(view.excluded);
}

/** Every channel of the lab view equals `plateau analyze` on the samples published so far, field for field. */
async function compare(view: Map<string, Record<string, unknown>>, rows: string[], dir: string, label: string): Promise<void> {
  const count = rows.length - 1;
  const file = join(dir, `${label}.csv`);
  writeFileSync(file, `${rows.join('\n')}\n`);
  const report = await analyzeFile(file, DEFAULT_CHANNEL_OPTIONS);
  for (const c of CHANNELS) {
    const fromLab = view.get(c) as Record<string, unknown>;
    const fromFile = report.channels.find((x) => x.name === c) as unknown as Record<string, unknown>;
    expect(taken(fromFile), `${label}: ${c} samples in plateau analyze`).toBe(count);
    for (const key of ['n', 'mean', 'sd', 'acf', 'tauInt', 'nEff', 'standardUncertainty', 'dof', 'coverageFactor', 'expandedUncertainty', 'confidence', 'state', 'excluded', 'stationarity', 'allan', 'estimators']) {
      expect(fromLab[key], `${label}: ${c}.${key}`).toEqual(fromFile[key]);
    }
  }
}

describe('a lab of three workers on JetStream', () => {
  it('kill -9 of one worker mid-stream: its partitions are taken over, every channel equals plateau analyze on the same samples', async (context) => {
    if (server === null) return context.skip();
    const dir = mkdtempSync(join(tmpdir(), 'plateau-lab-'));
    const workers = new Map<string, DaemonProcess>();
    const nc: NatsConnection = await connect({ servers: server.url });
    let mqtt: MqttClient | null = null;
    try {
      for (const name of ['w1', 'w2', 'w3']) workers.set(name, await startDaemonProcess(dir, workerConfig(name, dir), `${name}.yaml`, join(dir, `${name}.log`)));
      // The partitions spread evenly before the samples come: each worker holds some, none twice.
      const spread = async (live: string[]) => {
        const held = await Promise.all(live.map(async (name) => (await counters(workers.get(name) as DaemonProcess)).scale?.partitions ?? []));
        const all = held.flat().sort();
        return held.every((h) => h.length >= 1) && all.length === P && new Set(all).size === P;
      };
      await waitFor(() => spread(['w1', 'w2', 'w3']), 20_000, 'the partitions to spread over three workers', 200);
      // Which partition each channel lands in (the server's mapping), seen on the partitioned subjects.
      const partitionOf = new Map<string, number>();
      const sub = nc.subscribe('part.*.lab.>', {
        callback: (_err, msg) => {
          partitionOf.set(msg.subject.split('.')[4] as string, Number(msg.subject.split('.')[1]));
        },
      });
      const rig = await mqttClient(server.mqttUrl as string, 'rig-b');
      mqtt = rig;
      const js = jetstream(nc);
      const data = series();
      const rows = [`time,${CHANNELS.join(',')}`];
      let killedAt = 0;
      let victim = '';
      let victimPartitions: number[] = [];
      // Half the channels over NATS into the stream, half at QoS 1 into the MQTT listener, interleaved.
      const publish = async (from: number, to: number, midway?: () => Promise<void>) => {
        let acks: Promise<unknown>[] = [];
        for (let i = from; i < to; i++) {
          const t = T0 + i * 0.1;
          rows.push(`${t},${CHANNELS.map((c) => data[c]?.[i]).join(',')}`);
          for (const c of NATS_CHANNELS) acks.push(js.publish(topicOf(c).split('/').join('.'), JSON.stringify({ v: data[c]?.[i], t })));
          for (const c of MQTT_CHANNELS) acks.push(publishAsync(rig, topicOf(c), JSON.stringify({ v: data[c]?.[i], t }), 1));
          if (i % 50 === 49) {
            await Promise.all(acks);
            acks = [];
          }
          if (midway && i === Math.floor((from + to) / 2)) await midway();
        }
        await Promise.all(acks);
      };
      await publish(0, N, async () => {
        {
          // Kill the worker that holds the most partitions, with SIGKILL: no clean stop, no release.
          const held = await Promise.all([...workers].map(async ([name, w]) => [name, (await counters(w)).scale?.partitions ?? []] as const));
          held.sort((a, b) => b[1].length - a[1].length);
          victim = held[0]?.[0] as string;
          victimPartitions = [...(held[0]?.[1] ?? [])];
          await killHard(workers.get(victim) as DaemonProcess);
          killedAt = Date.now();
          workers.delete(victim);
        }
      });
      const live = [...workers.keys()];
      // Takeover: the survivors hold every partition within the lease time plus a heartbeat or two.
      await waitFor(() => spread(live), 30_000, 'the survivors to hold every partition', 100);
      const takeoverMs = Date.now() - killedAt;
      sub.unsubscribe();
      // Every channel, read from the worker that holds its partition now, has all N samples.
      const owners = async () => {
        const out = new Map<number, DaemonProcess>();
        for (const name of live) for (const p of (await counters(workers.get(name) as DaemonProcess)).scale?.partitions ?? []) out.set(p, workers.get(name) as DaemonProcess);
        return out;
      };
      const lab = async () => {
        const byOwner = await owners();
        const out = new Map<string, Record<string, unknown>>();
        for (const c of CHANNELS) {
          const owner = byOwner.get(partitionOf.get(c) as number);
          if (!owner) continue;
          const channels = (await getJson<{ channels: Record<string, unknown>[] }>(new URL("api/channels", owner.url).href)).channels;
          const found = channels.find((x) => x.name === c);
          if (found) out.set(c, found);
        }
        return out;
      };
      await waitFor(async () => {
        const view = await lab();
        return CHANNELS.every((c) => taken(view.get(c)) === N);
      }, 60_000, `every channel to reach ${N} samples on its owner`, 250);
      await compare(await lab(), rows.slice(0, N + 1), dir, 'after-takeover');
      // Each worker says which channels it holds now: every channel held by exactly one live
      // worker, in the partition the server's mapping put it in (a copy left on a worker whose
      // partition moved away says it is not held).
      const holders = async () => {
        const out = new Map<string, string[]>();
        for (const name of live) {
          for (const ch of (await counters(workers.get(name) as DaemonProcess)).scale?.channels ?? []) {
            if (!ch.held) continue;
            expect(ch.partition, `${ch.name} on ${name}`).toBe(partitionOf.get(ch.name));
            out.set(ch.name, [...(out.get(ch.name) ?? []), name]);
          }
        }
        return out;
      };
      for (const c of CHANNELS) expect((await holders()).get(c), c).toHaveLength(1);
      // The killed worker comes back on its own SQLite file: the partitions rebalance over three
      // workers again; it resumes its partitions after the sequence it committed, skipping what it
      // had taken before it died.
      workers.set(victim, await startDaemonProcess(dir, workerConfig(victim, dir), `${victim}.yaml`, join(dir, `${victim}.log`)));
      live.push(victim);
      await waitFor(() => spread(live), 30_000, 'the partitions to spread over three workers again', 100);
      await publish(N, TOTAL);
      await waitFor(async () => {
        const view = await lab();
        return CHANNELS.every((c) => taken(view.get(c)) === TOTAL);
      }, 60_000, `every channel to reach ${TOTAL} samples on its owner`, 250);
      await compare(await lab(), rows, dir, 'after-rejoin');
      for (const c of CHANNELS) expect((await holders()).get(c), c).toHaveLength(1);
      const rejoined = await counters(workers.get(victim) as DaemonProcess);
      console.log(`lab: ${victim} rejoined and holds partitions ${rejoined.scale?.partitions.join(',')}; it skipped ${rejoined.redeliveriesSkipped} redelivered sequences`);
      // Nothing was counted twice and nothing refused: redeliveries were skipped by sequence, not
      // caught later by the channels' duplicate rule.
      for (const name of live) {
        const k = await counters(workers.get(name) as DaemonProcess);
        expect(k.samples.rejected.duplicate, `${name} duplicates`).toBe(0);
        expect(k.samples.rejected['out-of-order'], `${name} out of order`).toBe(0);
      }
      const orphaned = CHANNELS.filter((c) => victimPartitions.includes(partitionOf.get(c) as number));
      console.log(`lab: ${CHANNELS.length} channels x ${TOTAL} samples over ${P} partitions; ${victim} (partitions ${victimPartitions.join(',')}, channels ${orphaned.join(',')}) killed at sample ${N / 2}; the survivors held every partition ${takeoverMs} ms later (lease ${LEASE_SECONDS} s)`);
      expect(orphaned.length).toBeGreaterThan(0);
    } catch (error) {
      for (const [name, w] of workers) {
        const channels = (await getJson<{ channels: Record<string, unknown>[] }>(new URL('api/channels', w.url).href).catch(() => ({ channels: [] }))).channels;
        console.log(name, channels.map((c) => `${String(c.name)}:${String(c.n)}`).join(' '));
      }
      for (const [name, w] of workers) console.log(`--- ${name}\n${w.stderr().slice(-3000)}`);
      console.log(`logs in ${dir}`);
      for (const [name, w] of workers) console.log(name, JSON.stringify(await counters(w).catch((e) => String(e))).slice(0, 600));
      throw error;
    } finally {
      mqtt?.end(true);
      await nc.close();
      for (const w of workers.values()) await killHard(w);
    }
  }, 180_000);
});

describe('lease safety with a real pause', () => {
  it('a worker stopped with SIGSTOP past its lease takes nothing more of its partitions when it resumes; the lab stays exact', async (context) => {
    const own = await startOwnNatsServer({ mappings: { 'lab.*.*': `part.{{partition(${P},1,2)}}.lab.{{wildcard(1)}}.{{wildcard(2)}}` } });
    if (own === null) return context.skip();
    const dir = mkdtempSync(join(tmpdir(), 'plateau-pause-'));
    const config = (worker: string) => ({ ...workerConfig(worker, dir), broker: { url: own.url }, scale: { partitions: P, stream: 'PAUSE', worker, leaseSeconds: LEASE_SECONDS, fetchBatch: 64 } });
    const workers = new Map<string, DaemonProcess>();
    const nc = await connect({ servers: own.url });
    const js = jetstream(nc);
    const data = series();
    const rows = [`time,${CHANNELS.join(',')}`];
    const PHASE = 400;
    const publish = async (from: number, to: number) => {
      let acks: Promise<unknown>[] = [];
      for (let i = from; i < to; i++) {
        const t = T0 + i * 0.1;
        rows.push(`${t},${CHANNELS.map((c) => data[c]?.[i]).join(',')}`);
        for (const c of CHANNELS) acks.push(js.publish(`lab.${NATS_CHANNELS.includes(c) ? 'rigA' : 'rigB'}.${c}`, JSON.stringify({ v: data[c]?.[i], t })));
        if (i % 50 === 49) {
          await Promise.all(acks);
          acks = [];
        }
      }
      await Promise.all(acks);
    };
    const channelsOf = async (w: DaemonProcess) => new Map((await getJson<{ channels: Record<string, unknown>[] }>(new URL('api/channels', w.url).href)).channels.map((c) => [String(c.name), c] as const));
    try {
      for (const name of ['w1', 'w2']) workers.set(name, await startDaemonProcess(dir, config(name), `${name}.yaml`, join(dir, `${name}.log`)));
      const held = async (name: string) => (await counters(workers.get(name) as DaemonProcess)).scale?.partitions ?? [];
      await waitFor(async () => (await held('w1')).length === P / 2 && (await held('w2')).length === P / 2, 20_000, 'two partitions each', 100);
      await publish(0, PHASE);
      const w1 = workers.get('w1') as DaemonProcess;
      const w2 = workers.get('w2') as DaemonProcess;
      const all = async () => {
        const [a, b] = [await channelsOf(w1), await channelsOf(w2)];
        return CHANNELS.every((c) => taken(a.get(c)) === PHASE || taken(b.get(c)) === PHASE);
      };
      await waitFor(all, 30_000, `every channel to take ${PHASE} samples`, 100);
      const w1Partitions = await held('w1');
      const before = await channelsOf(w1);
      // Freeze w1 past its lease; w2 takes its partitions over; the next samples are published
      // while w1 is frozen (some reach its socket for the pull requests it had open).
      w1.child.kill('SIGSTOP');
      await waitFor(async () => (await held('w2')).length === P, 20_000, 'w2 to hold every partition', 100);
      await publish(PHASE, 2 * PHASE);
      w1.child.kill('SIGCONT');
      // Right after waking, before any rebalance can hand it a partition again: it took nothing.
      await new Promise((resolve) => setTimeout(resolve, 300));
      const after = await channelsOf(w1);
      for (const [name, view] of before) expect(taken(after.get(name)), `${name} on the woken worker`).toBe(taken(view));
      // The lab ends exact: each channel on the worker holding its partition equals plateau analyze.
      await waitFor(async () => (await held('w1')).length + (await held('w2')).length === P && (await held('w1')).length > 0, 20_000, 'the partitions to rebalance', 100);
      // Each channel's partition: the one whose subjects hold its messages (the server's mapping).
      const jsm = await jetstreamManager(nc);
      const partitionOfChannel = new Map<string, number>();
      for (const c of CHANNELS) {
        for (let p = 0; p < P; p++) {
          const found = await jsm.streams.getMessage('PAUSE', { last_by_subj: `part.${p}.lab.${NATS_CHANNELS.includes(c) ? 'rigA' : 'rigB'}.${c}` }).catch(() => null);
          if (found) partitionOfChannel.set(c, p);
        }
      }
      expect(partitionOfChannel.size).toBe(CHANNELS.length);
      const view = async () => {
        const out = new Map<string, Record<string, unknown>>();
        for (const name of ['w1', 'w2']) {
          const owned = await held(name);
          const channels = await channelsOf(workers.get(name) as DaemonProcess);
          for (const c of CHANNELS) if (owned.includes(partitionOfChannel.get(c) as number) && channels.get(c)) out.set(c, channels.get(c) as Record<string, unknown>);
        }
        return out;
      };
      await waitFor(async () => {
        const v = await view();
        return CHANNELS.every((c) => taken(v.get(c)) === 2 * PHASE);
      }, 60_000, `every channel to take ${2 * PHASE} samples on its owner`, 250);
      await compare(await view(), rows, dir, 'after-pause');
      const log = readFileSync(join(dir, 'w1.log'), 'utf8');
      for (const p of w1Partitions) expect(log).toMatch(new RegExp(`partition ${p} lost: the lease ran out before it was renewed`));
    } catch (error) {
      console.log(`logs in ${dir}`);
      throw error;
    } finally {
      await nc.close();
      for (const w of workers.values()) {
        w.child.kill('SIGCONT');
        await killHard(w);
      }
      await own.stop();
    }
  }, 180_000);
});
