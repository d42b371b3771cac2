import { ChannelPipeline, type ChannelPipelineState } from './channel-pipeline.js';
import type { ChannelCriteriaState } from './criteria/channel-criteria.js';
import { DEFAULT_UNCERTAINTY_SETTINGS, type ChannelOptions, type UncertaintySettings } from './channel-options.js';
import type { TypeBSpec } from '../core/uncertainty/type-b-component.js';
import type { ChannelEvent } from './channel-events.js';
import { channelRecord, decideCheckpoint, optionsIdentity, type ChannelRecord, type ChannelWindowsState, type OptionsIdentity } from './channel-state.js';
import { SteadyHistory } from './steadiness.js';
import { parseSetPointMark, setPointMark } from './criteria/set-point-mark.js';
import { unitLabel } from './unit-label.js';

/**
 * One channel of the daemon: its pipeline, the time policy that decides which samples enter, its
 * window restarts and its replay. Everything the daemon stores about a channel is what this object
 * hands out: accepted samples (with their index and the time taken), events, window marks and
 * checkpoints; and a restart feeds the stored samples back through the same accept path, so the
 * restored channel has decided every sample exactly as the live one did.
 *
 * Time policy (documented in the README): a sample's time is its payload's time when it has one,
 * else its arrival time. Samples are taken in arrival order. A payload-stamped sample whose time
 * equals one of the channel's last RECENT_TIMES accepted stamped times is a duplicate (an MQTT
 * message delivered again after a reconnect) and is refused; one older than the newest but still
 * within those recent times is late (messages reordered around a reconnect) and is accepted and
 * counted as late; one older than all of them is out of order and refused, since nothing can tell
 * whether it repeats an earlier one. Arrival-stamped samples are never refused; their time is held
 * at or after the channel's last time (so a repeat cannot be recognised: use payload times when
 * delivery is at least once).
 *
 * Restore (`restore`): the checkpoint is loaded or set aside as src/engine/channel-state.ts
 * decides (a named, versioned record with the fingerprint of the options it was built under); then
 * the stored samples before the checkpoint's index only refill the remembered times (up to
 * RECENT_TIMES of them), and from the index on each goes through the same classify-then-admit path
 * as a live sample, with the stamp flag it was stored with, while the window marks restart the
 * window at their sample index. The verdict is the live one by construction; should a stored sample
 * be refused all the same (retention removed the samples its lateness was judged against), it is
 * taken anyway, since it was accepted once, and counted in `RestoreReport.forced`. A checkpoint set
 * aside means a replay of every stored sample; when retention has removed the oldest, the channel
 * starts again at the first one kept (`seqOffset`: its sample indices still match the store's,
 * while the indices in its events count from there).
 *
 * No clock, no I/O: times come in as arguments.
 */

/**
 * Accepted times remembered per channel (32 KiB). After a reconnect a broker may redeliver the
 * whole window of messages the daemon had not yet acknowledged (it acknowledges after each commit)
 * interleaved with new ones (aedes does): around a broker restart in test/integration/broker-restart
 * a first delivery came up to 400 samples behind the newest, which 256 remembered times turned into
 * lost samples about one run in five. The scan runs only for a sample older than the newest.
 */
export const RECENT_TIMES = 4096;

export type AcceptResult =
  | { accepted: true; seq: number; timeMs: number; late: boolean; events: readonly ChannelEvent[]; /** The engine failed on the sample after taking it (a defect): it must still be stored. */ engineError: Error | null }
  | { accepted: false; reason: 'duplicate' | 'out-of-order' | 'redelivered' };

/**
 * A control mark at sample index `seq`, stored and replayed at that index: a window restart (a test
 * point started), or the test point's set point for the stability rules (`set-point:<number>` or
 * `set-point:none`, src/engine/criteria/set-point-mark.ts).
 */
export interface WindowMark {
  seq: number;
  kind: 'restart-window' | `set-point:${string}` | `open:${string}` | `close:${string}` | `type-b:${string}`;
}

/** The mark of the channel's Type B components set through the API: `type-b:<JSON list>`. */
const TYPE_B_MARK = 'type-b:';

