import type { AckToken, SourcePosition } from '../ports/sample-source.js';
import type { CheckpointToWrite, CommitBatch, EventToWrite, MarkToWrite, SampleChunk, StateEntry, StoredChannel } from '../ports/store.js';

/**
 * Everything accepted since the last successful commit: the samples (one growing chunk per
 * channel), the channels they introduce, the events they raised, window marks, checkpoints due,
 * test-point changes and records, and the acknowledgement tokens of the source batches they came
 * in. A failed commit leaves it whole; what arrives meanwhile is added to it, so the next attempt
 * commits both, and the tokens are acknowledged only once a commit holding their samples succeeded.
 *
 * Samples of one channel are consecutive (the channel numbers them), so one chunk per channel holds
 * them all. Cost: O(1) per sample, no object per sample: the samples go straight into typed arrays
 * (doubled when full) and the store's batch gets views of them, not copies. The arrays are kept for
 * the channel's next chunk after a commit (the store copies what it keeps: SQLite writes blobs, the
 * memory store copies), unless they are much larger than the chunk needed (see clear).
 */
class OpenChunk {
  firstSeq = 0;
  length = 0;
  times: Float64Array;
  values: Float64Array;
  /** Bit i set: sample i carried no time of its own (null while every sample did). */
  unstamped: Uint8Array | null = null;
  /** The capacity the channel's last chunk reached (its arrays were let go): the next one starts there. */
  hint = 0;

  constructor(capacity: number) {
    this.times = new Float64Array(capacity);
    this.values = new Float64Array(capacity);
  }

  grow(): void {
    const capacity = Math.max(FIRST_CAPACITY, this.values.length * 2, this.length === 0 ? this.hint : 0);
    const times = new Float64Array(capacity);
    times.set(this.times);
    const values = new Float64Array(capacity);
    values.set(this.values);
    this.times = times;
    this.values = values;
    if (this.unstamped !== null) {
      const bits = new Uint8Array(capacity >> 3);
      bits.set(this.unstamped);
      this.unstamped = bits;
    }
  }

  /** Lets the arrays go; the next chunk starts at `hint` slots. */
  release(hint: number): void {
    this.hint = hint;
    this.times = EMPTY;
    this.values = EMPTY;
    this.unstamped = null;
    this.length = 0;
  }

  markUnstamped(i: number): void {
    if (this.unstamped === null) this.unstamped = new Uint8Array(this.values.length >> 3);
    this.unstamped[i >> 3] = (this.unstamped[i >> 3] as number) | (1 << (i & 7));
  }
}

const EMPTY = new Float64Array(0);

/** A chunk's first capacity (a multiple of 8: the unstamped bitmap has a bit per slot). */
const FIRST_CAPACITY = 64;
/** Arrays larger than this (samples) are not kept for the channel's next chunk after a commit. */
const KEEP_CAPACITY = 1 << 16;

export class PendingBatch {
  private readonly channels = new Map<string, string | null>();
  private readonly chunks = new Map<string, OpenChunk>();
  private events: EventToWrite[] = [];
  private marks: MarkToWrite[] = [];
  private readonly checkpoints = new Map<string, CheckpointToWrite>();
  private readonly testPoints = new Map<string, unknown>();
  private records: { testPointId: string; body: unknown }[] = [];
  private tokens: AckToken[] = [];
  private readonly positions = new Map<string, SourcePosition>();
  private readonly state = new Map<string, string | null>();
  private samples = 0;

  /** Samples waiting for a commit. */
  get sampleCount(): number {
    return this.samples;
  }

  /** Source batches waiting for their acknowledgement. */
  get tokenCount(): number {
    return this.tokens.length;
  }

  get eventCount(): number {
    return this.events.length;
  }

  /** True when something waits on this commit (an acknowledgement, an event, a test point): commit at once. */
  get urgent(): boolean {
    return this.tokens.length > 0 || this.events.length > 0 || this.testPoints.size > 0;
  }

  get empty(): boolean {
    return this.samples === 0 && this.channels.size === 0 && this.events.length === 0 && this.marks.length === 0 && this.checkpoints.size === 0 && this.testPoints.size === 0 && this.records.length === 0 && this.tokens.length === 0 && this.state.size === 0;
  }

  /** A channel the store has not seen yet (written with the batch, before its samples). */
  addChannel(name: string, unit: string | null): void {
    this.channels.set(name, unit);
  }

