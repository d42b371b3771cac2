import type { DerivedEngine, DerivedEngineOptions, DerivedResultSpec } from './derived-engine.js';
import { DerivedTracker, type ChannelWindowView, type DerivedWindowSource } from './derived-tracker.js';

/**
 * One derived result followed over its input channels' windows (a DerivedTracker) with its
 * precision verdict and events: the `precision-reached` event is raised once when the result's
 * uncertainty meets its target while every input was steady, and re-armed when the achieved
 * uncertainty climbs PRECISION_REARM times above the bound (hysteresis, as the channels do).
 * The daemon (src/daemon/derived-results.ts) and `plateau analyze` both use it, so they raise the
 * same derived events on the same samples.
 *
 * When the check runs, so that it does not depend on how often anyone brings the result up to date
 * (the daemon at each commit, analyze after each row): on a schedule of row counts, while the rows
 * are fed (DerivedTracker.sync's onRows): at every row up to 64, then each time the rows have grown
 * by 1/64 since the last check; after a rebuild of the engine (a window cut), from the start again.
 * An input counts as steady when it was steady at its last sample in the newest row's bucket
 * (src/engine/steadiness.ts): a property of the samples, not of the moment of the check. `at` is the
 * number of rows at the check. With growing windows the checks fall on the same rows whatever the
 * sync cadence; with sliding ones a rebuild (when 1/16 of the rows lie before the windows' common
 * start) comes at a cadence-dependent moment, and the rows checked after it can differ.
 */
export interface DerivedEvent {
  source: string;
  kind: string;
  at: number | null;
  body: Record<string, unknown>;
}

/** precision-reached re-arms when the achieved uncertainty climbs this far above the bound. */
export const PRECISION_REARM = 1.1;
/** The rows grow by 1/CHECK_FRACTION of themselves between two checks (every row below it). */
const CHECK_FRACTION = 64;

export class DerivedMonitor {
  readonly spec: DerivedResultSpec;
  readonly tracker: DerivedTracker;
  private precise = false;
  private nextCheck = 1;
  private lastRows = 0;
  private events: DerivedEvent[] = [];

  constructor(spec: DerivedResultSpec, options: DerivedEngineOptions = {}) {
    this.spec = spec;
    this.tracker = new DerivedTracker([spec], options);
  }

  /** At target, with the hysteresis: set by the event, cleared when the uncertainty climbs back above the re-arm bound. */
  get atTarget(): boolean {
    return this.precise;
  }

  /** Brings the result up to date with the windows, running the checks that fall due; true when its rows may have changed. */
  sync(source: DerivedWindowSource): boolean {
    return this.tracker.sync(source, (engine, views) => this.onRows(engine, views));
  }

  /** A test point starts with this result: its window begins at each input's next sample. */
  restart(source: DerivedWindowSource): void {
    this.tracker.restart(source);
    this.precise = false;
    this.nextCheck = 1;
    this.lastRows = 0;
  }

  /** The events raised since the last call. */
  takeEvents(): DerivedEvent[] {
    const out = this.events;
    this.events = [];
    return out;
  }

  private onRows(engine: DerivedEngine, views: readonly ChannelWindowView[]): void {
    const rows = engine.rows;
    // Fewer rows than before: a rebuild, or pairs of rows merged.
    if (rows < this.lastRows) this.nextCheck = Math.max(1, rows + Math.max(1, Math.floor(rows / CHECK_FRACTION)));
    this.lastRows = rows;
    if (rows === 0 || rows < this.nextCheck) return;
    this.nextCheck = rows + Math.max(1, Math.floor(rows / CHECK_FRACTION));
    this.check(engine, views);
  }

  private check(engine: DerivedEngine, views: readonly ChannelWindowView[]): void {
    const target = this.spec.target;
    if (target === null) return;
    const snapshot = engine.evaluate()[0];
    if (snapshot === undefined || snapshot.target === null || snapshot.target.bound === null) return;
    if (!this.precise && snapshot.target.reached && this.inputsSteady(engine, views)) {
      this.precise = true;
      this.events.push({
        source: snapshot.name,
        kind: 'precision-reached',
        at: snapshot.rows,
        body: { derived: snapshot.name, value: snapshot.value, standardUncertainty: snapshot.standardUncertainty, expandedUncertainty: snapshot.expandedUncertainty, bound: snapshot.target.bound, rows: snapshot.rows, unit: snapshot.unit },
      });
    } else if (this.precise) {
      const achieved = target.on === 'u' ? snapshot.standardUncertainty : snapshot.expandedUncertainty;
      if (achieved === null || achieved > PRECISION_REARM * snapshot.target.bound) this.precise = false;
    }
  }

  /** Every input was steady at its last sample inside the newest row's bucket. */
  private inputsSteady(engine: DerivedEngine, views: readonly ChannelWindowView[]): boolean {
    const end = engine.lastRowEndSeconds;
    if (end === null) return false;
    for (const view of views) {
      // The last sample before the end of the row's bucket (times do not decrease within a window).
      let low = view.firstIndex;
      let high = view.nextIndex;
      while (low < high) {
        const mid = Math.floor((low + high) / 2);
        if (view.timeAt(mid) < end) low = mid + 1;
        else high = mid;
      }
      if (low === view.firstIndex || !view.steadyAt(low - 1)) return false;
    }
    return true;
  }
}