/**
 * A test point's own window over the channel (issue 10: two test points sharing a channel do not
 * disturb each other). While nothing has changed the channel's pipeline since the test point
 * started, its window IS the channel's pipeline (attached: no cost). The moment another window
 * restart or set point would change the channel's pipeline, every attached window is forked first:
 * it becomes a pipeline of its own, a copy of the channel's state at that sample, fed every sample
 * after it. So each test point's window is exactly what the channel's pipeline would have been had
 * only that test point started, at no cost while one test point holds the channel. Marks
 * `open:<id>` and `close:<id>` are stored beside the window restarts and replayed at their index;
 * forked windows are part of the channel's checkpoint.
 */
export interface WindowState {
  id: string;
  pipeline: ChannelPipelineState;
  criteria: ChannelCriteriaState | null;
}

/** A stored sample run, as the store hands it back (times in epoch ms). */
export interface StoredSamples {
  firstSeq: number;
  times: ArrayLike<number>;
  values: ArrayLike<number>;
  /** Bit i set: sample i carried no time of its own. */
  unstamped: Uint8Array | null;
}

/** What a channel reads from the store at restart. */
export interface ChannelHistory {
  /** Stored samples from `fromSeq` on (a run may start before it), in order. */
  samplesFrom(fromSeq: number): Iterable<StoredSamples>;
  marksFrom(fromSeq: number): readonly { seq: number; kind: string }[];
}

export interface RestoreReport {
  /** fresh: no checkpoint; loaded: from the checkpoint; replayed: the checkpoint was set aside. */
  outcome: 'fresh' | 'loaded' | 'replayed';
  /** Why, for the log (options carried over, why a checkpoint was set aside, a shortened history). */
  detail: string | null;
  /** Samples fed through the pipeline. */
  replayed: number;
  /** Stored samples the time policy would refuse now, taken all the same (see the class comment). */
  forced: number;
}

export class Channel {
  readonly name: string;
  private unitValue: string | null = null;
  /** Why the unit shown is not the one a payload gave (a conflict with the configuration), or null. */
  unitNote: string | null = null;
  private readonly options: ChannelOptions;
  /** The options as the checkpoints carry them (computed once: a checkpoint of every channel is written at each stop). */
  private readonly identity: OptionsIdentity;
  private current: ChannelPipeline;
  /** Store index of the pipeline's sample 0 (see the class comment). */
  private offset = 0;
  /** When the channel was steady, by pipeline sample index (for derived results). */
  private readonly steadiness = new SteadyHistory();
  private lastStampMs = Number.NEGATIVE_INFINITY;
  /** The newest stamped time the store held when the channel was rebuilt from it (-Infinity: not rebuilt). */
  private restoredNewestMs = Number.NEGATIVE_INFINITY;
  /** The last RECENT_TIMES accepted payload times (a ring), for duplicate and lateness checks. */
  private readonly recentTimes = new Float64Array(RECENT_TIMES);
  private recentCount = 0;
  /** Test points whose window is the channel's pipeline (nothing has restarted it since they started). */
  private readonly attached = new Set<string>();
  /** Test points whose window was forked from the channel's pipeline when something else changed it. */
  private readonly forks = new Map<string, ChannelPipeline>();

  constructor(name: string, unit: string | null, options: ChannelOptions) {
    this.name = name;
    this.unit = unit;
    this.options = options;
    this.identity = optionsIdentity(options);
    this.current = this.newPipeline();
  }

  /** The channel's unit (configured, or from the first payload that gave one), or null. */
  get unit(): string | null {
    return this.unitValue;
  }

  /** Every window over the channel prints the new unit in its verdict's words. */
  set unit(unit: string | null) {
    this.unitValue = unit;
    const label = unitLabel(unit);
    this.current?.setUnitLabel(label);
    for (const fork of this.forks.values()) fork.setUnitLabel(label);
  }

  /** A new window over the channel, with its options and the unit for its words. */
  private newPipeline(): ChannelPipeline {
    const pipeline = new ChannelPipeline(this.name, this.options);
    pipeline.setUnitLabel(unitLabel(this.unitValue));
    return pipeline;
  }

  get pipeline(): ChannelPipeline {
    return this.current;
  }

