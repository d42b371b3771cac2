import Database from 'better-sqlite3';
import { serialize, deserialize } from 'node:v8';
import { statSync } from 'node:fs';
import { MIGRATIONS } from './migrations.js';
import { PlateauError, type ErrorCode } from '../errors/catalogue.js';
import type { CommitBatch, CommitResult, SampleChunk, Store, StoredChannel, StoredEvent, StoredRecord } from '../ports/store.js';
import type { SourcePosition } from '../ports/sample-source.js';

/**
 * The store port on SQLite (better-sqlite3, WAL journal): samples in per-commit chunks, checkpoints,
 * window marks, events, test points and their records, counters, source positions.
 *
 * Every commit is one transaction; the daemon acknowledges MQTT messages only after it returns.
 * synchronous = NORMAL in WAL mode makes a commit survive a killed process (the WAL is in the
 * operating system's hands); a power cut may lose the last commits after their acknowledgements
 * left, so use synchronous = FULL (option `durable`, an fsync per commit) where power cuts matter
 * more than throughput.
 *
 * Failures: a commit that fails (the disk or max_page_count full, the file locked by another
 * writer, an I/O error) is rolled back whole and thrown as a PlateauError with code ERR_STORE_FULL,
 * ERR_STORE_BUSY, ERR_STORE_IO or ERR_STORE_FAILED, the SqliteError as its cause. A locked file is
 * waited for at most `busyTimeoutMs` (default 100 ms): better-sqlite3 is synchronous, so a longer
 * wait would stall the daemon; the commit cycle retries with backoff instead.
 *
 * Channels are addressed by name; their row ids stay inside this class (cached from the channels
 * table, and extended only once the transaction that inserted them has committed).
 *
 * Chunked samples (float64 blobs per channel and commit) cost far less per sample than one row per
 * sample (bench/e2e.js measures both).
 */
export interface SqliteStoreOptions {
  /** synchronous = FULL: an fsync per commit. */
  durable?: boolean;
  /** Longest wait for a lock held by another connection (ms). */
  busyTimeoutMs?: number;
  /**
   * Called inside every commit's transaction after its rows are written, before COMMIT: throwing
   * from it rolls the real transaction back (fault injection in tests).
   */
  inTransaction?: () => void;
}

export class SqliteStore implements Store {
  readonly location: string;
  private readonly db: Database.Database;
  private readonly statements;
  private readonly ids = new Map<string, number>();
  private readonly inTransaction: (() => void) | null;

  constructor(path: string, options: SqliteStoreOptions = {}) {
    this.location = path;
    this.inTransaction = options.inTransaction ?? null;
    this.db = new Database(path, { timeout: options.busyTimeoutMs ?? 100 });
    this.db.pragma('journal_mode = WAL');
    this.db.pragma(`synchronous = ${options.durable ? 'FULL' : 'NORMAL'}`);
    this.db.pragma('foreign_keys = ON');
    this.migrate();
    this.statements = {
      insertChannel: this.db.prepare('INSERT INTO channels (name, unit, created_ms) VALUES (?, ?, ?)'),
      channels: this.db.prepare('SELECT id, name, unit FROM channels ORDER BY id'),
      insertChunk: this.db.prepare('INSERT INTO sample_chunks (channel_id, first_seq, count, first_ms, last_ms, times, vals, unstamped) VALUES (?, ?, ?, ?, ?, ?, ?, ?)'),
      chunksFrom: this.db.prepare('SELECT first_seq, count, times, vals, unstamped FROM sample_chunks WHERE channel_id = ? AND first_seq + count > ? ORDER BY first_seq'),
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
      putPosition: this.db.prepare('INSERT INTO source_positions (source, sequence, updated_ms) VALUES (?, ?, ?) ON CONFLICT(source) DO UPDATE SET sequence = excluded.sequence, updated_ms = excluded.updated_ms'),
      position: this.db.prepare('SELECT sequence FROM source_positions WHERE source = ?'),
      putState: this.db.prepare('INSERT INTO ingest_state (key, body) VALUES (?, ?) ON CONFLICT(key) DO UPDATE SET body = excluded.body'),
      deleteState: this.db.prepare('DELETE FROM ingest_state WHERE key = ?'),
      stateEntries: this.db.prepare('SELECT key, body FROM ingest_state WHERE substr(key, 1, ?) = ? ORDER BY key'),
      pruneChunks: this.db.prepare(`DELETE FROM sample_chunks WHERE last_ms < ? AND first_seq + count <= COALESCE((SELECT seq FROM checkpoints WHERE checkpoints.channel_id = sample_chunks.channel_id), 0)`),
      pruneEvents: this.db.prepare('DELETE FROM events WHERE time_ms < ?'),
    };
    for (const row of this.statements.channels.all() as { id: number; name: string }[]) this.ids.set(row.name, row.id);
  }

