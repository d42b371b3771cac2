/**
 * Gaps in a channel's samples: samples that should have come and never did.
 *
 * A channel has an expected sample interval: the configured one (`rate`), or else one learned from
 * its own time stamps: first the median of the last LEARN_WINDOW steps (robust to the gaps
 * themselves and to jitter, as long as fewer than half the steps are gaps), then refined as the
 * time spanned since an anchor sample over the grid steps counted since (each step rounded to
 * whole intervals), whose error falls as one over the span. When the median moves more than
 * REANCHOR from it (the rate changed) the grid starts again from the median; when a channel slows
 * down its first slower steps count as gaps. A step
 * from one sample to the next of `dt` covers round(dt / interval) intervals; when that is two or
 * more, round(dt / interval) - 1 samples are missing. So time stamps each jittered by less than a
 * quarter of an interval from their grid (steps within half an interval of it) never make a gap,
 * and every run of missing samples is found with its exact length (common practice for fixed-rate
 * acquisition; the margin is our choice).
 *
 * Only samples with their own time stamps are judged (arrival times carry the network's and the
 * broker's batching), only those newer than the last one (a late sample fills nothing here), and
 * none before MIN_LEARNED intervals are known when no interval is configured.
 *
 * Messages lost by a sequence number (Sparkplug B) feed the same counters (`noteSequenceGap`):
 * their count is the number of messages, an upper bound of the channel's missing samples; the next
 * step of time stamps is then not judged again, so one loss is never counted twice.
 *
 * Deterministic: the same time stamps give the same gaps. O(1) per sample (a median of
 * LEARN_WINDOW values, every LEARN_WINDOW / 2 steps while learning, then every MEDIAN_EVERY).
 * Memory: 512 bytes, the totals, and the last MAX_KEPT gaps (up to about 25 kB): a test point's
 * record counts the gaps of its window among those kept, the totals count every one.
 */
export interface GapRecord {
  /** Time stamp of the last sample before the gap (ms). */
  fromMs: number;
  /** Time stamp of the first sample after it (ms). */
  toMs: number;
  /** Samples missing (messages, for a sequence gap). */
  missing: number;
  /** The expected interval it was judged against (ms); null for a sequence gap. */
  intervalMs: number | null;
  source: 'time-stamps' | 'sequence';
}

export interface GapStats {
  gaps: number;
  missing: number;
  /** Of `gaps`, those found by a sequence number. */
  sequenceGaps: number;
  /** The expected interval (ms), configured or learned; null while unknown. */
  intervalMs: number | null;
  learned: boolean;
}

export interface GapSummary {
  gaps: number;
  missing: number;
  list: GapRecord[];
}

/**
 * A detector's state as plain data (JSON-safe: null for NaN), to continue exactly after a restart.
 * The configured interval is not part of it: the configuration at the restart decides.
 */
export interface GapDetectorState {
  record: 'gap-detector';
  version: 1;
  intervalMs: number | null;
  medianMs: number | null;
  last: number | null;
  ring: number[];
  ringCount: number;
  ringNext: number;
  sinceMedian: number;
  spanStart: number | null;
  spanSteps: number;
  skipNext: boolean;
  totals: { gaps: number; missing: number; sequenceGaps: number };
}

/** The gaps a detector keeps (for records and traces), as plain data. */
export type GapListState = GapRecord[];

export const LEARN_WINDOW = 32;
export const MIN_LEARNED = 8;
export const MAX_KEPT = 256;
/** A step of at least this many intervals is a gap (one sample missing at 2 rounded). */
const GAP_RATIO = 1.5;
/** Steps between medians once the grid is refined over a long span. */
const MEDIAN_EVERY = 256;
/** The learned grid starts again when the median step moves this far (relative) from it. */
const REANCHOR = 0.2;

export class GapDetector {
  private readonly configuredMs: number | null;
  /** The interval gaps are judged against (configured, or refined from the span of the grid). */
  private intervalMs: number | null;
  /** Median of the last LEARN_WINDOW steps (learning only). */
  private medianMs: number | null = null;
  private last = Number.NaN;
  private readonly ring = new Float64Array(LEARN_WINDOW);
  private readonly sorted = new Float64Array(LEARN_WINDOW);
  private ringCount = 0;
  private ringNext = 0;
  private sinceMedian = 0;
  /** Refinement: time of the grid's anchor sample and the grid steps since it. */
  private spanStart = Number.NaN;
  private spanSteps = 0;
  private skipNext = false;
  private kept: GapRecord[] = [];
  private totals = { gaps: 0, missing: 0, sequenceGaps: 0 };
  /** Gaps added since keptSaved() was last called. */
  private keptChanged = false;

  constructor(intervalMs: number | null = null) {
    this.configuredMs = intervalMs !== null && intervalMs > 0 && Number.isFinite(intervalMs) ? intervalMs : null;
    this.intervalMs = this.configuredMs;
  }

