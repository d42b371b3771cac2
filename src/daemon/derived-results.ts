import { ConfigError } from '../config/config-reader.js';
import { globMatch, settingsFor } from '../config/load-config.js';
import type { DerivedConfig, PlateauConfig } from '../config/plateau-config.js';
import type { ChannelRegistry } from '../engine/channel-registry.js';
import { checkDerivedDefinitions } from '../config/derived-check.js';
import type { DerivedResultSpec, DerivedSnapshot } from '../engine/derived/derived-engine.js';
import { derivedEntryStatement, derivedReportEntry, derivedStatement, derivedVerdict, type DerivedReportEntry, type DerivedVerdict } from '../engine/derived/derived-record.js';
import { DerivedMonitor, type DerivedEvent } from '../engine/derived/derived-monitor.js';
import { DerivedTracker, type ChannelWindowView, type DerivedWindowSource } from '../engine/derived/derived-tracker.js';
import type { ChannelDeclaration, DerivedDefinition } from '../engine/derived/expression-model.js';
import type { DerivedStatus } from '../engine/test-points.js';
import type { DerivedView } from '../ports/daemon-api.js';

/**
 * Derived results of the daemon: quantities computed from several channels (configured under
 * `derived`), with their propagated uncertainty, target and ETA, events and record entries.
 *
 * Load time (the constructor, called by the Daemon's): every expression is compiled by the
 * hardened mathjs model (src/engine/derived/expression-model.ts). The daemon has no channel list
 * (channels appear with their first sample), so the names an expression refers to that are not
 * derived results are its channels: each must be a name some subscription's channel template can
 * produce ({...} placeholders read as *), and takes its range from the channel settings for the
 * division check. Every problem becomes one line of a ConfigError (code ERR_CONFIG) naming the key
 * path, e.g. "derived[0].expression: unknown channel 'hx7.glycol_inn_degC' ...".
 *
 * Live: one DerivedTracker per derived result, on the windows of its input channels (see
 * derived-tracker.ts: the windows are the truth, so a restart of the daemon rebuilds the results
 * from the channel windows it restores; nothing of their own needs saving). onSample only marks the results that use
 * the channel; they are brought up to date on the next query: drainEvents (every flush), atTarget,
 * recordEntries, snapshots.
 * At target: the result has a target, its expanded (or standard) uncertainty meets it, and every
 * input channel is steady (state steady or precise): a result over a warming, unsteady or stale
 * channel is not ready whatever its uncertainty. The `precision-reached` event and its hysteresis
 * are the engine's (src/engine/derived/derived-monitor.ts: checked on a schedule of rows, with the
 * inputs' steadiness at the row's samples), so `plateau analyze` raises the same ones; after a
 * restart the checks run again over the restored rows and their events are dropped (`restored`).
 * Records: the result with its GUM statement (JCGM 100:2008, 7.2.4 wording of
 * src/engine/test-point-record.ts), budget, the correlations with the other derived results of the
 * record (over the common part of their windows), the Monte Carlo check (JCGM 101, adaptive, n_dig
 * 2, at most RECORD_MONTE_CARLO_TRIALS trials so that a record costs at most about 0.1 s of the
 * flush) and the bootstrap check of the linearised series.
 */
export type { DerivedEvent } from '../engine/derived/derived-monitor.js';

/** A derived result's snapshot and verdict (the API adds its statement: `views`). */
export type DerivedState = DerivedSnapshot & DerivedVerdict;

/** Trials at most for the Monte Carlo check of a record (about 0.1 s with a 3-4 input model). */
export const RECORD_MONTE_CARLO_TRIALS = 200_000;

interface Entry {
  config: DerivedConfig;
  spec: DerivedResultSpec;
  /** The tracker over the inputs' windows, the precision verdict and its events (the engine's, as analyze's). */
  monitor: DerivedMonitor;
  dirty: boolean;
  snapshot: DerivedSnapshot | null;
  /** Rows and engine rebuilds at the last evaluation (throttling). */
  rowsSeen: number;
  rebuildsSeen: number;
  /** The engine changed since the snapshot was taken. */
  stale: boolean;
}

export class DerivedResults implements DerivedStatus {
  private readonly config: PlateauConfig;
  private readonly registry: ChannelRegistry;
  private readonly entries = new Map<string, Entry>();
  private readonly byChannel = new Map<string, Entry[]>();
  private readonly source: DerivedWindowSource;
  /** The channels the expressions refer to, with their declared ranges. */
  readonly channels: ChannelDeclaration[];