  private migrate(): void {
    const version = this.db.pragma('user_version', { simple: true }) as number;
    if (version > MIGRATIONS.length) throw new PlateauError('ERR_STORE_SCHEMA_VERSION', { location: this.location, version, known: MIGRATIONS.length });
    for (let v = version; v < MIGRATIONS.length; v++) {
      this.db.transaction(() => {
        this.db.exec(MIGRATIONS[v] as string);
        this.db.pragma(`user_version = ${v + 1}`);
      })();
    }
  }

  /** Runs a PRAGMA on the store's own connection (operators and tests: max_page_count, cache_size). */
  pragma(statement: string): unknown {
    return this.db.pragma(statement, { simple: true });
  }

  channels(): StoredChannel[] {
    return (this.statements.channels.all() as { name: string; unit: string | null }[]).map((row) => ({ name: row.name, unit: row.unit }));
  }

  /** Writes one batch atomically; see the port's contract. */
  commit(batch: CommitBatch, nowMs: number): CommitResult {
    const s = this.statements;
    const created = new Map<string, number>();
    const idOf = (name: string, unit: string | null = null): number => {
      const known = this.ids.get(name) ?? created.get(name);
      if (known !== undefined) return known;
      const id = Number(s.insertChannel.run(name, unit, nowMs).lastInsertRowid);
      created.set(name, id);
      return id;
    };
    const events: StoredEvent[] = [];
    try {
      this.db.transaction(() => {
        for (const channel of batch.channels) idOf(channel.name, channel.unit);
        for (const chunk of batch.chunks) {
          const n = chunk.values.length;
          if (n === 0) continue;
          s.insertChunk.run(idOf(chunk.channel), chunk.firstSeq, n, chunk.times[0], chunk.times[n - 1], toBlob(chunk.times), toBlob(chunk.values), chunk.unstamped === null ? null : Buffer.from(chunk.unstamped.buffer, chunk.unstamped.byteOffset, chunk.unstamped.byteLength));
        }
        for (const mark of batch.marks) s.insertMark.run(idOf(mark.channel), mark.seq, mark.kind);
        for (const event of batch.events) {
          const id = Number(s.insertEvent.run(event.timeMs, event.source, event.kind, event.at, JSON.stringify(event.body)).lastInsertRowid);
          events.push({ id, ...event });
        }
        for (const checkpoint of batch.checkpoints) s.putCheckpoint.run(idOf(checkpoint.channel), checkpoint.seq, nowMs, serialize(checkpoint.state));
        for (const point of batch.testPoints) s.putTestPoint.run(point.id, JSON.stringify(point.body), nowMs);
        for (const record of batch.records) s.insertRecord.run(record.testPointId, nowMs, JSON.stringify(record.body));
        for (const [key, value] of Object.entries(batch.counters)) s.putCounter.run(key, value);
        for (const position of batch.positions) if (position.durable) s.putPosition.run(position.source, position.sequence, nowMs);
        for (const entry of batch.state ?? []) {
          if (entry.body === null) s.deleteState.run(entry.key);
          else s.putState.run(entry.key, entry.body);
        }
        this.inTransaction?.();
      })();
    } catch (error) {
      throw this.translate(error);
    }
    for (const [name, id] of created) this.ids.set(name, id);
    return { events };
  }

