import { Kvm, type KV } from '@nats-io/kv';
import type { NatsConnection } from '@nats-io/transport-node';

/**
 * Partition checkpoints in a replicated JetStream key-value bucket (`<stream>_checkpoints`, the
 * stream's replicas), so that a worker taking a partition over restores its channels from there
 * and reads the stream only after the checkpoint's sequence.
 *
 * A partition's checkpoint is one opaque byte string (the daemon's serialised channel states at
 * one stream sequence), cut into chunks that fit a message: keys `p<p>.s<seq>.<i>`, then the
 * manifest `p<p>` = {seq, chunks, bytes, worker, atMs}. The manifest is written last, so a reader
 * sees either the previous checkpoint whole or the new one whole; the previous one's chunks are
 * purged after it. Values never expire: a partition's latest checkpoint stays until a newer one.
 */
export interface CheckpointManifest {
  seq: number;
  chunks: number;
  bytes: number;
  worker: string;
  atMs: number;
}

/** Below nats-server's default max_payload (1 MiB), with room for the headers. */
export const CHUNK_BYTES = 512 * 1024;

export class SharedCheckpoints {
  private readonly kv: KV;

  constructor(kv: KV) {
    this.kv = kv;
  }

  /** Opens (creating when absent) the bucket. */
  static async open(nc: NatsConnection, bucket: string, replicas: number): Promise<SharedCheckpoints> {
    const kv = await new Kvm(nc).create(bucket, { history: 1, replicas });
    return new SharedCheckpoints(kv);
  }

  async write(partition: number, seq: number, bytes: Uint8Array, worker: string): Promise<CheckpointManifest> {
    const previous = await this.manifest(partition);
    const chunks = Math.max(1, Math.ceil(bytes.length / CHUNK_BYTES));
    for (let i = 0; i < chunks; i++) await this.kv.put(chunkKey(partition, seq, i), bytes.subarray(i * CHUNK_BYTES, Math.min(bytes.length, (i + 1) * CHUNK_BYTES)));
    const manifest: CheckpointManifest = { seq, chunks, bytes: bytes.length, worker, atMs: Date.now() };
    await this.kv.put(`p${partition}`, JSON.stringify(manifest));
    if (previous !== null && previous.seq !== seq) {
      for (let i = 0; i < previous.chunks; i++) await this.kv.purge(chunkKey(partition, previous.seq, i)).catch(() => undefined);
    }
    return manifest;
  }

  async manifest(partition: number): Promise<CheckpointManifest | null> {
    const entry = await this.kv.get(`p${partition}`);
    if (entry === null || entry.operation !== 'PUT' || entry.length === 0) return null;
    return entry.json<CheckpointManifest>();
  }

  /** The partition's latest checkpoint, or null (none yet, or a chunk is missing: the caller replays the stream instead). */
  async read(partition: number): Promise<{ manifest: CheckpointManifest; bytes: Uint8Array } | null> {
    const manifest = await this.manifest(partition);
    if (manifest === null) return null;
    const out = new Uint8Array(manifest.bytes);
    let at = 0;
    for (let i = 0; i < manifest.chunks; i++) {
      const entry = await this.kv.get(chunkKey(partition, manifest.seq, i));
      if (entry === null || entry.operation !== 'PUT' || at + entry.value.length > out.length) return null;
      out.set(entry.value, at);
      at += entry.value.length;
    }
    return at === out.length ? { manifest, bytes: out } : null;
  }
}

function chunkKey(partition: number, seq: number, i: number): string {
  return `p${partition}.s${seq}.${i}`;
}
