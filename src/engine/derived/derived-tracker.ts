import { DerivedEngine, type DerivedEngineOptions, type DerivedResultSpec, type DerivedSnapshot } from './derived-engine.js';

/**
 * Keeps a DerivedEngine in step with the windows of its input channels. The windows are the truth:
 * a derived result is computed from the samples that lie in every input's current window (from
 * the latest of the inputs' first samples on), so it follows test-point restarts, warm-up and
 * break truncations and sliding windows exactly as the channels do, and a restart of the daemon,
 * which rebuilds the channel windows from checkpoints and stored samples, rebuilds the derived
 * results too, with no state of their own to save.
 *
 * `sync()` reads the samples the windows gained since the last call (merged in time order across
 * the channels, which keeps few buckets open; the rows do not depend on the order). When the
 * common start of the windows moves forward past rows the engine holds (a truncation or a
 * restart), the engine is rebuilt from the windows. With sliding windows (or growing windows that
 * reached their cap) the start moves with every sample; the engine is then rebuilt only when the
 * rows before the start exceed 1/16 of the rows (amortised O(16) samples per sample), so such a
 * derived window holds up to 6 % more of the oldest rows than the channels' windows.
 * `restart()` moves the start to each input's next sample (a test point that starts with derived
 * results whose input channels it does not restart).
 *
 * Cost: O(p) per new sample plus the engine's costs; a rebuild O(window samples x p).
 */
export interface ChannelWindowView {
  /** Absolute index (since the channel began) of the oldest sample in the window. */
  firstIndex: number;
  /** Absolute index the next sample will get (one past the newest). */
  nextIndex: number;
  /** Value and time (seconds) of the sample with absolute index firstIndex <= index < nextIndex. */
  valueAt(index: number): number;
  timeAt(index: number): number;
  /** The window's start moves with each sample (sliding, or a growing window at its cap). */
  sliding: boolean;
  /** Whether the channel was steady when it took the sample of this absolute index (src/engine/steadiness.ts). */
  steadyAt(index: number): boolean;
}

export interface DerivedWindowSource {
  /** The channel's window, or null when the channel has no data yet. */
  window(channel: string): ChannelWindowView | null;
}

export class DerivedTracker {
  readonly specs: DerivedResultSpec[];
  readonly options: DerivedEngineOptions;
  /** The union of the inputs, in the engine's column order. */
  readonly channels: string[];
  private engine: DerivedEngine | null = null;
  /** Per input: next absolute index to feed. */
  private readonly fed: Float64Array;
  /** Per input: samples before this absolute index are not used (restart). */
  private readonly barrier: Float64Array;
  private lastVersion = -1;
  private rebuilds = 0;

  constructor(specs: DerivedResultSpec[], options: DerivedEngineOptions = {}) {
    this.specs = specs;
    this.options = options;
    this.channels = new DerivedEngine(specs, { ...options, maxBuckets: 64 }).channels;
    this.fed = new Float64Array(this.channels.length);
    this.barrier = new Float64Array(this.channels.length);
  }

  /** Engine rebuilds so far (for tests and counters). */
  get rebuildCount(): number {
    return this.rebuilds;
  }

  /** The engine, or null while some input has no sample in its window. */
  get current(): DerivedEngine | null {
    return this.engine;
  }

  /** Starts the derived window at each input's next sample. */
  restart(source: DerivedWindowSource): void {
    this.channels.forEach((name, i) => {
      const view = source.window(name);
      this.barrier[i] = view === null ? 0 : view.nextIndex;
    });
    this.engine = null;
  }

  /** Per-input restart barriers (absolute sample indices). */
  barriers(): number[] {
    return Array.from(this.barrier);
  }

  /** Sets the barriers (a joint tracker built for a record uses the largest of its members'). */
  setBarriers(barriers: number[]): void {
    barriers.forEach((b, i) => (this.barrier[i] = b));
    this.engine = null;
  }

