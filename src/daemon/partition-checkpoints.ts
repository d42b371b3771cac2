import { deserialize, serialize } from 'node:v8';
import { performance } from 'node:perf_hooks';
import type { Logger } from 'pino';
import type { Channel } from '../engine/channel.js';
import { memoryHistory } from '../engine/channel.js';
import type { ChannelRegistry } from '../engine/channel-registry.js';
import type { SharedCheckpoints } from '../ingest/shared-checkpoints.js';
import type { DeliveryFence } from './delivery-fence.js';
import type { Ingest } from './ingest.js';
import type { PendingBatch } from './pending-batch.js';

/**
 * A partition's channels checkpointed to the shared bucket, and restored from it by the worker
 * that takes the partition over (JetStream ingest only).
 *
 * Written after a commit (the state in memory is then exactly what is committed, up to the last
 * stream sequence taken from the partition) when a channel of the partition has taken
 * `checkpointSamples` samples since the partition's last shared checkpoint: every channel of the
 * partition at that one sequence, so that a takeover restores all of them and reads the stream
 * after it. One write per partition at a time; the states are serialised at once, written after.
 *
 * A worker that acquires a partition restores from the shared checkpoint when it is ahead of its
 * own state (a new owner; a worker that held it long ago), each channel through `Channel.restore`
 * with the checkpoint and the time policy's recent times; the restored channels, their local
 * checkpoints and the partition's position are committed at once. Should a channel's checkpoint
 * not load (another configuration on this worker), nothing is restored and the partition is read
 * from the worker's own position, as before.
 */
export interface PartitionCheckpointRecord {
  record: 'partition-checkpoint';
  version: 1;
  partition: number;
  /** The partition's last stream sequence the states cover. */
  seq: number;
  channels: { name: string; unit: string | null; checkpoint: { seq: number; state: unknown }; memory: { times: number[]; lastMs: number } }[];
}

/** Recent payload times carried per channel (the time policy's duplicate and lateness checks just after a takeover). */
const MEMORY_TIMES = 64;

export interface PartitionCheckpointsOptions {
  bucket: SharedCheckpoints;
  worker: string;
  checkpointSamples: number;
  registry: ChannelRegistry;
  ingest: Ingest;
  fence: DeliveryFence;
  batch: PendingBatch;
  held(): number[];
  partitionSource(partition: number): string;
  commit(): boolean;
  log: Logger;
}

export interface SharedCheckpointFigures {
  written: number;
  restored: number;
  last: { partition: number; seq: number; channels: number; bytes: number; serializeMs: number; writeMs: number } | null;
  lastRestore: { partition: number; seq: number; channels: number; bytes: number; readMs: number; restoreMs: number; from: Record<string, number> } | null;
  failures: number;
}

export class PartitionCheckpoints {
  private readonly options: PartitionCheckpointsOptions;
  /** Per channel, its next sample index at the partition's last shared checkpoint. */
  private readonly sharedAt = new Map<string, number>();
  /** Per partition, the channels its last shared checkpoint held (read at acquisition; a channel idle since still belongs). */
  private readonly members = new Map<number, Set<string>>();
  private readonly writing = new Set<number>();
  /** Partitions being restored (no checkpoint of them is written meanwhile). */
  private readonly restoring = new Set<number>();
  /** Per partition, the sequence of the latest shared checkpoint seen (never written over by an older state). */
  private readonly sharedSeq = new Map<number, number>();
  readonly figures: SharedCheckpointFigures = { written: 0, restored: 0, last: null, lastRestore: null, failures: 0 };

  constructor(options: PartitionCheckpointsOptions) {
    this.options = options;
  }

  /** The channels of partition p: its last shared checkpoint's, and those whose latest sample came from it. */
  private channelsOf(p: number): Channel[] {
    const { registry, ingest, partitionSource } = this.options;
    const source = partitionSource(p);
    const names = new Set(this.members.get(p) ?? []);
    for (const channel of registry.all()) if (ingest.logOf(channel.name) === source) names.add(channel.name);
    return [...names].flatMap((name) => {
      const channel = registry.get(name);
      return channel ? [channel] : [];
    });
  }

  afterCommit(): void {
    for (const p of this.options.held()) {
      if (this.writing.has(p) || this.restoring.has(p)) continue;
      if (this.options.fence.covered(this.options.partitionSource(p)) <= (this.sharedSeq.get(p) ?? 0)) continue;
      const channels = this.channelsOf(p);
      if (!channels.some((c) => c.nextSeq - (this.sharedAt.get(c.name) ?? 0) >= this.options.checkpointSamples)) continue;
      this.write(p, channels);
    }
  }

