import type { ChannelRegistry } from '../engine/channel-registry.js';
import type { TestPointChange, TestPoints } from '../engine/test-points.js';
import type { ChannelPipeline } from '../engine/channel-pipeline.js';
import { decimateTrace } from '../engine/test-point-record.js';
import type { Clock } from '../ports/clock.js';
import type { TestPointRequest, TestPointView } from '../ports/daemon-api.js';
import type { DerivedResults } from './derived-results.js';
import type { Ingest } from './ingest.js';
import type { PendingBatch } from './pending-batch.js';

/**
 * Test-point orchestration: starting one restarts the growing window of each of its channels, and
 * of the inputs of its derived results, at their next sample (the channels hand out the marks,
 * stored with the batch so a replay restarts them at the same sample); stopping one, annotating it,
 * and its readiness (checked before every commit) write its state, its record and an event. A
 * command commits at once so that its answer reports a durable change, and is refused while
 * commits fail (`requireStore`): nothing it changed could be stored.
 */
export interface TestPointControlOptions {
  testPoints: TestPoints;
  registry: ChannelRegistry;
  derived: DerivedResults;
  ingest: Ingest;
  batch: PendingBatch;
  clock: Clock;
  /** Throws ERR_STORE_UNAVAILABLE while commits fail. */
  requireStore(): void;
  /** Commits at once. */
  commit(): void;
  raise(source: string, kind: string, at: number | null, body: Record<string, unknown>): void;
  configuredUnit(name: string): string | null;
  /** The trace of `pipeline` (a test point's window over channel `name`), `count` samples at most, completed from the store before the window. */
  trace(name: string, pipeline: ChannelPipeline, count: number): { firstIndex: number; times: (number | null)[]; values: number[]; windowStartIndex: number; originIndex: number } | null;
}

/** Most samples a record's trace is read from (then decimated to RECORD_TRACE_POINTS). */
const RECORD_TRACE_SAMPLES = 400_000;

export class TestPointControl {
  private readonly options: TestPointControlOptions;

  constructor(options: TestPointControlOptions) {
    this.options = options;
  }

  start(request: TestPointRequest): TestPointView {
    const { testPoints, registry, derived, ingest, batch, clock } = this.options;
    this.options.requireStore();
    const change = testPoints.start(request, clock.now(), derived.names(), (name) => derived.usesChannel(name));
    if (change.kind === 'test-point-started') {
      const marks = [...change.marks];
      // The inputs of the test point's derived results restart with it, even when they are not
      // listed as channels (they do not join its readiness: a channel without a target is never precise).
      for (const name of derived.inputsOf(change.point.derived)) {
        if (change.point.channels.includes(name)) continue;
        const channel = registry.ensure(name, this.options.configuredUnit(name));
        if (channel.pipeline.options.window.kind !== 'growing') continue;
        marks.push({ channel: name, seq: channel.restartWindow().seq });
      }
      for (const mark of marks) {
        const channel = registry.ensure(mark.channel, null);
        ingest.introduce(channel);
        batch.addMark({ channel: channel.name, seq: mark.seq, kind: mark.kind ?? 'restart-window' });
      }
      derived.restart(change.point.derived);
    }
    this.apply(change);
    this.options.commit();
    return this.view(change.point.id) as TestPointView;
  }

  stop(id: string): TestPointView {
    this.options.requireStore();
    const change = this.options.testPoints.stop(id, this.options.clock.now());
    this.apply(change);
    for (const mark of this.options.testPoints.closeWindows(change.point)) this.options.batch.addMark(mark);
    this.options.commit();
    return this.view(id) as TestPointView;
  }

  annotate(id: string, text: string): TestPointView {
    this.options.requireStore();
    const point = this.options.testPoints.annotate(id, text, this.options.clock.now());
    this.options.batch.putTestPoint(point.id, point);
    this.options.raise(id, 'test-point-annotated', null, { text: text.slice(0, 2000) });
    this.options.commit();
    return this.view(id) as TestPointView;
  }

  /** Before each commit: running test points whose channels and derived results are all at target become ready. */
  evaluate(nowMs: number): void {
    for (const change of this.options.testPoints.evaluate(nowMs)) this.apply(change);
  }

  view(id: string): TestPointView | null {
    const point = this.options.testPoints.get(id);
    return point ? { ...point, verdict: this.options.testPoints.verdict(point) } : null;
  }

  /** The test point's window over each of its channels now (for a report before any record). */
  windows(id: string): { name: string; pipeline: ChannelPipeline }[] {
    const point = this.options.testPoints.get(id);
    if (!point) return [];
    return point.channels.flatMap((name) => {
      const pipeline = this.options.testPoints.windowOf(point, name);
      return pipeline ? [{ name, pipeline }] : [];
    });
  }

  views(): TestPointView[] {
    return this.options.testPoints.list().map((point) => ({ ...point, verdict: this.options.testPoints.verdict(point) }));
  }

  private apply(change: TestPointChange): void {
    const { batch } = this.options;
    batch.putTestPoint(change.point.id, change.point);
    const body: Record<string, unknown> = { testPoint: change.point.id, name: change.point.name, channels: change.point.channels, state: change.point.state };
    if (change.kind !== 'test-point-started') {
      // Samples missing within each channel's window (the gap detectors are the daemon's).
      for (const entry of change.record.entries) {
        entry.gaps = this.options.ingest.gapsWithin(entry.channel, entry.windowStartTime, entry.windowEndTime);
        // The recorded window's trace, frozen with the record (the report draws it, never the live channel).
        const pipeline = this.options.testPoints.windowOf(change.point, entry.channel);
        if (entry.evidence && pipeline) {
          const trace = this.options.trace(entry.channel, pipeline, Math.min(RECORD_TRACE_SAMPLES, entry.n + entry.excluded));
          entry.evidence.trace = trace === null ? null : decimateTrace(trace);
        }
      }
      batch.addRecord(change.point.id, change.record);
      // The event carries the record without what only its report draws (the API has the whole record).
      body.record = { ...change.record, entries: change.record.entries.map(({ evidence: _evidence, ...entry }) => entry) };
    }
    this.options.raise(change.point.id, change.kind, null, body);
  }
}
