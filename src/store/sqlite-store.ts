import Database from 'better-sqlite3';
import { serialize, deserialize } from 'node:v8';
import { statSync } from 'node:fs';
import { MIGRATIONS } from './migrations.js';

/**
 * Durable state on SQLite (better-sqlite3, WAL journal): samples in per-flush chunks, pipeline
 * checkpoints, window marks, events, test points and their records, counters.
 *
 * Every flush is one transaction: the samples accepted since the last flush, the events they
 * raised, any checkpoints due and the counters. The daemon acknowledges MQTT messages only after
 * that transaction commits. synchronous = NORMAL in WAL mode makes a commit survive a killed
 * process (the WAL is in the operating system's hands); a power cut may lose the last commits
 * after their acknowledgements left, so use synchronous = FULL (option `durable`, an fsync per
 * flush) where power cuts matter more than throughput.
 *
 * Chunked samples (float64 blobs per channel and flush) cost far less per sample than one row per
 * sample (bench/e2e.js measures both).
 */
export interface ChunkToWrite {
  channelId: number;
  firstSeq: number;
  times: Float64Array;
  values: Float64Array;
}

export interface EventToWrite {
  timeMs: number;
  source: string;
  kind: string;
  at: number | null;
  body: unknown;
}

export interface CheckpointToWrite {
  channelId: number;
  seq: number;
  state: unknown;
}

export interface FlushBatch {
  chunks: ChunkToWrite[];
  events: EventToWrite[];
  checkpoints: CheckpointToWrite[];
  marks: { channelId: number; seq: number; kind: string }[];
  testPoints: { id: string; body: unknown }[];
  records: { testPointId: string; body: unknown }[];
  counters: Record<string, number>;
}

export interface StoredChannel {
  id: number;
  name: string;
  unit: string | null;
}

export class SqliteStore {
  readonly path: string;
  private readonly db: Database.Database;
  private readonly statements;

  constructor(path: string, options: { durable?: boolean } = {}) {
    this.path = path;
    this.db = new Database(path);
    this.db.pragma('journal_mode = WAL');
    this.db.pragma(`synchronous = ${options.durable ? 'FULL' : 'NORMAL'}`);
    this.db.pragma('foreign_keys = ON');
    this.migrate();
    this.statements = {
      insertChannel: this.db.prepare('INSERT INTO channels (name, unit, created_ms) VALUES (?, ?, ?)'),
      setUnit: this.db.prepare('UPDATE channels SET unit = ? WHERE id = ?'),
      channels: this.db.prepare('SELECT id, name, unit FROM channels ORDER BY id'),
      insertChunk: this.db.prepare('INSERT INTO sample_chunks (channel_id, first_seq, count, first_ms, last_ms, times, vals) VALUES (?, ?, ?, ?, ?, ?, ?)'),
      chunksFrom: this.db.prepare('SELECT first_seq, count, times, vals FROM sample_chunks WHERE channel_id = ? AND first_seq + count > ? ORDER BY first_seq'),
      sampleCount: this.db.prepare('SELECT COALESCE(MAX(first_seq + count), 0) AS n FROM sample_chunks WHERE channel_id = ?'),
      putCheckpoint: this.db.prepare('INSERT INTO checkpoints (channel_id, seq, created_ms, state) VALUES (?, ?, ?, ?) ON CONFLICT(channel_id) DO UPDATE SET seq = excluded.seq, created_ms = excluded.created_ms, state = excluded.state'),
      checkpoint: this.db.prepare('SELECT seq, state FROM checkpoints WHERE channel_id = ?'),
      insertMark: this.db.prepare('INSERT OR IGNORE INTO marks (channel_id, seq, kind) VALUES (?, ?, ?)'),
      marksFrom: this.db.prepare('SELECT seq, kind FROM marks WHERE channel_id = ? AND seq >= ? ORDER BY seq'),
      insertEvent: this.db.prepare('INSERT INTO events (time_ms, source, kind, at, body) VALUES (?, ?, ?, ?, ?)'),
      eventsAfter: this.db.prepare('SELECT id, time_ms, source, kind, at, body FROM events WHERE id > ? ORDER BY id LIMIT ?'),
      lastEventId: this.db.prepare('SELECT COALESCE(MAX(id), 0) AS id FROM events'),
      eventsOfKind: this.db.prepare('SELECT id, time_ms, source, kind, at, body FROM events WHERE kind = ? AND id > ? ORDER BY id LIMIT ?'),
      eventsForSource: this.db.prepare('SELECT id, time_ms, source, kind, at, body FROM events WHERE source = ? ORDER BY id DESC LIMIT ?'),
      putTestPoint: this.db.prepare('INSERT INTO test_points (id, body, updated_ms) VALUES (?, ?, ?) ON CONFLICT(id) DO UPDATE SET body = excluded.body, updated_ms = excluded.updated_ms'),
      testPoints: this.db.prepare('SELECT body FROM test_points ORDER BY updated_ms'),
      insertRecord: this.db.prepare('INSERT INTO records (test_point_id, created_ms, body) VALUES (?, ?, ?)'),
      records: this.db.prepare('SELECT id, created_ms, body FROM records WHERE test_point_id = ? ORDER BY id'),
      putCounter: this.db.prepare('INSERT INTO counters (key, value) VALUES (?, ?) ON CONFLICT(key) DO UPDATE SET value = excluded.value'),
      counters: this.db.prepare('SELECT key, value FROM counters'),
      pruneChunks: this.db.prepare(`DELETE FROM sample_chunks WHERE last_ms < ? AND first_seq + count <= COALESCE((SELECT seq FROM checkpoints WHERE checkpoints.channel_id = sample_chunks.channel_id), 0)`),
      pruneEvents: this.db.prepare('DELETE FROM events WHERE time_ms < ?'),
    };
  }