  /** Store index of the pipeline's sample 0 (0 unless rebuilt from a history retention had shortened). */
  get seqOffset(): number {
    return this.offset;
  }

  /** Epoch milliseconds of the newest accepted sample (its own time stamp, or its held arrival time). */
  get lastTimeMs(): number {
    return this.lastStampMs;
  }

  /** The store index the next accepted sample gets. */
  get nextSeq(): number {
    return this.offset + this.current.totalReceived;
  }

  /** Applies the time policy and, when it admits the sample, feeds the pipeline. */
  accept(value: number, timeMs: number, stamped: boolean): AcceptResult {
    const verdict = this.classify(timeMs, stamped);
    // Older than every remembered time, but no newer than what the store held when the channel was
    // rebuilt: a message committed before a restart that the broker delivers again (at least once).
    if (verdict === 'out-of-order' && timeMs <= this.restoredNewestMs) return { accepted: false, reason: 'redelivered' };
    if (verdict === 'duplicate' || verdict === 'out-of-order') return { accepted: false, reason: verdict };
    const seq = this.nextSeq;
    let events: readonly ChannelEvent[] = [];
    let engineError: Error | null = null;
    try {
      events = this.admit(value, timeMs, stamped);
    } catch (error) {
      // Not taken at all: nothing to store. Taken, then failed: the index is used, so the sample is stored.
      if (this.nextSeq === seq) throw error;
      engineError = error instanceof Error ? error : new Error(String(error));
    }
    return { accepted: true, seq, timeMs: this.admitted, late: verdict === 'late', events, engineError };
  }

  /** Starts a new growing window at the next sample (a test point starts); returns the mark to store. */
  restartWindow(): WindowMark {
    const mark: WindowMark = { seq: this.nextSeq, kind: 'restart-window' };
    this.applyRestart();
    return mark;
  }

  private applyRestart(): void {
    // A restart of a window that has taken no sample since the last one changes nothing (a mark replayed twice).
    if (this.current.totalReceived > this.lastRestartAt) this.detachAll();
    this.lastRestartAt = this.current.totalReceived;
    this.steadiness.restart(this.current.totalReceived);
    this.current.restartWindow();
  }

  /** Pipeline sample count at the last window restart (-1: none yet). */
  private lastRestartAt = -1;

  /** Forks every attached test-point window: it keeps the channel's state as it is now. */
  private detachAll(): void {
    for (const id of this.attached) this.forks.set(id, this.fork());
    this.attached.clear();
  }

  private fork(): ChannelPipeline {
    const copy = this.newPipeline();
    copy.loadState(structuredClone(this.current.saveState()));
    const criteria = this.current.criteria;
    if (criteria !== null) copy.criteria?.loadState(structuredClone(criteria.saveState()));
    return copy;
  }

  /**
   * Opens test point `id`'s window at the next sample: the channel's pipeline as it is now (call it
   * after the restart and the set point of the test point's start). Returns the mark to store.
   */
  openWindow(id: string): WindowMark {
    this.applyOpen(id);
    return { seq: this.nextSeq, kind: `open:${id}` };
  }

  private applyOpen(id: string): void {
    this.forks.delete(id);
    this.attached.add(id);
  }

  /** Closes test point `id`'s window (the test point stopped); null when it had none. */
  closeWindow(id: string): WindowMark | null {
    if (!this.hasWindow(id)) return null;
    this.applyClose(id);
    return { seq: this.nextSeq, kind: `close:${id}` };
  }

  private applyClose(id: string): void {
    this.forks.delete(id);
    this.attached.delete(id);
  }

  hasWindow(id: string): boolean {
    return this.attached.has(id) || this.forks.has(id);
  }

  /** Test point `id`'s window: the channel's pipeline while attached, its fork after; null when it has none. */
  windowOf(id: string): ChannelPipeline | null {
    if (this.attached.has(id)) return this.current;
    return this.forks.get(id) ?? null;
  }

  /** The test points with a window on this channel (attached or forked). */
  windowIds(): string[] {
    return [...this.attached, ...this.forks.keys()];
  }

  /** Drops the windows of test points not in `keep` (after a restore: test points stopped meanwhile). */
  keepWindows(keep: (id: string) => boolean): void {
    for (const id of this.windowIds()) if (!keep(id)) this.applyClose(id);
  }