  checkpoint(channel: string): { seq: number; state: unknown } | null {
    const id = this.ids.get(channel);
    if (id === undefined) return null;
    const row = this.statements.checkpoint.get(id) as { seq: number; state: Buffer } | undefined;
    return row ? { seq: row.seq, state: deserialize(row.state) } : null;
  }

  *samplesFrom(channel: string, fromSeq: number): Generator<SampleChunk> {
    const id = this.ids.get(channel);
    if (id === undefined) return;
    for (const row of this.statements.chunksFrom.iterate(id, fromSeq) as Iterable<{ first_seq: number; times: Buffer; vals: Buffer; unstamped: Buffer | null }>) {
      yield { channel, firstSeq: row.first_seq, times: fromBlob(row.times), values: fromBlob(row.vals), unstamped: row.unstamped === null ? null : new Uint8Array(row.unstamped) };
    }
  }

  marksFrom(channel: string, fromSeq: number): { seq: number; kind: string }[] {
    const id = this.ids.get(channel);
    return id === undefined ? [] : (this.statements.marksFrom.all(id, fromSeq) as { seq: number; kind: string }[]);
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

  records(testPointId: string): StoredRecord[] {
    return (this.statements.records.all(testPointId) as { id: number; created_ms: number; body: string }[]).map((row) => ({ id: row.id, createdMs: row.created_ms, body: JSON.parse(row.body) }));
  }

  counters(): Record<string, number> {
    const out: Record<string, number> = {};
    for (const row of this.statements.counters.all() as { key: string; value: number }[]) out[row.key] = row.value;
    return out;
  }

  stateEntries(prefix: string): { key: string; body: string }[] {
    return this.statements.stateEntries.all(prefix.length, prefix) as { key: string; body: string }[];
  }

  position(source: string): SourcePosition | null {
    const row = this.statements.position.get(source) as { sequence: number } | undefined;
    return row ? { source, sequence: row.sequence, durable: true } : null;
  }

  prune(beforeMs: number): { chunks: number; events: number } {
    try {
      const chunks = this.statements.pruneChunks.run(beforeMs).changes;
      const events = this.statements.pruneEvents.run(beforeMs).changes;
      return { chunks, events };
    } catch (error) {
      throw this.translate(error);
    }
  }

  /** Bytes on disk: the database and its WAL. */
  sizeBytes(): number {
    if (this.location === ':memory:') return 0;
    let total = 0;
    for (const suffix of ['', '-wal', '-shm']) {
      try {
        total += statSync(this.location + suffix).size;
      } catch {
        // not there
      }
    }
    return total;
  }

  close(): void {
    this.db.close();
  }

  /** A SqliteError (or anything thrown inside a transaction) as a catalogue error, the original as its cause. */
  private translate(error: unknown): PlateauError {
    if (error instanceof PlateauError) return error;
    const sqliteCode = typeof (error as { code?: unknown }).code === 'string' ? ((error as { code: string }).code) : '';
    let code: ErrorCode = 'ERR_STORE_FAILED';
    if (sqliteCode === 'SQLITE_FULL') code = 'ERR_STORE_FULL';
    else if (sqliteCode.startsWith('SQLITE_BUSY') || sqliteCode.startsWith('SQLITE_LOCKED')) code = 'ERR_STORE_BUSY';
    else if (sqliteCode.startsWith('SQLITE_IOERR') || sqliteCode.startsWith('SQLITE_READONLY') || sqliteCode.startsWith('SQLITE_CANTOPEN') || sqliteCode.startsWith('SQLITE_CORRUPT')) code = 'ERR_STORE_IO';
    const message = (error as Error).message ?? String(error);
    return new PlateauError(code, { location: this.location, detail: sqliteCode ? `${sqliteCode}: ${message}` : message }, { cause: error });
  }
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
