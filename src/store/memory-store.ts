import { serialize, deserialize } from 'node:v8';
import { PlateauError } from '../errors/catalogue.js';
import type { SourcePosition } from '../ports/sample-source.js';
import type { CommitBatch, CommitResult, EventToWrite, SampleChunk, Store, StoredChannel, StoredEvent, StoredRecord } from '../ports/store.js';

/**
 * The store port in memory (tests, short runs that need no file): the same contract as SqliteStore,
 * nothing survives the process. A commit is staged on copies and swapped in whole, so a failure
 * (`failNextCommits`, fault injection in tests) leaves nothing of the batch behind. Checkpoints
 * are kept serialised (v8), as SQLite keeps them, so that a restored state never shares memory with
 * the live one.
 */
interface Tables {
  channels: StoredChannel[];
  chunks: Map<string, SampleChunk[]>;
  checkpoints: Map<string, { seq: number; state: Buffer }>;
  marks: Map<string, { seq: number; kind: string }[]>;
  events: StoredEvent[];
  nextEventId: number;
  testPoints: Map<string, { body: string; updatedMs: number }>;
  records: StoredRecord[];
  nextRecordId: number;
  counters: Map<string, number>;
  positions: Map<string, number>;
  state: Map<string, string>;
}

export class MemoryStore implements Store {
  readonly location = ':memory:';
  private tables: Tables = {
    channels: [],
    chunks: new Map(),
    checkpoints: new Map(),
    marks: new Map(),
    events: [],
    nextEventId: 1,
    testPoints: new Map(),
    records: [],
    nextRecordId: 1,
    counters: new Map(),
    positions: new Map(),
    state: new Map(),
  };
  private failures: { count: number; code: 'ERR_STORE_FULL' | 'ERR_STORE_BUSY' | 'ERR_STORE_IO' | 'ERR_STORE_FAILED' } = { count: 0, code: 'ERR_STORE_FAILED' };
  private closed = false;

  /** The next `count` commits fail with `code` (tests). */
  failNextCommits(count: number, code: 'ERR_STORE_FULL' | 'ERR_STORE_BUSY' | 'ERR_STORE_IO' | 'ERR_STORE_FAILED' = 'ERR_STORE_FAILED'): void {
    this.failures = { count, code };
  }

  channels(): StoredChannel[] {
    return this.tables.channels.map((c) => ({ ...c }));
  }

  commit(batch: CommitBatch, nowMs: number): CommitResult {
    this.open();
    // Stage on copies of what the batch touches; swap in only when everything fits.
    const t = this.tables;
    const staged: Tables = {
      channels: t.channels.slice(),
      chunks: new Map(t.chunks),
      checkpoints: new Map(t.checkpoints),
      marks: new Map(t.marks),
      events: t.events,
      nextEventId: t.nextEventId,
      testPoints: new Map(t.testPoints),
      records: t.records,
      nextRecordId: t.nextRecordId,
      counters: new Map(t.counters),
      positions: new Map(t.positions),
      state: batch.state !== undefined && batch.state.length > 0 ? new Map(t.state) : t.state,
    };
    const known = new Set(staged.channels.map((c) => c.name));
    const ensure = (name: string, unit: string | null = null) => {
      if (known.has(name)) return;
      known.add(name);
      staged.channels.push({ name, unit });
    };
    for (const channel of batch.channels) ensure(channel.name, channel.unit);
    for (const chunk of batch.chunks) {
      if (chunk.values.length === 0) continue;
      ensure(chunk.channel);
      const list = (staged.chunks.get(chunk.channel) ?? []).slice();
      const last = list.at(-1);
      if (last !== undefined && chunk.firstSeq < last.firstSeq + last.values.length) {
        throw new PlateauError('ERR_STORE_FAILED', { location: this.location, detail: `channel ${chunk.channel}: chunk at sample ${chunk.firstSeq} overlaps the stored samples` });
      }
      list.push({ channel: chunk.channel, firstSeq: chunk.firstSeq, times: chunk.times.slice(), values: chunk.values.slice(), unstamped: chunk.unstamped === null ? null : chunk.unstamped.slice() });
      staged.chunks.set(chunk.channel, list);
    }
    for (const mark of batch.marks) {
      ensure(mark.channel);
      const list = (staged.marks.get(mark.channel) ?? []).slice();
      if (!list.some((m) => m.seq === mark.seq && m.kind === mark.kind)) list.push({ seq: mark.seq, kind: mark.kind });
      list.sort((a, b) => a.seq - b.seq);
      staged.marks.set(mark.channel, list);
    }
    const events: StoredEvent[] = [];
    let nextEventId = staged.nextEventId;
    for (const event of batch.events) events.push({ id: nextEventId++, ...copyEvent(event) });
    for (const checkpoint of batch.checkpoints) {
      ensure(checkpoint.channel);
      staged.checkpoints.set(checkpoint.channel, { seq: checkpoint.seq, state: serialize(checkpoint.state) });
    }
    for (const point of batch.testPoints) staged.testPoints.set(point.id, { body: JSON.stringify(point.body), updatedMs: nowMs });
    const records: StoredRecord[] = [];
    let nextRecordId = staged.nextRecordId;
    for (const record of batch.records) records.push({ id: nextRecordId++, createdMs: nowMs, body: JSON.parse(JSON.stringify({ testPointId: record.testPointId, body: record.body })) });
    for (const [key, value] of Object.entries(batch.counters)) staged.counters.set(key, value);
    for (const position of batch.positions) if (position.durable) staged.positions.set(position.source, position.sequence);
    for (const entry of batch.state ?? []) {
      if (entry.body === null) staged.state.delete(entry.key);
      else staged.state.set(entry.key, entry.body);
    }
    if (this.failures.count > 0) {
      this.failures.count--;
      throw new PlateauError(this.failures.code, { location: this.location, detail: 'injected failure' });
    }
    staged.events = [...t.events, ...events];
    staged.nextEventId = nextEventId;
    staged.records = [...t.records, ...records];
    staged.nextRecordId = nextRecordId;
    this.tables = staged;
    return { events: events.map((e) => ({ ...e, body: structuredClone(e.body) })) };
  }