  /** A sample's own time stamp (ms), in arrival order; the gap it closes, if any. */
  push(timeMs: number): GapRecord | null {
    const last = this.last;
    if (!(timeMs > last)) {
      if (Number.isNaN(last)) this.last = timeMs;
      return null;
    }
    this.last = timeMs;
    const dt = timeMs - last;
    if (this.configuredMs === null) {
      // Every step is learned from, gaps included: the median ignores a minority of gaps, and a
      // channel whose rate falls is followed (its first steps at the slower rate count as gaps).
      this.learn(dt);
      const median = this.medianMs;
      if (median === null) return null;
      if (this.intervalMs === null || Number.isNaN(this.spanStart) || Math.abs(this.intervalMs - median) > REANCHOR * median) {
        // First learned, or the rate changed: a new grid from the previous sample.
        this.intervalMs = median;
        this.spanStart = last;
        this.spanSteps = 0;
      }
    }
    const interval = this.intervalMs as number;
    const steps = Math.round(dt / interval);
    if (this.configuredMs === null) {
      // The interval is refined as the span of the grid over its steps: its error falls as 1/steps,
      // so a long run of missing samples is still counted exactly.
      this.spanSteps += Math.max(1, steps);
      if (this.spanSteps >= MIN_LEARNED * 2) this.intervalMs = (timeMs - this.spanStart) / this.spanSteps;
    }
    if (this.skipNext) {
      this.skipNext = false;
      return null;
    }
    if (dt >= GAP_RATIO * interval && steps >= 2) return this.add({ fromMs: last, toMs: timeMs, missing: steps - 1, intervalMs: interval, source: 'time-stamps' });
    return null;
  }

  /** `missing` messages lost before the sample at `atMs` (a sequence number's jump). */
  noteSequenceGap(missing: number, atMs: number): GapRecord {
    this.skipNext = true;
    this.totals.sequenceGaps++;
    return this.add({ fromMs: Number.isNaN(this.last) ? atMs : this.last, toMs: atMs, missing, intervalMs: null, source: 'sequence' });
  }

  stats(): GapStats {
    return { ...this.totals, intervalMs: this.intervalMs, learned: this.configuredMs === null && this.intervalMs !== null };
  }

  /** Gaps that lie within [fromMs, toMs] (both ends of the gap inside), from those kept. */
  within(fromMs: number, toMs: number): GapSummary {
    const list = this.kept.filter((g) => g.fromMs >= fromMs && g.toMs <= toMs);
    let missing = 0;
    for (const g of list) missing += g.missing;
    return { gaps: list.length, missing, list };
  }

  /** The running state (small: written with every commit that fed the detector). */
  saveState(): GapDetectorState {
    const orNull = (x: number | null) => (x === null || Number.isNaN(x) ? null : x);
    return {
      record: 'gap-detector',
      version: 1,
      intervalMs: this.configuredMs === null ? orNull(this.intervalMs) : null,
      medianMs: orNull(this.medianMs),
      last: orNull(this.last),
      ring: Array.from(this.ring),
      ringCount: this.ringCount,
      ringNext: this.ringNext,
      sinceMedian: this.sinceMedian,
      spanStart: orNull(this.spanStart),
      spanSteps: this.spanSteps,
      skipNext: this.skipNext,
      totals: { ...this.totals },
    };
  }

  /** Whether gaps were added since the list was last taken (`takeKept`). */
  get keptDirty(): boolean {
    return this.keptChanged;
  }

  /** The kept gaps, to store (clears keptDirty). */
  takeKept(): GapListState {
    this.keptChanged = false;
    return this.kept.map((g) => ({ ...g }));
  }

  /**
   * Continues from a saved state (and the kept gaps, when saved). A learned interval is taken
   * only while no interval is configured now.
   * @throws RangeError for a record of another name or version, or one that is not well formed.
   */
  loadState(state: GapDetectorState, kept: GapListState | null): void {
    if (state?.record !== 'gap-detector' || state.version !== 1) throw new RangeError('not a gap-detector record of version 1');
    if (!Array.isArray(state.ring) || state.ring.length !== LEARN_WINDOW || !state.ring.every((x) => typeof x === 'number')) throw new RangeError('gap-detector record: ring of the wrong length');
    const num = (x: number | null) => (x === null ? Number.NaN : x);
    if (this.configuredMs === null) this.intervalMs = state.intervalMs;
    this.medianMs = state.medianMs;
    this.last = num(state.last);
    this.ring.set(state.ring);
    this.ringCount = state.ringCount;
    this.ringNext = state.ringNext;
    this.sinceMedian = state.sinceMedian;
    this.spanStart = num(state.spanStart);
    this.spanSteps = state.spanSteps;
    this.skipNext = state.skipNext;
    this.totals = { gaps: state.totals.gaps, missing: state.totals.missing, sequenceGaps: state.totals.sequenceGaps };
    if (kept !== null) this.kept = kept.slice(-MAX_KEPT).map((g) => ({ ...g }));
  }

  private add(gap: GapRecord): GapRecord {
    this.keptChanged = true;
    this.totals.gaps++;
    this.totals.missing += gap.missing;
    this.kept.push(gap);
    if (this.kept.length > MAX_KEPT) this.kept.shift();
    return gap;
  }

  private learn(dt: number): void {
    this.ring[this.ringNext] = dt;
    this.ringNext = (this.ringNext + 1) % LEARN_WINDOW;
    if (this.ringCount < LEARN_WINDOW) this.ringCount++;
    this.sinceMedian++;
    // The median is what notices a change of rate: every half window at first, then (the grid
    // refined over a long span) every MEDIAN_EVERY steps, so that it costs little per sample.
    const due = this.medianMs === null ? this.ringCount >= MIN_LEARNED : this.sinceMedian >= (this.spanSteps > MEDIAN_EVERY ? MEDIAN_EVERY : LEARN_WINDOW / 2);
    if (!due) return;
    this.sinceMedian = 0;
    const n = this.ringCount;
    const values = this.sorted.subarray(0, n);
    values.set(this.ring.subarray(0, n));
    values.sort();
    const mid = n >> 1;
    this.medianMs = n % 2 === 1 ? (values[mid] as number) : ((values[mid - 1] as number) + (values[mid] as number)) / 2;
  }
}
