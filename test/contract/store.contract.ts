import { afterEach, describe, expect, it } from 'vitest';
import type { CommitBatch, SampleChunk, Store } from '../../src/ports/store.js';

/**
 * The store port's contract (src/ports/store.ts), run against every implementation by
 * test/contract/store.test.ts. A factory gives a fresh store, a way to make its next commit fail
 * inside the implementation (after it has started writing, where that is possible), and, for a
 * store that keeps its data, a way to open it again.
 */
export interface StoreUnderTest {
  store: Store;
  /** Makes the next commit fail inside the store. */
  failNextCommit(): void;
  /** Closes the store and opens the same data again (undefined: nothing survives a close). */
  reopen?: () => Store;
}

export function emptyBatch(): CommitBatch {
  return { channels: [], chunks: [], events: [], checkpoints: [], marks: [], testPoints: [], records: [], counters: {}, positions: [] };
}

function chunk(channel: string, firstSeq: number, count: number, t0 = 1.79e12, unstamped: number[] = []): SampleChunk {
  let bitmap: Uint8Array | null = null;
  if (unstamped.length > 0) {
    bitmap = new Uint8Array(Math.ceil(count / 8));
    for (const i of unstamped) bitmap[i >> 3] = (bitmap[i >> 3] as number) | (1 << (i & 7));
  }
  return {
    channel,
    firstSeq,
    times: Float64Array.from({ length: count }, (_, i) => t0 + (firstSeq + i) * 100),
    values: Float64Array.from({ length: count }, (_, i) => 20 + Math.sin(firstSeq + i) / 7),
    unstamped: bitmap,
  };
}

function read(store: Store, channel: string, from: number): { seqs: number[]; values: number[]; times: number[]; unstamped: number[] } {
  const out = { seqs: [] as number[], values: [] as number[], times: [] as number[], unstamped: [] as number[] };
  for (const run of store.samplesFrom(channel, from)) {
    expect(run.channel).toBe(channel);
    for (let i = 0; i < run.values.length; i++) {
      const seq = run.firstSeq + i;
      if (seq < from) continue;
      out.seqs.push(seq);
      out.values.push(run.values[i] as number);
      out.times.push(run.times[i] as number);
      if (run.unstamped !== null && ((run.unstamped[i >> 3] as number) & (1 << (i & 7))) !== 0) out.unstamped.push(seq);
    }
  }
  return out;
}