  private migrate(): void {
    const version = this.db.pragma('user_version', { simple: true }) as number;
    if (version > MIGRATIONS.length) {
      throw Object.assign(new Error(`${this.path}: database schema version ${version} is newer than this plateau knows (${MIGRATIONS.length})`), { code: 'ERR_STORE_SCHEMA_VERSION' });
    }
    for (let v = version; v < MIGRATIONS.length; v++) {
      this.db.transaction(() => {
        this.db.exec(MIGRATIONS[v] as string);
        this.db.pragma(`user_version = ${v + 1}`);
      })();
    }
  }

  channels(): StoredChannel[] {
    return this.statements.channels.all() as StoredChannel[];
  }

  addChannel(name: string, unit: string | null, nowMs: number): number {
    return Number(this.statements.insertChannel.run(name, unit, nowMs).lastInsertRowid);
  }

  setUnit(channelId: number, unit: string): void {
    this.statements.setUnit.run(unit, channelId);
  }

  /** Writes one flush atomically. */
  commit(batch: FlushBatch, nowMs: number): void {
    const s = this.statements;
    this.db.transaction(() => {
      for (const chunk of batch.chunks) {
        const n = chunk.values.length;
        if (n === 0) continue;
        s.insertChunk.run(chunk.channelId, chunk.firstSeq, n, chunk.times[0], chunk.times[n - 1], toBlob(chunk.times), toBlob(chunk.values));
      }
      for (const mark of batch.marks) s.insertMark.run(mark.channelId, mark.seq, mark.kind);
      for (const event of batch.events) s.insertEvent.run(event.timeMs, event.source, event.kind, event.at, JSON.stringify(event.body));
      for (const checkpoint of batch.checkpoints) s.putCheckpoint.run(checkpoint.channelId, checkpoint.seq, nowMs, serialize(checkpoint.state));
      for (const point of batch.testPoints) s.putTestPoint.run(point.id, JSON.stringify(point.body), nowMs);
      for (const record of batch.records) s.insertRecord.run(record.testPointId, nowMs, JSON.stringify(record.body));
      for (const [key, value] of Object.entries(batch.counters)) s.putCounter.run(key, value);
    })();
  }