  /** @throws ConfigError (code ERR_CONFIG) with one line per rejected definition. */
  constructor(config: PlateauConfig, registry: ChannelRegistry) {
    this.config = config;
    this.registry = registry;
    this.source = registrySource(registry);
    const definitions: DerivedDefinition[] = config.derived.map((d) => ({ name: d.name, expression: d.expression, ...(d.unit !== null ? { unit: d.unit } : {}) }));
    const compiled = checkDerivedDefinitions(definitions, config.subscriptions.map((s) => s.channel), (name) => settingsFor(config, name).range, globMatch, config.derived.map((d) => d.constants));
    if (!compiled.ok) throw new ConfigError(compiled.problems);
    const channels = compiled.result.channels;
    this.channels = channels;
    compiled.result.compiled.forEach((c, i) => {
      const derivedConfig = config.derived[i] as DerivedConfig;
      const uncertainty = { channelTypeB: Object.fromEntries(c.inputs.map((name) => [name, settingsFor(config, name).typeB])), conformity: derivedConfig.conformity, combinedTarget: derivedConfig.combinedTarget };
      const spec: DerivedResultSpec = { compiled: c, target: derivedConfig.target, confidence: derivedConfig.confidence, uncertainty };
      const entry: Entry = { config: derivedConfig, spec, monitor: new DerivedMonitor(spec), dirty: true, snapshot: null, rowsSeen: 0, rebuildsSeen: -1, stale: true };
      this.entries.set(c.name, entry);
      for (const input of c.inputs) {
        const list = this.byChannel.get(input) ?? [];
        list.push(entry);
        this.byChannel.set(input, list);
      }
    });
  }

  names(): string[] {
    return this.config.derived.map((d) => d.name);
  }

  /** The input channels of the named results (for a test point to restart their windows too). */
  inputsOf(names: string[]): string[] {
    const out: string[] = [];
    for (const name of names) for (const input of this.entries.get(name)?.spec.compiled.inputs ?? []) if (!out.includes(input)) out.push(input);
    return out;
  }

  /** Whether some result uses the channel. */
  usesChannel(channel: string): boolean {
    return this.byChannel.has(channel);
  }

  /** Marks the results that use the channel; the windows are read on the next query. */
  onSample(channel: string): void {
    const users = this.byChannel.get(channel);
    if (users === undefined) return;
    for (const entry of users) entry.dirty = true;
  }

  /** A test point starts with these results: their windows begin at each input's next sample. */
  restart(names: string[]): void {
    for (const name of names) {
      const entry = this.entries.get(name);
      if (entry === undefined) continue;
      entry.monitor.restart(this.source);
      entry.snapshot = null;
      entry.stale = true;
      entry.dirty = true;
    }
  }

  /** The events of the checks that fell due since the last call (the results are brought up to date first). */
  drainEvents(): DerivedEvent[] {
    const out: DerivedEvent[] = [];
    for (const entry of this.entries.values()) {
      if (entry.dirty || entry.snapshot === null) this.refresh(entry);
      out.push(...entry.monitor.takeEvents());
    }
    return out;
  }

  /**
   * After a restart: the results are rebuilt from the restored windows, their checks run again over
   * the rows, and the events those raise are dropped (they were raised, and stored, before the
   * restart), as a channel's replay drops the events it raised the first time.
   */
  restored(): void {
    this.drainEvents();
  }

  atTarget(name: string): boolean | null {
    const entry = this.entries.get(name);
    if (entry === undefined) return null;
    this.refresh(entry);
    return this.view(entry).atTarget;
  }

  /** Every derived result as the API and the dashboard show it (the budget chart reads `budget`); always up to date. */
  snapshots(): DerivedState[] {
    const entries = [...this.entries.values()];
    for (const entry of entries) this.refresh(entry, true);
    const correlations = this.liveCorrelations(entries);
    return entries.map((entry) => {
      const view = this.view(entry);
      const correlation = correlations.get(entry.spec.compiled.name);
      return correlation ? { ...view, correlation } : view;
    });
  }

  /**
   * Every derived result as the API, the WebSocket and the report show it: snapshot, verdict and
   * its statement in the wording of JCGM 100:2008 7.2.4 (gumStatement, as records and `plateau
   * analyze` state it). The record-only checks (Monte Carlo, bootstrap) are left out: they cost
   * about 0.1-0.4 s per result and are computed when a test point writes its record.
   */
  views(): DerivedView[] {
    // live: the GUM statement of the current value, with the flag a record would carry now
    return this.snapshots().map((state) => {
      const { provisional, provisionalReasons } = derivedEntryStatement(state, state);
      return { ...state, statement: derivedStatement(state), provisional, provisionalReasons };
    });
  }

