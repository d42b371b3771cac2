import { describe, expect, it } from 'vitest';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { MIGRATIONS } from '../../src/store/migrations.js';

function emptyBatch() {
  return { channels: [], chunks: [], events: [], checkpoints: [], marks: [], testPoints: [], records: [], counters: {}, positions: [] };
}

describe('SqliteStore', () => {
  it('migrates a new file to the current schema version and refuses a newer one', () => {
    const path = join(mkdtempSync(join(tmpdir(), 'plateau-store-')), 's.sqlite');
    new SqliteStore(path).close();
    const db = new Database(path);
    expect(db.pragma('user_version', { simple: true })).toBe(MIGRATIONS.length);
    expect(db.pragma('journal_mode', { simple: true })).toBe('wal');
    db.pragma(`user_version = ${MIGRATIONS.length + 1}`);
    db.close();
    expect(() => new SqliteStore(path)).toThrow(/schema version \d+ is newer than this plateau knows/);
  });

  it('stores samples in chunks and reads them back exactly, from any sample on', () => {
    const store = new SqliteStore(':memory:');
    const id = 'bath_degC';
    const times = Float64Array.from({ length: 10 }, (_, i) => 1.7e12 + i * 100.5);
    const values = Float64Array.from({ length: 10 }, (_, i) => 60 + Math.sin(i) * 1e-3);
    store.commit({ ...emptyBatch(), channels: [{ name: id, unit: 'degC' }], chunks: [{ channel: id, firstSeq: 0, times: times.subarray(0, 6), values: values.subarray(0, 6), unstamped: null }] }, 0);
    store.commit({ ...emptyBatch(), chunks: [{ channel: id, firstSeq: 6, times: times.subarray(6), values: values.subarray(6), unstamped: null }] }, 0);
    const back: number[] = [];
    for (const chunk of store.samplesFrom(id, 4)) back.push(...Array.from(chunk.values).slice(Math.max(0, 4 - chunk.firstSeq)));
    expect(back).toEqual(Array.from(values.subarray(4)));
    expect(store.channels()).toEqual([{ name: id, unit: 'degC' }]);
    store.close();
  });

  it('retention deletes old samples and events, but never samples a channel still needs to rebuild its state', () => {
    const store = new SqliteStore(':memory:');
    const id = 'flow';
    const chunk = (first: number, t0: number) => ({ channel: id, firstSeq: first, times: Float64Array.from({ length: 100 }, (_, i) => t0 + i), values: new Float64Array(100), unstamped: null });
    store.commit({ ...emptyBatch(), chunks: [chunk(0, 1000), chunk(100, 2000), chunk(200, 3000)], events: [{ timeMs: 1500, source: 'flow', kind: 'steady', at: 5, body: {} }, { timeMs: 3500, source: 'flow', kind: 'stale', at: 250, body: {} }] }, 0);
    // No checkpoint yet: every sample is still needed for a replay; old events go.
    expect(store.prune(2500)).toEqual({ chunks: 0, events: 1 });
    store.commit({ ...emptyBatch(), checkpoints: [{ channel: id, seq: 200, state: { any: 'state' } }] }, 0);
    const removed = store.prune(2500);
    expect(removed.chunks).toBe(2); // the chunks before the checkpoint and older than the horizon
    expect(store.eventsAfter(0, 10).map((e) => e.kind)).toEqual(['stale']);
    expect([...store.samplesFrom(id, 0)].map((c) => c.firstSeq)).toEqual([200]);
    expect(store.checkpoint(id)).toEqual({ seq: 200, state: { any: 'state' } });
    store.close();
  });

  it('the newest event id in one look-up, and the events of one kind in id order', () => {
    const store = new SqliteStore(':memory:');
    expect(store.lastEventId()).toBe(0);
    const event = (timeMs: number, kind: string) => ({ timeMs, source: 'flow', kind, at: null, body: { n: timeMs } });
    store.commit({ ...emptyBatch(), events: [event(1, 'steady'), event(2, 'alert-acknowledged'), event(3, 'stale'), event(4, 'alert-acknowledged')] }, 0);
    expect(store.lastEventId()).toBe(4);
    expect(store.eventsOfKind('alert-acknowledged', 0, 10).map((e) => [e.id, e.body.n])).toEqual([[2, 2], [4, 4]]);
    expect(store.eventsOfKind('alert-acknowledged', 2, 10).map((e) => e.id)).toEqual([4]);
    expect(store.eventsOfKind('alert-acknowledged', 0, 1).map((e) => e.id)).toEqual([2]);
    // Retention may empty the table; the ids still never repeat (AUTOINCREMENT).
    store.prune(10);
    expect(store.lastEventId()).toBe(0);
    store.commit({ ...emptyBatch(), events: [event(20, 'steady')] }, 0);
    expect(store.lastEventId()).toBe(5);
    store.close();
  });
});