  checkpoint(channelId: number): { seq: number; state: unknown } | null {
    const row = this.statements.checkpoint.get(channelId) as { seq: number; state: Buffer } | undefined;
    return row ? { seq: row.seq, state: deserialize(row.state) } : null;
  }

  /** Samples of a channel from `fromSeq` on, in order, chunk by chunk. */
  *samplesFrom(channelId: number, fromSeq: number): Generator<{ firstSeq: number; times: Float64Array; values: Float64Array }> {
    for (const row of this.statements.chunksFrom.iterate(channelId, fromSeq) as Iterable<{ first_seq: number; count: number; times: Buffer; vals: Buffer }>) {
      yield { firstSeq: row.first_seq, times: fromBlob(row.times), values: fromBlob(row.vals) };
    }
  }

  sampleCount(channelId: number): number {
    return (this.statements.sampleCount.get(channelId) as { n: number }).n;
  }

  marksFrom(channelId: number, fromSeq: number): { seq: number; kind: string }[] {
    return this.statements.marksFrom.all(channelId, fromSeq) as { seq: number; kind: string }[];
  }

  eventsAfter(id: number, limit: number): StoredEvent[] {
    return (this.statements.eventsAfter.all(id, limit) as RawEvent[]).map(parseEvent);
  }

  /** The id of the newest stored event (0 when there is none): one look-up of the primary key. */
  lastEventId(): number {
    return (this.statements.lastEventId.get() as { id: number }).id;
  }

  eventsOfKind(kind: string, after: number, limit: number): StoredEvent[] {
    return (this.statements.eventsOfKind.all(kind, after, limit) as RawEvent[]).map(parseEvent);
  }

  eventsFor(source: string, limit: number): StoredEvent[] {
    return (this.statements.eventsForSource.all(source, limit) as RawEvent[]).map(parseEvent).reverse();
  }

  testPoints(): unknown[] {
    return (this.statements.testPoints.all() as { body: string }[]).map((row) => JSON.parse(row.body));
  }

  records(testPointId: string): { id: number; createdMs: number; body: unknown }[] {
    return (this.statements.records.all(testPointId) as { id: number; created_ms: number; body: string }[]).map((row) => ({ id: row.id, createdMs: row.created_ms, body: JSON.parse(row.body) }));
  }

  counters(): Record<string, number> {
    const out: Record<string, number> = {};
    for (const row of this.statements.counters.all() as { key: string; value: number }[]) out[row.key] = row.value;
    return out;
  }

  /** Deletes samples and events older than `beforeMs`, except samples a checkpoint still needs. */
  prune(beforeMs: number): { chunks: number; events: number } {
    const chunks = this.statements.pruneChunks.run(beforeMs).changes;
    const events = this.statements.pruneEvents.run(beforeMs).changes;
    return { chunks, events };
  }

  /** Bytes on disk: the database and its WAL. */
  sizeBytes(): number {
    if (this.path === ':memory:') return 0;
    let total = 0;
    for (const suffix of ['', '-wal', '-shm']) {
      try {
        total += statSync(this.path + suffix).size;
      } catch {
        // not there
      }
    }
    return total;
  }

  close(): void {
    this.db.close();
  }
}

export interface StoredEvent {
  id: number;
  timeMs: number;
  source: string;
  kind: string;
  at: number | null;
  body: Record<string, unknown>;
}

interface RawEvent {
  id: number;
  time_ms: number;
  source: string;
  kind: string;
  at: number | null;
  body: string;
}

function parseEvent(row: RawEvent): StoredEvent {
  return { id: row.id, timeMs: row.time_ms, source: row.source, kind: row.kind, at: row.at, body: JSON.parse(row.body) as Record<string, unknown> };
}

function toBlob(values: Float64Array): Buffer {
  return Buffer.from(values.buffer, values.byteOffset, values.byteLength);
}

function fromBlob(blob: Buffer): Float64Array {
  // Copy: the blob's memory may not be 8-byte aligned.
  const out = new Float64Array(blob.byteLength / 8);
  new Uint8Array(out.buffer).set(blob);
  return out;
}