  addSample(channel: string, seq: number, timeMs: number, value: number, stamped: boolean): void {
    let chunk = this.chunks.get(channel);
    if (chunk === undefined || chunk.length === 0) {
      if (chunk === undefined) {
        chunk = new OpenChunk(FIRST_CAPACITY);
        this.chunks.set(channel, chunk);
      }
      chunk.firstSeq = seq;
    } else if (seq !== chunk.firstSeq + chunk.length) {
      throw new RangeError(`channel ${channel}: sample ${seq} does not follow sample ${chunk.firstSeq + chunk.length - 1}`);
    }
    const i = chunk.length;
    if (i === chunk.values.length) chunk.grow();
    chunk.times[i] = timeMs;
    chunk.values[i] = value;
    if (!stamped) chunk.markUnstamped(i);
    chunk.length = i + 1;
    this.samples++;
  }

  /** The channel's samples waiting for a commit (they follow the stored ones), or null. */
  pendingSamples(channel: string): { firstSeq: number; times: ArrayLike<number>; values: ArrayLike<number> } | null {
    const chunk = this.chunks.get(channel);
    if (chunk === undefined || chunk.length === 0) return null;
    return { firstSeq: chunk.firstSeq, times: chunk.times.subarray(0, chunk.length), values: chunk.values.subarray(0, chunk.length) };
  }

  addEvent(event: EventToWrite): void {
    this.events.push(event);
  }

  addMark(mark: MarkToWrite): void {
    this.marks.push(mark);
  }

  /** The channel's checkpoint; a later one replaces an earlier one still waiting. */
  setCheckpoint(checkpoint: CheckpointToWrite): void {
    this.checkpoints.set(checkpoint.channel, checkpoint);
  }

  putTestPoint(id: string, body: unknown): void {
    this.testPoints.set(id, body);
  }

  addRecord(testPointId: string, body: unknown): void {
    this.records.push({ testPointId, body });
  }

  addToken(token: AckToken): void {
    this.tokens.push(token);
  }

  /** An ingest state entry (a later body for the key replaces one still waiting; null deletes). */
  setState(key: string, body: string | null): void {
    this.state.set(key, body);
  }

  /** The newest position of a source (durable sources store it with the batch). */
  setPosition(position: SourcePosition): void {
    this.positions.set(position.source, position);
  }

  /** The store's batch, with the counters as they are now and any events of the attempt itself. */
  toCommitBatch(counters: Record<string, number>, extraEvents: EventToWrite[] = []): CommitBatch {
    const channels: StoredChannel[] = [...this.channels].map(([name, unit]) => ({ name, unit }));
    const chunks: SampleChunk[] = [];
    for (const [channel, chunk] of this.chunks) {
      const n = chunk.length;
      if (n === 0) continue;
      const unstamped = chunk.unstamped === null ? null : chunk.unstamped.subarray(0, Math.ceil(n / 8));
      chunks.push({ channel, firstSeq: chunk.firstSeq, times: chunk.times.subarray(0, n), values: chunk.values.subarray(0, n), unstamped });
    }
    return {
      channels,
      chunks,
      events: extraEvents.length > 0 ? [...this.events, ...extraEvents] : this.events.slice(),
      checkpoints: [...this.checkpoints.values()],
      marks: this.marks.slice(),
      testPoints: [...this.testPoints].map(([id, body]) => ({ id, body })),
      records: this.records.slice(),
      counters,
      positions: [...this.positions.values()],
      state: [...this.state].map(([key, body]): StateEntry => ({ key, body })),
    };
  }

  /** Empties the batch after a successful commit; returns the tokens to acknowledge. */
  clear(): AckToken[] {
    const tokens = this.tokens;
    this.channels.clear();
    // Each channel's arrays serve its next chunk. A channel that took nothing since is let go; arrays
    // beyond KEEP_CAPACITY, or more than twice the size this chunk needed (after a burst, or the
    // long batch of a store outage), are let go too and the next chunk starts at the size this one
    // needed: what stays allocated follows what the channels take per commit.
    for (const [channel, chunk] of this.chunks) {
      const capacity = chunk.values.length;
      if (chunk.length === 0) this.chunks.delete(channel);
      else if (capacity > KEEP_CAPACITY || capacity > 2 * Math.max(FIRST_CAPACITY, chunk.length)) chunk.release(Math.max(FIRST_CAPACITY, 2 ** Math.ceil(Math.log2(chunk.length))));
      else {
        chunk.length = 0;
        chunk.unstamped = null;
      }
    }
    this.events = [];
    this.marks = [];
    this.checkpoints.clear();
    this.testPoints.clear();
    this.records = [];
    this.tokens = [];
    this.positions.clear();
    this.state.clear();
    this.samples = 0;
    return tokens;
  }
}