  /**
   * The test point's set point for the channel's stability rules, from the next sample on; returns
   * the mark to store (replayed at the same sample), or null when the channel has no rules or the
   * set point is unchanged.
   */
  setSetPoint(value: number | null): WindowMark | null {
    const criteria = this.current.criteria;
    if (criteria === null) return null;
    const next = value !== null && Number.isFinite(value) ? value : null;
    if (next === criteria.setPoint) return null; // unchanged: nothing to replay
    this.applySetPoint(next);
    return { seq: this.nextSeq, kind: setPointMark(value) };
  }

  private applySetPoint(value: number | null): void {
    const criteria = this.current.criteria;
    if (criteria === null || value === criteria.setPoint) return;
    this.detachAll();
    this.current.setSetPoint(value);
  }

  /**
   * Replaces the channel's Type B components (from the API) from the next sample on; returns the
   * mark to store, replayed at its index (and the latest one before a checkpoint applied at load),
   * so a restart keeps them. Every window over the channel (test points' forks too) takes them.
   */
  setTypeB(typeB: readonly TypeBSpec[]): WindowMark {
    this.applyTypeB(typeB);
    return { seq: this.nextSeq, kind: `${TYPE_B_MARK}${JSON.stringify(typeB)}` };
  }

  /** The Type B components in force. */
  get typeB(): readonly TypeBSpec[] {
    return this.options.uncertainty?.typeB ?? [];
  }

  private applyTypeB(typeB: readonly TypeBSpec[]): void {
    // One options object is shared by the pipeline and every fork: each reads it at its next snapshot.
    (this.options as { uncertainty?: UncertaintySettings }).uncertainty = { ...(this.options.uncertainty ?? DEFAULT_UNCERTAINTY_SETTINGS), typeB: typeB.map((c) => ({ ...c })) };
    this.current.settingsChanged();
    for (const fork of this.forks.values()) fork.settingsChanged();
  }

  private applyTypeBMark(kind: string): void {
    try {
      this.applyTypeB(JSON.parse(kind.slice(TYPE_B_MARK.length)) as TypeBSpec[]);
    } catch {
      // A mark this plateau did not write: ignored (the configured components stay).
    }
  }

  /** Whether the channel was steady when it took its sample of pipeline index `index` (see src/engine/steadiness.ts). */
  steadyAt(index: number): boolean {
    return this.steadiness.steadyAt(index);
  }

  /** The checkpoint to store: the channel record and the index of the next sample. */
  checkpoint(): { seq: number; state: ChannelRecord } {
    const windows = { attached: [...this.attached], lastRestartAt: this.lastRestartAt, forks: [...this.forks].map(([id, fork]): WindowState => ({ id, pipeline: fork.saveState(), criteria: fork.criteria?.saveState() ?? null })) };
    return { seq: this.nextSeq, state: channelRecord(this.identity, this.offset, this.current.saveState(), this.steadiness.state(), this.current.criteria?.saveState() ?? null, windows) };
  }

  /**
   * The time policy's memory in short, for a checkpoint that travels without the stored samples (a
   * partition's shared checkpoint): the last `count` accepted payload times, oldest first, and the
   * newest time taken. `memoryHistory` turns it back into what `restore` reads before the index.
   */
  timeMemory(count: number): { times: number[]; lastMs: number } {
    const n = Math.min(count, this.recentCount, RECENT_TIMES);
    const times: number[] = [];
    for (let i = this.recentCount - n; i < this.recentCount; i++) times.push(this.recentTimes[i % RECENT_TIMES] as number);
    return { times, lastMs: this.lastStampMs };
  }

