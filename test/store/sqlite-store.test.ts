import { describe, expect, it } from 'vitest';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { MIGRATIONS } from '../../src/store/migrations.js';
import { emptyBatch } from '../contract/store.contract.js';

// What only the SQLite store has: schema migrations, and SQLite's failures as catalogue errors.
// The port's contract is in test/contract/store.test.ts.

const sampleChunk = (firstSeq: number, count: number) => ({ channel: 'c', firstSeq, times: Float64Array.from({ length: count }, (_, i) => 1.79e12 + firstSeq + i), values: new Float64Array(count).fill(1), unstamped: null });

describe('SqliteStore', () => {
  it('migrates a new file to the current schema version and refuses a newer one', () => {
    const path = join(mkdtempSync(join(tmpdir(), 'plateau-store-')), 's.sqlite');
    new SqliteStore(path).close();
    const db = new Database(path);
    expect(db.pragma('user_version', { simple: true })).toBe(MIGRATIONS.length);
    expect(db.pragma('journal_mode', { simple: true })).toBe('wal');
    db.pragma(`user_version = ${MIGRATIONS.length + 1}`);
    db.close();
    expect(() => new SqliteStore(path)).toThrow(expect.objectContaining({ code: 'ERR_STORE_SCHEMA_VERSION', message: expect.stringMatching(/schema version \d+ is newer than this plateau knows/) }));
  });

  it('a file of schema version 1 gains the columns and table of version 2 and keeps its samples', () => {
    const path = join(mkdtempSync(join(tmpdir(), 'plateau-store-')), 's.sqlite');
    const db = new Database(path);
    db.exec(MIGRATIONS[0] as string);
    db.pragma('user_version = 1');
    db.prepare('INSERT INTO channels (name, unit, created_ms) VALUES (?, ?, ?)').run('c', 'bar', 0);
    const times = Float64Array.of(1, 2);
    const values = Float64Array.of(5, 6);
    db.prepare('INSERT INTO sample_chunks (channel_id, first_seq, count, first_ms, last_ms, times, vals) VALUES (1, 0, 2, 1, 2, ?, ?)').run(Buffer.from(times.buffer), Buffer.from(values.buffer));
    db.close();
    const store = new SqliteStore(path);
    expect([...store.samplesFrom('c', 0)]).toEqual([{ channel: 'c', firstSeq: 0, times, values, unstamped: null }]);
    expect(store.position('any')).toBeNull();
    store.close();
  });

  it("SQLite's failures are catalogue errors with the SQLite error as their cause: a full file, a locked one", () => {
    const path = join(mkdtempSync(join(tmpdir(), 'plateau-store-')), 's.sqlite');
    const store = new SqliteStore(path, { busyTimeoutMs: 10 });
    store.commit({ ...emptyBatch(), chunks: [sampleChunk(0, 10)] }, 0);
    store.pragma(`max_page_count = ${store.pragma('page_count') as number}`);
    const full = (() => {
      try {
        store.commit({ ...emptyBatch(), chunks: [sampleChunk(10, 50_000)] }, 0);
      } catch (error) {
        return error as Error & { code: string; cause: { code: string } };
      }
      return null;
    })();
    expect(full?.code).toBe('ERR_STORE_FULL');
    expect(full?.cause.code).toBe('SQLITE_FULL');
    expect(full?.message).toMatch(/the database or its disk is full \(SQLITE_FULL: /);
    store.pragma('max_page_count = 1073741823');
    const other = new Database(path);
    other.exec('BEGIN IMMEDIATE');
    expect(() => store.commit({ ...emptyBatch(), chunks: [sampleChunk(10, 5)] }, 0)).toThrow(expect.objectContaining({ code: 'ERR_STORE_BUSY' }));
    other.exec('ROLLBACK');
    other.close();
    store.commit({ ...emptyBatch(), chunks: [sampleChunk(10, 5)] }, 0);
    expect([...store.samplesFrom('c', 0)].reduce((n, c) => n + c.values.length, 0)).toBe(15);
    store.close();
  });
});