  /**
   * Correlations between the live results, recomputed (over the common part of their windows, which
   * costs a pass over it) only when their rows have grown by 1/64 since the last time, like the
   * results themselves.
   */
  private liveCorrelations(entries: Entry[]): Map<string, Record<string, number>> {
    if (entries.length < 2) return new Map();
    const rows = entries.reduce((sum, entry) => sum + (entry.monitor.tracker.current?.rows ?? 0), 0);
    const cache = this.correlationCache;
    if (cache && rows >= cache.rows && rows - cache.rows < Math.max(1, Math.floor(cache.rows / 64))) return cache.value;
    const value = this.jointCorrelations(entries);
    this.correlationCache = { rows, value };
    return value;
  }

  private correlationCache: { rows: number; value: Map<string, Record<string, number>> } | null = null;

  recordEntries(names: string[]): unknown[] {
    const entries = names.map((name) => this.entries.get(name)).filter((e): e is Entry => e !== undefined);
    for (const entry of entries) this.refresh(entry, true);
    const correlations = this.jointCorrelations(entries);
    return entries.map((entry): DerivedReportEntry => {
      const view = this.view(entry);
      const snapshot = { ...(entry.snapshot as DerivedSnapshot), correlation: correlations.get(entry.spec.compiled.name) ?? {} };
      const { atTarget, inputStates, waitingFor } = view;
      return derivedReportEntry(entry.monitor.tracker.current, snapshot, { atTarget, inputStates, waitingFor }, { monteCarloTrials: RECORD_MONTE_CARLO_TRIALS });
    });
  }

  // ---- internals ----------------------------------------------------------------------------

  /**
   * Brings the result up to date with the windows. A new snapshot (about 0.3 ms: the t quantiles of
   * the coverage factor and of the target's ETA dominate) is taken when the engine was rebuilt or
   * its rows grew by 1/64 since the last one (or on `fresh`: API, records), so that a fast channel
   * costs O(1) amortised per row; the verdict can lag the rows by that much (1.6 %).
   */
  private refresh(entry: Entry, fresh = false): void {
    const tracker = entry.monitor.tracker;
    if (entry.dirty) {
      entry.dirty = false;
      entry.stale = entry.monitor.sync(this.source) || entry.stale;
    }
    const engine = tracker.current;
    const rows = engine?.rows ?? 0;
    const rebuilt = tracker.rebuildCount !== entry.rebuildsSeen;
    const due = entry.snapshot === null || rebuilt || rows < entry.rowsSeen || rows - entry.rowsSeen >= Math.max(1, Math.floor(entry.rowsSeen / 64));
    if (entry.snapshot === null || (entry.stale && (due || fresh))) {
      entry.snapshot = tracker.evaluate(this.source)[0] as DerivedSnapshot;
      entry.stale = false;
      entry.rowsSeen = rows;
      entry.rebuildsSeen = tracker.rebuildCount;
    }
  }

  private inputStates(entry: Entry): Record<string, string> {
    const states: Record<string, string> = {};
    for (const input of entry.spec.compiled.inputs) states[input] = this.registry.get(input)?.pipeline.state ?? 'no data';
    return states;
  }

  private view(entry: Entry): DerivedState {
    const snapshot = entry.snapshot as DerivedSnapshot;
    return { ...snapshot, ...derivedVerdict(snapshot, entry.spec.target !== null, this.inputStates(entry), entry.monitor.atTarget) };
  }

  /** Correlations between the results of one record, over the common part of their windows. */
  private jointCorrelations(entries: Entry[]): Map<string, Record<string, number>> {
    const out = new Map<string, Record<string, number>>();
    if (entries.length < 2) return out;
    const joint = new DerivedTracker(entries.map((e) => e.spec));
    const barriers = joint.channels.map((channel) => {
      let barrier = 0;
      for (const entry of entries) {
        const i = entry.monitor.tracker.channels.indexOf(channel);
        if (i >= 0) barrier = Math.max(barrier, entry.monitor.tracker.barriers()[i] as number);
      }
      return barrier;
    });
    joint.setBarriers(barriers);
    joint.sync(this.source);
    for (const snapshot of joint.evaluate(this.source)) out.set(snapshot.name, snapshot.correlation);
    return out;
  }
}

/** The channel windows of the registry, as the derived trackers read them. */
function registrySource(registry: ChannelRegistry): DerivedWindowSource {
  return {
    window(name: string): ChannelWindowView | null {
      const channel = registry.get(name);
      if (channel === undefined) return null;
      const pipeline = channel.pipeline;
      const series = pipeline.series;
      const first = series.firstIndex;
      const ring = series.ring;
      return {
        firstIndex: first,
        nextIndex: first + series.length,
        valueAt: (index) => ring.at(index - first),
        timeAt: (index) => ring.timeAt(index - first),
        sliding: pipeline.options.window.kind === 'sliding' || series.length >= series.maxSamples,
        steadyAt: (index) => channel.steadyAt(index),
      };
    },
  };
}