  /** Rebuilds a new channel from its checkpoint (or none) and its stored samples and marks. */
  restore(checkpoint: { seq: number; state: unknown } | null, history: ChannelHistory): RestoreReport {
    let outcome: RestoreReport['outcome'] = 'fresh';
    let detail: string | null = null;
    let from = 0;
    if (checkpoint !== null) {
      const decision = decideCheckpoint(checkpoint.state, this.options, this.identity);
      if (decision.action === 'load') {
        try {
          this.current.loadState(decision.pipeline);
          // The rules' state must fit the rules now configured (their fingerprint), else a replay.
          const criteria = this.current.criteria;
          if (criteria !== null && !criteria.loadState(decision.criteria)) {
            this.current = this.newPipeline();
            outcome = 'replayed';
            detail = 'the stability rules changed since the checkpoint (or it holds no state of them)';
          } else {
            this.loadWindows(decision.windows);
            if (decision.steadiness !== null) this.steadiness.load(decision.steadiness);
            else this.steadiness.noteEvents(decision.pipeline.recentEvents);
            this.offset = decision.seqOffset;
            from = checkpoint.seq;
            outcome = 'loaded';
            if (decision.carriedOver.length > 0) detail = `carried over to the changed options ${decision.carriedOver.join(', ')}`;
          }
        } catch (error) {
          this.current = this.newPipeline();
          outcome = 'replayed';
          detail = `the checkpoint could not be read (${(error as Error).message})`;
        }
      } else {
        outcome = 'replayed';
        detail = decision.reason;
      }
    }
    // Type B components set through the API before the checkpoint: the latest one is in force at it.
    const settings = history.marksFrom(0).filter((m) => m.kind.startsWith(TYPE_B_MARK) && m.seq < from);
    if (settings.length > 0 && outcome === 'loaded') this.applyTypeBMark((settings.at(-1) as { kind: string }).kind);
    if (outcome === 'replayed' || outcome === 'fresh') {
      // Every stored sample, from the first one kept.
      const runs = history.samplesFrom(0)[Symbol.iterator]();
      const first = runs.next();
      if (first.done) return { outcome, detail, replayed: 0, forced: 0 };
      this.offset = first.value.firstSeq;
      if (this.offset > 0) detail = `${detail ?? 'no checkpoint'}; rebuilt from stored sample ${this.offset} on (retention removed the earlier ones): the statistics start there, and event indices count from there`;
      const all = (function* () {
        yield first.value;
        for (let next = runs.next(); !next.done; next = runs.next()) yield next.value;
      })();
      return { outcome, detail, ...this.replay(all, history.marksFrom(this.offset), this.offset) };
    }
    return { outcome, detail, ...this.replay(history.samplesFrom(Math.max(this.offset, from - RECENT_TIMES)), history.marksFrom(from), from) };
  }

  /** The test-point windows of a checkpoint (none before channel record version 3). */
  private loadWindows(windows: ChannelWindowsState | null): void {
    if (windows === null) return;
    for (const id of windows.attached) this.attached.add(id);
    this.lastRestartAt = windows.lastRestartAt;
    for (const w of windows.forks) {
      const fork = this.newPipeline();
      fork.loadState(w.pipeline);
      if (fork.criteria !== null && !fork.criteria.loadState(w.criteria)) throw new Error(`the window of test point ${w.id} holds no state of the stability rules now configured`);
      this.forks.set(w.id, fork);
    }
  }

