import { describe, expect, it } from 'vitest';
import pino from 'pino';
import { serialize } from 'node:v8';
import { ChannelRegistry } from '../../src/engine/channel-registry.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../src/engine/channel-options.js';
import { PartitionCheckpoints } from '../../src/daemon/partition-checkpoints.js';
import { DeliveryFence } from '../../src/daemon/delivery-fence.js';
import { PendingBatch } from '../../src/daemon/pending-batch.js';
import type { Ingest } from '../../src/daemon/ingest.js';
import type { CheckpointManifest, SharedCheckpoints } from '../../src/ingest/shared-checkpoints.js';
import { lcgAr1 } from '../helpers/lcg-series.js';

// The partition checkpoints without a server: a bucket in memory, channels fed by hand. A worker
// writes every channel of a partition at one stream sequence when one is due; another restores
// them, and each restored channel holds what the original held; a checkpoint that cannot be read,
// or that was made under other options, restores nothing (the partition is then read from the
// worker's own position).

const T0 = 1_790_000_000_000;
const SOURCE = 'jetstream/LAB/p0';

function memoryBucket(): SharedCheckpoints & { stored: Map<number, { manifest: CheckpointManifest; bytes: Uint8Array }> } {
  const stored = new Map<number, { manifest: CheckpointManifest; bytes: Uint8Array }>();
  return {
    stored,
    write: async (partition: number, seq: number, bytes: Uint8Array, worker: string) => {
      const manifest = { seq, chunks: 1, bytes: bytes.length, worker, atMs: 0 };
      stored.set(partition, { manifest, bytes: new Uint8Array(bytes) });
      return manifest;
    },
    manifest: async (partition: number) => stored.get(partition)?.manifest ?? null,
    read: async (partition: number) => stored.get(partition) ?? null,
  } as unknown as SharedCheckpoints & { stored: Map<number, { manifest: CheckpointManifest; bytes: Uint8Array }> };
}

function worker(bucket: SharedCheckpoints, options: ChannelOptions = DEFAULT_CHANNEL_OPTIONS) {
  const registry = new ChannelRegistry(() => options);
  const logs = new Map<string, string>();
  const adopted: string[] = [];
  const ingest = { logOf: (name: string) => logs.get(name) ?? null, adopt: (channel: { name: string }) => adopted.push(channel.name) } as unknown as Ingest;
  const fence = new DeliveryFence(() => 0);
  const batch = new PendingBatch();
  const warnings: string[] = [];
  const log = pino({ level: 'info' }, { write: (line: string) => void (JSON.parse(line).level === 40 && warnings.push(JSON.parse(line).msg as string)) });
  const checkpoints = new PartitionCheckpoints({ bucket, worker: 'w', checkpointSamples: 500, registry, ingest, fence, batch, held: () => [0], partitionSource: () => SOURCE, commit: () => true, log });
  return { registry, logs, adopted, fence, batch, checkpoints, warnings };
}

async function settle(): Promise<void> {
  for (let i = 0; i < 5; i++) await new Promise((resolve) => setImmediate(resolve));
}

describe('partition checkpoints in a shared bucket', () => {
  it('written at one sequence when a channel is due; restored elsewhere to the same state, the stream read after it', async () => {
    const bucket = memoryBucket();
    const a = worker(bucket);
    const values = Array.from(lcgAr1(3, 0.5, 1200), (x) => 5 + 0.1 * x);
    let seq = 0;
    const feed = (from: number, to: number) => {
      for (let i = from; i < to; i++) {
        for (const name of ['fast', 'slow']) {
          if (name === 'slow' && i % 4 !== 0) continue;
          a.registry.accept(name, values[i] as number, T0 + i * 100, true);
          a.logs.set(name, SOURCE);
          a.fence.filter({ deliveries: [{ topic: 't', payload: new Uint8Array(), subscription: null as never, position: { source: SOURCE, sequence: ++seq, durable: true } }], token: { source: 's' } });
        }
      }
    };
    feed(0, 499);
    a.checkpoints.afterCommit();
    await settle();
    expect(bucket.stored.size, 'nothing due before 500 samples of a channel').toBe(0);
    feed(499, 700);
    a.checkpoints.afterCommit();
    await settle();
    const written = bucket.stored.get(0);
    expect(written?.manifest.seq).toBe(seq);
    // The slow channel is in it too (every channel of the partition at that sequence).
    const b = worker(bucket);
    const covered = await b.checkpoints.restore(0, SOURCE);
    expect(covered).toBe(seq);
    expect(b.fence.covered(SOURCE)).toBe(seq);
    expect(b.adopted.sort()).toEqual(['fast', 'slow']);
    for (const name of ['fast', 'slow']) {
      expect(b.registry.get(name)?.pipeline.snapshot(), name).toEqual(a.registry.get(name)?.pipeline.snapshot());
      expect(b.registry.get(name)?.nextSeq).toBe(a.registry.get(name)?.nextSeq);
    }
    // The restore's commit carries the channels' local checkpoints and the partition's position.
    const commit = b.batch.toCommitBatch({}, []);
    expect(commit.checkpoints.map((c) => c.channel).sort()).toEqual(['fast', 'slow']);
    expect(commit.positions).toEqual([{ source: SOURCE, sequence: seq, durable: true }]);
    // A worker whose own state is as far on restores nothing.
    const c = worker(bucket);
    c.fence.advance(SOURCE, seq);
    expect(await c.checkpoints.restore(0, SOURCE)).toBeNull();
  });

  it('a checkpoint that cannot be read, or made under other options, restores nothing and says why', async () => {
    const bucket = memoryBucket();
    bucket.stored.set(0, { manifest: { seq: 40, chunks: 1, bytes: 3, worker: 'w', atMs: 0 }, bytes: new Uint8Array([1, 2, 3]) });
    const a = worker(bucket);
    expect(await a.checkpoints.restore(0, SOURCE)).toBeNull();
    expect(a.warnings[0]).toMatch(/^partition 0: its shared checkpoint (cannot be read|is not one this plateau reads)/);
    expect(a.registry.size).toBe(0);

    const made = worker(memoryBucket());
    const channel = made.registry.ensure('flow', null);
    for (let i = 0; i < 300; i++) channel.accept(1 + (i % 7) * 0.01, T0 + i * 100, true);
    const record = { record: 'partition-checkpoint', version: 1, partition: 0, seq: 300, channels: [{ name: 'flow', unit: null, checkpoint: channel.checkpoint(), memory: channel.timeMemory(64) }] };
    bucket.stored.set(0, { manifest: { seq: 300, chunks: 1, bytes: 0, worker: 'w', atMs: 0 }, bytes: serialize(record) });
    const other = worker(bucket, { ...DEFAULT_CHANNEL_OPTIONS, window: { kind: 'sliding', samples: 100, maxSamples: 100 } as ChannelOptions['window'] });
    expect(await other.checkpoints.restore(0, SOURCE)).toBeNull();
    expect(other.warnings[0]).toMatch(/^partition 0: the shared checkpoint of channel flow does not load here/);
    expect(other.registry.size).toBe(0);
    expect(other.fence.covered(SOURCE)).toBe(0);
  });
});