  /**
   * Brings the engine up to date with the windows. Returns true when its rows may have changed.
   * `onRows` is called whenever the engine's row count changes while it is fed (a new row, a
   * merge, a rebuild), with the engine and the windows read: the precision check runs there
   * (src/engine/derived/derived-monitor.ts), at the same row counts however often sync is called.
   */
  sync(source: DerivedWindowSource, onRows?: (engine: DerivedEngine, views: readonly ChannelWindowView[]) => void): boolean {
    const p = this.channels.length;
    const views: ChannelWindowView[] = [];
    const from = new Float64Array(p);
    let start = Number.NEGATIVE_INFINITY;
    let sliding = false;
    for (let i = 0; i < p; i++) {
      const view = source.window(this.channels[i] as string);
      const first = view === null ? 0 : Math.max(view.firstIndex, this.barrier[i] as number);
      if (view === null || first >= view.nextIndex) {
        const had = this.engine !== null;
        this.engine = null;
        return had;
      }
      views.push(view);
      from[i] = first;
      start = Math.max(start, view.timeAt(first));
      sliding ||= view.sliding;
    }
    let engine = this.engine;
    let rebuild = engine === null || start < engine.startSeconds;
    if (!rebuild && engine !== null && start > engine.startSeconds) {
      // Rows that began before the new start; with no rows yet, the samples buffered or in open
      // buckets may lie before it, so the engine starts again (cheap: few samples).
      const stale = engine.rowsStartingBefore(start);
      const allowance = sliding ? Math.floor(engine.rows / 16) : 0;
      if (stale > allowance || engine.rows === 0) rebuild = true;
    }
    if (rebuild) {
      engine = new DerivedEngine(this.specs, { ...this.options, startSeconds: start });
      this.engine = engine;
      this.fed.set(from);
      this.rebuilds++;
      onRows?.(engine, views);
    }
    const active = engine as DerivedEngine;
    // Feed what the windows gained, oldest first across the channels.
    const cursor = new Float64Array(p);
    const end = new Float64Array(p);
    for (let i = 0; i < p; i++) {
      cursor[i] = Math.max(this.fed[i] as number, from[i] as number);
      end[i] = (views[i] as ChannelWindowView).nextIndex;
    }
    let fedAny = false;
    for (;;) {
      let best = -1;
      let bestTime = Number.POSITIVE_INFINITY;
      for (let i = 0; i < p; i++) {
        if ((cursor[i] as number) >= (end[i] as number)) continue;
        const t = (views[i] as ChannelWindowView).timeAt(cursor[i] as number);
        if (best < 0 || t < bestTime) {
          best = i;
          bestTime = t;
        }
      }
      if (best < 0) break;
      const view = views[best] as ChannelWindowView;
      const index = cursor[best] as number;
      const rowsBefore = active.rows;
      active.add(best, view.timeAt(index), view.valueAt(index));
      cursor[best] = index + 1;
      fedAny = true;
      if (onRows !== undefined && active.rows !== rowsBefore) onRows(active, views);
    }
    this.fed.set(end);
    const changed = rebuild || (fedAny && active.rowsVersion !== this.lastVersion);
    this.lastVersion = active.rowsVersion;
    return changed;
  }

  /** Snapshots of the results; when no engine exists, each says which input it waits for. */
  evaluate(source: DerivedWindowSource | null = null): DerivedSnapshot[] {
    if (this.engine !== null) return this.engine.evaluate();
    const waiting = source === null ? [] : this.channels.filter((name, i) => {
      const view = source.window(name);
      return view === null || Math.max(view.firstIndex, this.barrier[i] as number) >= view.nextIndex;
    });
    const note = waiting.length > 0 ? `no samples in the window yet from ${waiting.join(', ')}` : 'no samples yet';
    return this.specs.map((spec) => new DerivedEngine([spec], { ...this.options, maxBuckets: 64 }).evaluate()[0] as DerivedSnapshot).map((s) => ({ ...s, notes: [note] }));
  }
}