  checkpoint(channel: string): { seq: number; state: unknown } | null {
    const row = this.tables.checkpoints.get(channel);
    return row ? { seq: row.seq, state: deserialize(row.state) } : null;
  }

  *samplesFrom(channel: string, fromSeq: number): Generator<SampleChunk> {
    for (const chunk of this.tables.chunks.get(channel) ?? []) {
      if (chunk.firstSeq + chunk.values.length <= fromSeq) continue;
      yield { channel, firstSeq: chunk.firstSeq, times: chunk.times.slice(), values: chunk.values.slice(), unstamped: chunk.unstamped === null ? null : chunk.unstamped.slice() };
    }
  }

  marksFrom(channel: string, fromSeq: number): { seq: number; kind: string }[] {
    return (this.tables.marks.get(channel) ?? []).filter((m) => m.seq >= fromSeq).map((m) => ({ ...m }));
  }

  eventsAfter(id: number, limit: number): StoredEvent[] {
    return this.tables.events.filter((e) => e.id > id).slice(0, limit).map(cloneStored);
  }

  eventsOfKind(kind: string, after: number, limit: number): StoredEvent[] {
    return this.tables.events.filter((e) => e.kind === kind && e.id > after).slice(0, limit).map(cloneStored);
  }

  eventsFor(source: string, limit: number): StoredEvent[] {
    const mine = this.tables.events.filter((e) => e.source === source);
    return mine.slice(Math.max(0, mine.length - limit)).map(cloneStored);
  }

  lastEventId(): number {
    return this.tables.events.at(-1)?.id ?? 0;
  }

  testPoints(): unknown[] {
    return [...this.tables.testPoints.values()].sort((a, b) => a.updatedMs - b.updatedMs).map((row) => JSON.parse(row.body));
  }

  records(testPointId: string): StoredRecord[] {
    return this.tables.records
      .filter((r) => (r.body as { testPointId: string }).testPointId === testPointId)
      .map((r) => ({ id: r.id, createdMs: r.createdMs, body: structuredClone((r.body as { body: unknown }).body) }));
  }

  counters(): Record<string, number> {
    return Object.fromEntries(this.tables.counters);
  }

  stateEntries(prefix: string): { key: string; body: string }[] {
    return [...this.tables.state]
      .filter(([key]) => key.startsWith(prefix))
      .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0))
      .map(([key, body]) => ({ key, body }));
  }

  position(source: string): SourcePosition | null {
    const sequence = this.tables.positions.get(source);
    return sequence === undefined ? null : { source, sequence, durable: true };
  }

  prune(beforeMs: number): { chunks: number; events: number } {
    this.open();
    let chunks = 0;
    for (const [channel, list] of this.tables.chunks) {
      const needed = this.tables.checkpoints.get(channel)?.seq ?? 0;
      const kept = list.filter((c) => !((c.times[c.values.length - 1] as number) < beforeMs && c.firstSeq + c.values.length <= needed));
      chunks += list.length - kept.length;
      this.tables.chunks.set(channel, kept);
    }
    const before = this.tables.events.length;
    this.tables.events = this.tables.events.filter((e) => !(e.timeMs < beforeMs));
    return { chunks, events: before - this.tables.events.length };
  }

  sizeBytes(): number {
    return 0;
  }

  close(): void {
    this.closed = true;
  }

  private open(): void {
    if (this.closed) throw new PlateauError('ERR_STORE_IO', { location: this.location, detail: 'the store is closed' });
  }
}

function copyEvent(event: EventToWrite): EventToWrite {
  return { timeMs: event.timeMs, source: event.source, kind: event.kind, at: event.at, body: structuredClone(event.body) };
}

function cloneStored(event: StoredEvent): StoredEvent {
  return { ...event, body: structuredClone(event.body) };
}