  private write(p: number, channels: Channel[]): void {
    const { bucket, fence, partitionSource, worker, log } = this.options;
    const started = performance.now();
    const seq = fence.covered(partitionSource(p));
    const record: PartitionCheckpointRecord = {
      record: 'partition-checkpoint',
      version: 1,
      partition: p,
      seq,
      channels: channels.map((c) => ({ name: c.name, unit: c.unit, checkpoint: c.checkpoint(), memory: c.timeMemory(MEMORY_TIMES) })),
    };
    const bytes = serialize(record);
    const at = new Map(channels.map((c) => [c.name, c.nextSeq]));
    const serialized = performance.now();
    this.writing.add(p);
    bucket
      .write(p, seq, bytes, worker)
      .then(() => {
        for (const [name, next] of at) this.sharedAt.set(name, next);
        this.sharedSeq.set(p, Math.max(seq, this.sharedSeq.get(p) ?? 0));
        this.members.set(p, new Set(at.keys()));
        this.figures.written++;
        this.figures.last = { partition: p, seq, channels: channels.length, bytes: bytes.length, serializeMs: serialized - started, writeMs: performance.now() - serialized };
      })
      .catch((error: unknown) => {
        this.figures.failures++;
        log.warn({ err: error, partition: p }, `partition ${p}: the shared checkpoint at stream sequence ${seq} could not be written (a takeover would replay more of the stream); tried again after the next commit`);
      })
      .finally(() => {
        this.writing.delete(p);
        // A checkpoint that fell due while this one was written: with nothing taken since the last
        // commit, the state is still exactly what is committed; else the next commit looks again.
        if (this.options.batch.empty) this.afterCommit();
      });
  }

  /** Restores partition p's channels from its shared checkpoint when that is ahead of this worker's state; returns the sequence they cover (null: nothing restored). */
  async restore(p: number, source: string): Promise<number | null> {
    this.restoring.add(p);
    try {
      return await this.restoreFrom(p, source);
    } finally {
      this.restoring.delete(p);
    }
  }

  private async restoreFrom(p: number, source: string): Promise<number | null> {
    const { bucket, fence, registry, ingest, batch, log } = this.options;
    const started = performance.now();
    let found;
    try {
      const manifest = await bucket.manifest(p);
      if (manifest === null) return null;
      this.sharedSeq.set(p, Math.max(manifest.seq, this.sharedSeq.get(p) ?? 0));
      if (manifest.seq <= fence.covered(source)) {
        // This worker's own state is as far on: its channels of the partition are those of the checkpoint at least.
        return null;
      }
      found = await bucket.read(p);
    } catch (error) {
      log.warn({ err: error, partition: p }, `partition ${p}: its shared checkpoint could not be read; it is read from the stream after this worker's own position`);
      return null;
    }
    if (found === null) return null;
    const read = performance.now();
    let record: PartitionCheckpointRecord;
    try {
      record = deserialize(found.bytes) as PartitionCheckpointRecord;
    } catch (error) {
      log.warn({ err: error, partition: p }, `partition ${p}: its shared checkpoint cannot be read; it is read from the stream after this worker's own position`);
      return null;
    }
    if (record?.record !== 'partition-checkpoint' || record.version !== 1 || record.partition !== p || !Array.isArray(record.channels)) {
      log.warn({ partition: p }, `partition ${p}: its shared checkpoint is not one this plateau reads; it is read from the stream after this worker's own position`);
      return null;
    }
    const restored: Channel[] = [];
    for (const [i, c] of record.channels.entries()) {
      // A partition of many channels takes a while: the lease's renewals and the other partitions go on between them.
      if (i % 50 === 49) await new Promise((resolve) => setImmediate(resolve));
      const channel = registry.create(c.name, c.unit);
      const report = channel.restore(c.checkpoint, memoryHistory(c.checkpoint.seq, c.memory));
      if (report.outcome !== 'loaded') {
        log.warn({ partition: p, channel: c.name }, `partition ${p}: the shared checkpoint of channel ${c.name} does not load here (${report.detail ?? report.outcome}): the partition is read from the stream after this worker's own position`);
        return null;
      }
      restored.push(channel);
    }
    for (const channel of restored) {
      registry.replace(channel);
      ingest.adopt(channel, source);
      batch.setCheckpoint({ channel: channel.name, ...channel.checkpoint() });
      this.sharedAt.set(channel.name, channel.nextSeq);
    }
    this.members.set(p, new Set(restored.map((c) => c.name)));
    fence.advance(source, record.seq);
    batch.setPosition({ source, sequence: record.seq, durable: true });
    this.options.commit();
    this.figures.restored++;
    this.figures.lastRestore = { partition: p, seq: record.seq, channels: restored.length, bytes: found.bytes.length, readMs: read - started, restoreMs: performance.now() - read, from: Object.fromEntries(restored.map((c) => [c.name, c.nextSeq])) };
    log.info({ partition: p, seq: record.seq, channels: restored.length, bytes: found.bytes.length, ms: Math.round(performance.now() - started) }, `partition ${p}: ${restored.length} channel(s) restored from the shared checkpoint at stream sequence ${record.seq} (written by ${found.manifest.worker})`);
    return record.seq;
  }
}
