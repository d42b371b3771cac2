import type { SourcePosition } from './sample-source.js';

/**
 * The store port: durable samples, checkpoints, window marks, events, test points, records,
 * counters and source positions of one daemon. Implementations: SqliteStore (src/store, the
 * daemon's) and MemoryStore (src/store, tests and embedding); test/contract/store.contract.ts runs
 * the same suite against both.
 *
 * Contract (what the daemon relies on):
 * - `commit(batch)` is atomic and synchronous: when it returns, everything in the batch is durable
 *   (as far as the implementation is); when it throws, nothing of the batch was written, and the
 *   same batch (or a larger one holding it) may be committed again. A failure is a StoreError with
 *   a stable code (ERR_STORE_FULL, ERR_STORE_BUSY, ERR_STORE_IO, ERR_STORE_FAILED).
 * - Channels are addressed by name; a batch names the channels it introduces (`channels`), and a
 *   channel that already exists is left as it is.
 * - Sample indices (seq) are the channel's 0-based sample numbers; chunks of one channel never
 *   overlap, and `samplesFrom` returns them in order.
 * - Event ids increase and are never reused, even after retention has deleted every event.
 * - A checkpoint replaces the channel's previous one; retention never deletes a sample at or after
 *   the channel's checkpoint.
 */
export interface StoredChannel {
  name: string;
  unit: string | null;
}

export interface SampleChunk {
  channel: string;
  /** Sample index of the first sample of the chunk. */
  firstSeq: number;
  /** Epoch milliseconds. */
  times: Float64Array;
  values: Float64Array;
  /**
   * Which samples carried no time of their own (their time is the arrival time, held at the
   * channel's last time): bit i of byte i >> 3. Null when every sample carried its own time.
   */
  unstamped: Uint8Array | null;
}

export interface EventToWrite {
  timeMs: number;
  source: string;
  kind: string;
  /** Index of the sample that raised it, for channel events. */
  at: number | null;
  body: Record<string, unknown>;
}

export interface StoredEvent extends EventToWrite {
  id: number;
}

export interface CheckpointToWrite {
  channel: string;
  /** Samples the state has seen: the next sample to replay is this one. */
  seq: number;
  /** Plain data (a versioned record, see src/engine/versioned-record.ts). */
  state: unknown;
}

export interface MarkToWrite {
  channel: string;
  seq: number;
  kind: string;
}

export interface CommitBatch {
  channels: StoredChannel[];
  chunks: SampleChunk[];
  events: EventToWrite[];
  checkpoints: CheckpointToWrite[];
  marks: MarkToWrite[];
  testPoints: { id: string; body: unknown }[];
  records: { testPointId: string; body: unknown }[];
  counters: Record<string, number>;
  /** The newest committed position of each durable source (what a restart resumes after). */
  positions: SourcePosition[];
  /**
   * Ingest state by key (Sparkplug B edge nodes, gap detectors): the body replaces the stored one,
   * null deletes it. Committed with the samples it was current for.
   */
  state?: StateEntry[];
}

export interface StateEntry {
  key: string;
  /** Text (JSON) chosen by the key's owner; null: delete the key. */
  body: string | null;
}

export interface CommitResult {
  /** The batch's events as stored, ids assigned, in the batch's order. */
  events: StoredEvent[];
}

export interface StoredRecord {
  id: number;
  createdMs: number;
  body: unknown;
}

export interface Store {
  /** Where the data lives, for messages (a path, or ":memory:"). */
  readonly location: string;
  channels(): StoredChannel[];
  commit(batch: CommitBatch, nowMs: number): CommitResult;
  checkpoint(channel: string): { seq: number; state: unknown } | null;
  /** The channel's samples from `fromSeq` on, chunk by chunk, in order (a chunk may start before fromSeq). */
  samplesFrom(channel: string, fromSeq: number): Iterable<SampleChunk>;
  marksFrom(channel: string, fromSeq: number): { seq: number; kind: string }[];
  eventsAfter(id: number, limit: number): StoredEvent[];
  eventsOfKind(kind: string, after: number, limit: number): StoredEvent[];
  /** The newest `limit` events of one source, oldest first. */
  eventsFor(source: string, limit: number): StoredEvent[];
  /** The id of the newest stored event (0 when there is none). */
  lastEventId(): number;
  testPoints(): unknown[];
  records(testPointId: string): StoredRecord[];
  counters(): Record<string, number>;
  position(source: string): SourcePosition | null;
  /** The ingest state entries whose key starts with `prefix`, in key order. */
  stateEntries(prefix: string): { key: string; body: string }[];
  /** Deletes samples and events older than `beforeMs`, except samples a checkpoint still needs. */
  prune(beforeMs: number): { chunks: number; events: number };
  /** Bytes the store takes (0 when it keeps nothing on disk). */
  sizeBytes(): number;
  close(): void;
}