export function storeContract(name: string, make: () => StoreUnderTest): void {
  describe(`the store port: ${name}`, () => {
    const opened: Store[] = [];
    const fresh = (): StoreUnderTest => {
      const made = make();
      opened.push(made.store);
      return made;
    };
    afterEach(() => {
      for (const store of opened.splice(0)) {
        try {
          store.close();
        } catch {
          // closed by the test
        }
      }
    });

    it('a commit introduces channels with their units; a channel met in a chunk is created; an existing one is left as it is', () => {
      const { store } = fresh();
      store.commit({ ...emptyBatch(), channels: [{ name: 'bath.ref_degC', unit: 'degC' }], chunks: [chunk('bath.probe_degC', 0, 3)] }, 1);
      store.commit({ ...emptyBatch(), channels: [{ name: 'bath.ref_degC', unit: 'K' }] }, 2);
      expect(store.channels().sort((a, b) => a.name.localeCompare(b.name))).toEqual([
        { name: 'bath.probe_degC', unit: null },
        { name: 'bath.ref_degC', unit: 'degC' },
      ]);
    });

    it('samples come back exactly, in order, from any index on, with the flags of the unstamped ones', () => {
      const { store } = fresh();
      store.commit({ ...emptyBatch(), chunks: [chunk('c', 0, 10, undefined, [3]), chunk('d', 0, 4)] }, 1);
      store.commit({ ...emptyBatch(), chunks: [chunk('c', 10, 7, undefined, [0, 6])] }, 2);
      const all = read(store, 'c', 0);
      expect(all.seqs).toEqual(Array.from({ length: 17 }, (_, i) => i));
      expect(all.values).toEqual([...chunk('c', 0, 10).values, ...chunk('c', 10, 7).values]);
      expect(all.times).toEqual([...chunk('c', 0, 10).times, ...chunk('c', 10, 7).times]);
      expect(all.unstamped).toEqual([3, 10, 16]);
      expect(read(store, 'c', 12).seqs).toEqual([12, 13, 14, 15, 16]);
      expect(read(store, 'c', 17).seqs).toEqual([]);
      expect([...store.samplesFrom('nobody', 0)]).toEqual([]);
    });

    it('a commit that fails writes nothing of its batch; the same batch then commits once', () => {
      const under = fresh();
      const { store } = under;
      store.commit({ ...emptyBatch(), chunks: [chunk('c', 0, 5)], events: [{ timeMs: 1, source: 'c', kind: 'steady', at: 2, body: {} }] }, 1);
      const batch: CommitBatch = {
        channels: [{ name: 'new', unit: 'kPa' }],
        chunks: [chunk('c', 5, 5), chunk('new', 0, 3)],
        events: [{ timeMs: 2, source: 'c', kind: 'stale', at: 9, body: { seconds: 30 } }],
        checkpoints: [{ channel: 'c', seq: 10, state: { record: 'x', version: 1 } }],
        marks: [{ channel: 'c', seq: 10, kind: 'restart-window' }],
        testPoints: [{ id: 'tp-1', body: { id: 'tp-1', state: 'running' } }],
        records: [{ testPointId: 'tp-1', body: { kind: 'stopped' } }],
        counters: { accepted: 13 },
        positions: [{ source: 'stream', sequence: 44, durable: true }],
        state: [{ key: 'gaps/c', body: '{"last":10}' }],
      };
      under.failNextCommit();
      expect(() => store.commit(batch, 3)).toThrow(expect.objectContaining({ code: expect.stringMatching(/^ERR_STORE_/) }));
      expect(store.channels().map((c) => c.name)).toEqual(['c']);
      expect(read(store, 'c', 0).seqs).toHaveLength(5);
      expect(store.eventsAfter(0, 10).map((e) => e.kind)).toEqual(['steady']);
      expect(store.checkpoint('c')).toBeNull();
      expect(store.marksFrom('c', 0)).toEqual([]);
      expect(store.testPoints()).toEqual([]);
      expect(store.records('tp-1')).toEqual([]);
      expect(store.counters()).toEqual({});
      expect(store.position('stream')).toBeNull();
      expect(store.stateEntries('')).toEqual([]);
      const result = store.commit(batch, 3);
      expect(result.events.map((e) => [e.id, e.kind])).toEqual([[2, 'stale']]);
      expect(read(store, 'c', 0).seqs).toHaveLength(10);
      expect(read(store, 'new', 0).seqs).toEqual([0, 1, 2]);
      expect(store.checkpoint('c')).toEqual({ seq: 10, state: { record: 'x', version: 1 } });
      expect(store.counters()).toEqual({ accepted: 13 });
      expect(store.position('stream')).toEqual({ source: 'stream', sequence: 44, durable: true });
      expect(store.stateEntries('gaps/')).toEqual([{ key: 'gaps/c', body: '{"last":10}' }]);
    });

    it('ingest state: the newest body of a key wins, null deletes it, entries are read by key prefix in key order', () => {
      const { store } = fresh();
      store.commit({ ...emptyBatch(), state: [{ key: 'gaps/b', body: '1' }, { key: 'gaps/a', body: '2' }, { key: 'sparkplug/g/n', body: '3' }, { key: 'gaps_x', body: '4' }] }, 0);
      store.commit({ ...emptyBatch(), state: [{ key: 'gaps/b', body: '5' }, { key: 'sparkplug/g/n', body: null }] }, 0);
      expect(store.stateEntries('gaps/')).toEqual([{ key: 'gaps/a', body: '2' }, { key: 'gaps/b', body: '5' }]);
      expect(store.stateEntries('sparkplug/')).toEqual([]);
      expect(store.stateEntries('').map((e) => e.key)).toEqual(['gaps/a', 'gaps/b', 'gaps_x']);
    });

    it('events: ids increase in the order of the batch and are never reused, even after retention removed them all', () => {
      const { store } = fresh();
      expect(store.lastEventId()).toBe(0);
      const event = (timeMs: number, kind: string, source = 'flow') => ({ timeMs, source, kind, at: null, body: { n: timeMs, nested: { list: [1, 2] } } });
      const first = store.commit({ ...emptyBatch(), events: [event(1, 'steady'), event(2, 'alert-acknowledged'), event(3, 'stale', 'bath'), event(4, 'alert-acknowledged')] }, 0);
      expect(first.events.map((e) => e.id)).toEqual([1, 2, 3, 4]);
      expect(first.events[0]).toEqual({ id: 1, ...event(1, 'steady') });
      expect(store.lastEventId()).toBe(4);
      expect(store.eventsAfter(1, 2).map((e) => e.id)).toEqual([2, 3]);
      expect(store.eventsOfKind('alert-acknowledged', 0, 10).map((e) => e.id)).toEqual([2, 4]);
      expect(store.eventsOfKind('alert-acknowledged', 2, 10).map((e) => e.id)).toEqual([4]);
      expect(store.eventsFor('flow', 2).map((e) => e.id)).toEqual([2, 4]);
      expect(store.eventsFor('bath', 10)).toEqual([{ id: 3, ...event(3, 'stale', 'bath') }]);
      expect(store.prune(10)).toEqual({ chunks: 0, events: 4 });
      expect(store.lastEventId()).toBe(0);
      expect(store.commit({ ...emptyBatch(), events: [event(20, 'steady')] }, 0).events[0]?.id).toBe(5);
    });

    it("a checkpoint replaces the channel's previous one and comes back as it was stored, typed arrays and all", () => {
      const { store } = fresh();
      const state = { record: 'channel', version: 1, values: Float64Array.of(1.5, -2.25, Number.NaN), nested: { flag: true, none: null } };
      store.commit({ ...emptyBatch(), channels: [{ name: 'c', unit: null }], checkpoints: [{ channel: 'c', seq: 100, state: { record: 'old' } }] }, 0);
      store.commit({ ...emptyBatch(), checkpoints: [{ channel: 'c', seq: 200, state }] }, 0);
      const back = store.checkpoint('c') as { seq: number; state: typeof state };
      expect(back.seq).toBe(200);
      expect(back.state).toEqual(state);
      expect(back.state.values).toBeInstanceOf(Float64Array);
      expect(back.state).not.toBe(state);
      expect(store.checkpoint('unknown')).toBeNull();
    });

    it('marks: kept once, read from an index on, in order', () => {
      const { store } = fresh();
      store.commit({ ...emptyBatch(), marks: [{ channel: 'c', seq: 50, kind: 'restart-window' }, { channel: 'c', seq: 10, kind: 'restart-window' }] }, 0);
      store.commit({ ...emptyBatch(), marks: [{ channel: 'c', seq: 50, kind: 'restart-window' }, { channel: 'd', seq: 1, kind: 'restart-window' }] }, 0);
      expect(store.marksFrom('c', 0)).toEqual([{ seq: 10, kind: 'restart-window' }, { seq: 50, kind: 'restart-window' }]);
      expect(store.marksFrom('c', 11)).toEqual([{ seq: 50, kind: 'restart-window' }]);
      expect(store.marksFrom('nobody', 0)).toEqual([]);
    });

    it('test points are replaced by id, in the order of their last change; records are kept per test point in order', () => {
      const { store } = fresh();
      store.commit({ ...emptyBatch(), testPoints: [{ id: 'a', body: { id: 'a', state: 'running' } }, { id: 'b', body: { id: 'b', state: 'running' } }] }, 1);
      store.commit({ ...emptyBatch(), testPoints: [{ id: 'a', body: { id: 'a', state: 'stopped' } }], records: [{ testPointId: 'a', body: { n: 1 } }, { testPointId: 'b', body: { n: 2 } }] }, 2);
      store.commit({ ...emptyBatch(), records: [{ testPointId: 'a', body: { n: 3 } }] }, 3);
      expect(store.testPoints()).toEqual([{ id: 'b', state: 'running' }, { id: 'a', state: 'stopped' }]);
      expect(store.records('a').map((r) => [r.createdMs, r.body])).toEqual([[2, { n: 1 }], [3, { n: 3 }]]);
      expect(store.records('a')[0]?.id).toBeLessThan(store.records('a')[1]?.id as number);
      expect(store.records('nobody')).toEqual([]);
    });

    it('counters and the positions of durable sources: the newest value wins; positions of other sources are not kept', () => {
      const { store } = fresh();
      store.commit({ ...emptyBatch(), counters: { accepted: 5, 'rejected.nan': 1 }, positions: [{ source: 'js', sequence: 7, durable: true }, { source: 'mqtt', sequence: 9, durable: false }] }, 0);
      store.commit({ ...emptyBatch(), counters: { accepted: 8 }, positions: [{ source: 'js', sequence: 12, durable: true }] }, 0);
      expect(store.counters()).toEqual({ accepted: 8, 'rejected.nan': 1 });
      expect(store.position('js')).toEqual({ source: 'js', sequence: 12, durable: true });
      expect(store.position('mqtt')).toBeNull();
    });

    it('retention deletes old samples and events, but never samples a channel still needs to rebuild its state', () => {
      const { store } = fresh();
      const old = (first: number, t0: number): SampleChunk => ({ channel: 'flow', firstSeq: first, times: Float64Array.from({ length: 100 }, (_, i) => t0 + i), values: new Float64Array(100), unstamped: null });
      store.commit({ ...emptyBatch(), chunks: [old(0, 1000), old(100, 2000), old(200, 3000)], events: [{ timeMs: 1500, source: 'flow', kind: 'steady', at: 5, body: {} }, { timeMs: 3500, source: 'flow', kind: 'stale', at: 250, body: {} }] }, 0);
      // No checkpoint yet: every sample is still needed for a replay; old events go.
      expect(store.prune(2500)).toEqual({ chunks: 0, events: 1 });
      store.commit({ ...emptyBatch(), checkpoints: [{ channel: 'flow', seq: 200, state: { any: 'state' } }] }, 0);
      expect(store.prune(2500)).toEqual({ chunks: 2, events: 0 });
      expect(store.eventsAfter(0, 10).map((e) => e.kind)).toEqual(['stale']);
      expect([...store.samplesFrom('flow', 0)].map((c) => c.firstSeq)).toEqual([200]);
    });

    it('what was committed is there again when the store is opened again', (context) => {
      const under = fresh();
      if (under.reopen === undefined) return context.skip();
      under.store.commit({ ...emptyBatch(), channels: [{ name: 'c', unit: 'bar' }], chunks: [chunk('c', 0, 8, undefined, [2])], events: [{ timeMs: 5, source: 'c', kind: 'steady', at: 3, body: { a: 1 } }], checkpoints: [{ channel: 'c', seq: 8, state: { v: Float64Array.of(1, 2) } }], counters: { accepted: 8 }, state: [{ key: 'sparkplug/g/n', body: '{"lastSeq":3}' }] }, 1);
      const again = under.reopen();
      opened.push(again);
      expect(again.channels()).toEqual([{ name: 'c', unit: 'bar' }]);
      expect(read(again, 'c', 0).unstamped).toEqual([2]);
      expect(again.lastEventId()).toBe(1);
      expect(again.checkpoint('c')).toEqual({ seq: 8, state: { v: Float64Array.of(1, 2) } });
      expect(again.counters()).toEqual({ accepted: 8 });
      expect(again.stateEntries('sparkplug/')).toEqual([{ key: 'sparkplug/g/n', body: '{"lastSeq":3}' }]);
      // And it goes on: new ids after the stored ones.
      expect(again.commit({ ...emptyBatch(), events: [{ timeMs: 6, source: 'c', kind: 'stale', at: 7, body: {} }] }, 2).events[0]?.id).toBe(2);
    });
  });
}
