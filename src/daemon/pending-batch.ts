import type { AckToken, SourcePosition } from '../ports/sample-source.js';
import type { CheckpointToWrite, CommitBatch, EventToWrite, MarkToWrite, SampleChunk, StoredChannel } from '../ports/store.js';

/**
 * Everything accepted since the last successful commit: the samples (one growing chunk per
 * channel), the channels they introduce, the events they raised, window marks, checkpoints due,
 * test-point changes and records, and the acknowledgement tokens of the source batches they came
 * in. A failed commit leaves it whole; what arrives meanwhile is added to it, so the next attempt
 * commits both, and the tokens are acknowledged only once a commit holding their samples succeeded.
 *
 * Samples of one channel are consecutive (the channel numbers them), so one chunk per channel holds
 * them all. Cost: O(1) per sample (two array pushes); building the store's batch copies the samples
 * into typed arrays once per attempt.
 */
interface OpenChunk {
  firstSeq: number;
  times: number[];
  values: number[];
  /** Offsets (within the chunk) of the samples that carried no time of their own. */
  unstamped: number[];
}

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
    return this.samples === 0 && this.channels.size === 0 && this.events.length === 0 && this.marks.length === 0 && this.checkpoints.size === 0 && this.testPoints.size === 0 && this.records.length === 0 && this.tokens.length === 0;
  }

  /** A channel the store has not seen yet (written with the batch, before its samples). */
  addChannel(name: string, unit: string | null): void {
    this.channels.set(name, unit);
  }

  addSample(channel: string, seq: number, timeMs: number, value: number, stamped: boolean): void {
    let chunk = this.chunks.get(channel);
    if (chunk === undefined) {
      chunk = { firstSeq: seq, times: [], values: [], unstamped: [] };
      this.chunks.set(channel, chunk);
    } else if (seq !== chunk.firstSeq + chunk.values.length) {
      throw new RangeError(`channel ${channel}: sample ${seq} does not follow sample ${chunk.firstSeq + chunk.values.length - 1}`);
    }
    if (!stamped) chunk.unstamped.push(chunk.values.length);
    chunk.times.push(timeMs);
    chunk.values.push(value);
    this.samples++;
  }

  /** The channel's samples waiting for a commit (they follow the stored ones), or null. */
  pendingSamples(channel: string): { firstSeq: number; times: readonly number[]; values: readonly number[] } | null {
    return this.chunks.get(channel) ?? null;
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

  /** The newest position of a source (durable sources store it with the batch). */
  setPosition(position: SourcePosition): void {
    this.positions.set(position.source, position);
  }

  /** The store's batch, with the counters as they are now and any events of the attempt itself. */
  toCommitBatch(counters: Record<string, number>, extraEvents: EventToWrite[] = []): CommitBatch {
    const channels: StoredChannel[] = [...this.channels].map(([name, unit]) => ({ name, unit }));
    const chunks: SampleChunk[] = [];
    for (const [channel, chunk] of this.chunks) {
      let unstamped: Uint8Array | null = null;
      if (chunk.unstamped.length > 0) {
        unstamped = new Uint8Array(Math.ceil(chunk.values.length / 8));
        for (const i of chunk.unstamped) unstamped[i >> 3] = (unstamped[i >> 3] as number) | (1 << (i & 7));
      }
      chunks.push({ channel, firstSeq: chunk.firstSeq, times: Float64Array.from(chunk.times), values: Float64Array.from(chunk.values), unstamped });
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
    };
  }

  /** Empties the batch after a successful commit; returns the tokens to acknowledge. */
  clear(): AckToken[] {
    const tokens = this.tokens;
    this.channels.clear();
    this.chunks.clear();
    this.events = [];
    this.marks = [];
    this.checkpoints.clear();
    this.testPoints.clear();
    this.records = [];
    this.tokens = [];
    this.positions.clear();
    this.samples = 0;
    return tokens;
  }
}