  /**
   * `fromSeq` is the store index of the first sample the pipeline has not seen; `samples` start at
   * or before max(offset, fromSeq - RECENT_TIMES) when they still exist; `marks` are the window
   * marks at or after fromSeq.
   */
  private replay(samples: Iterable<StoredSamples>, marks: readonly { seq: number; kind: string }[], fromSeq: number): { replayed: number; forced: number } {
    let markIndex = 0;
    let replayed = 0;
    let forced = 0;
    const applyMarks = (seq: number) => {
      // The marks of one index in one order whatever order the store returns them in: closes, the
      // restart, the set point, then opens (a test point's start stores restart, set point, open).
      const due: { seq: number; kind: string }[] = [];
      while (markIndex < marks.length && (marks[markIndex] as { seq: number }).seq <= seq) {
        const mark = marks[markIndex] as { seq: number; kind: string };
        if (mark.seq === seq) due.push(mark);
        markIndex++;
      }
      if (due.length === 0) return;
      for (const mark of due) if (mark.kind.startsWith('close:')) this.applyClose(mark.kind.slice(6));
      if (due.some((m) => m.kind === 'restart-window')) this.applyRestart();
      for (const mark of due) {
        const setPoint = parseSetPointMark(mark.kind);
        if (setPoint !== undefined) this.applySetPoint(setPoint);
      }
      for (const mark of due) if (mark.kind.startsWith('open:')) this.applyOpen(mark.kind.slice(5));
      for (const mark of due) if (mark.kind.startsWith(TYPE_B_MARK)) this.applyTypeBMark(mark.kind);
    };
    for (const run of samples) {
      for (let i = 0; i < run.values.length; i++) {
        const seq = run.firstSeq + i;
        const timeMs = run.times[i] as number;
        const stamped = run.unstamped === null || ((run.unstamped[i >> 3] as number) & (1 << (i & 7))) === 0;
        if (seq < fromSeq) {
          // Before the checkpoint: only the time policy's memory.
          if (stamped) this.remember(timeMs);
          if (timeMs > this.lastStampMs) this.lastStampMs = timeMs;
          continue;
        }
        applyMarks(seq);
        const verdict = this.classify(timeMs, stamped);
        if (verdict === 'duplicate' || verdict === 'out-of-order') forced++;
        this.admit(run.values[i] as number, timeMs, stamped);
        replayed++;
      }
    }
    // A mark at the very next sample (a test point started after the last stored sample).
    applyMarks(this.nextSeq);
    this.restoredNewestMs = this.lastStampMs;
    return { replayed, forced };
  }

  /** For a stamped time: on time (newer than every accepted one), a repeat, late but recent, or too old to tell. */
  private classify(timeMs: number, stamped: boolean): 'on-time' | 'late' | 'duplicate' | 'out-of-order' {
    if (!stamped || timeMs > this.lastStampMs) return 'on-time';
    const count = Math.min(this.recentCount, RECENT_TIMES);
    let oldest = Number.POSITIVE_INFINITY;
    for (let i = 0; i < count; i++) {
      const t = this.recentTimes[i] as number;
      if (t === timeMs) return 'duplicate';
      if (t < oldest) oldest = t;
    }
    return timeMs > oldest ? 'late' : 'out-of-order';
  }

  /** The time the last admitted sample was taken at (its own, or its arrival time held at the last time). */
  private admitted = Number.NaN;

  /** The one way a sample enters the pipeline, live or replayed; returns the events it raised. */
  private admit(value: number, timeMs: number, stamped: boolean): readonly ChannelEvent[] {
    let time = timeMs;
    if (stamped) this.remember(timeMs);
    else if (time < this.lastStampMs) time = this.lastStampMs;
    if (time > this.lastStampMs) this.lastStampMs = time;
    this.admitted = time;
    const events = this.current.push(value, time / 1000);
    if (events.length > 0) this.steadiness.noteEvents(events);
    // A forked test-point window takes every sample too; its events are its own (the test point reads its verdict).
    for (const fork of this.forks.values()) fork.push(value, time / 1000);
    return events;
  }

  private remember(timeMs: number): void {
    this.recentTimes[this.recentCount % RECENT_TIMES] = timeMs;
    this.recentCount++;
  }
}

/**
 * A history holding only the time policy's memory before a checkpoint at `seq` (see
 * `Channel.timeMemory`): the remembered times as stamped samples, then the newest time as an
 * unstamped one when it is newer (an arrival-stamped sample). No marks: they are in the state.
 */
export function memoryHistory(seq: number, memory: { times: number[]; lastMs: number }): ChannelHistory {
  const times = [...memory.times];
  const newest = times.length > 0 ? (times[times.length - 1] as number) : Number.NEGATIVE_INFINITY;
  const extra = Number.isFinite(memory.lastMs) && memory.lastMs > newest;
  if (extra) times.push(memory.lastMs);
  let unstamped: Uint8Array | null = null;
  if (extra) {
    unstamped = new Uint8Array(Math.ceil(times.length / 8));
    const i = times.length - 1;
    unstamped[i >> 3] = (unstamped[i >> 3] as number) | (1 << (i & 7));
  }
  const run: StoredSamples = { firstSeq: seq - times.length, times, values: new Float64Array(times.length), unstamped };
  return { samplesFrom: () => (times.length > 0 ? [run] : []), marksFrom: () => [] };
}
