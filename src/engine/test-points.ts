import type { ChannelPipeline } from './channel-pipeline.js';
import type { ChannelRegistry } from './channel-registry.js';
import { PlateauError } from '../errors/catalogue.js';
import { recordEntry, RECORD_CAUTION, type RecordEvidence, type TestPointRecord } from './test-point-record.js';
import { channelBootstrapCheck } from './derived/bootstrap-cross-check.js';

/**
 * Test points: a set of channels held at one set point. Starting one restarts the growing window of
 * each of its channels at its next sample (a mark the store keeps, so a replay restarts it at the
 * same sample) and opens the test point's own window over each (src/engine/channel.ts: a later test
 * point on the same channel forks it, never restarts it; its verdict and records read it); the test point is ready when every channel's verdict is ready (steady, at its
 * target precision when it has one) and every derived result it holds is at target. Readiness is edge-triggered: the
 * record is written once, when it becomes ready, and again when the test point stops.
 */
export type TestPointState = 'running' | 'ready' | 'stopped';

/**
 * A channel is ready when its verdict is (channel-verdict.ts): steady, at its target when it has one,
 * and no long memory. The state is checked first; the verdict (one estimator run) only for channels
 * that could be ready.
 */
function channelReady(pipeline: ChannelPipeline | undefined): boolean {
  if (!pipeline) return false;
  // The readiness policy (src/engine/criteria/readiness-policy.ts): the rules, the statistical verdict, or both.
  const criteria = pipeline.criteria;
  if (criteria !== null && criteria.policy !== 'statistical') {
    if (!criteria.tracker.allHold) return false;
    if (criteria.policy === 'rules') return true;
  }
  const state = pipeline.state;
  // a stopping rule (u_A <= f u_c) can make a steady channel ready before its Type A target
  const stoppingRule = (pipeline.options.uncertainty?.dominanceFraction ?? null) !== null;
  if (state !== 'precise' && !(state === 'steady' && (!pipeline.options.target || stoppingRule))) return false;
  return pipeline.summary().verdict.ready;
}

export interface TestPoint {
  id: string;
  name: string;
  channels: string[];
  derived: string[];
  state: TestPointState;
  createdMs: number;
  readyMs: number | null;
  stoppedMs: number | null;
  /** Each channel's sample index at the start. */
  startSeq: Record<string, number>;
  /** Set points given at the start, per channel (for the stability rules that take theirs from the test point). */
  setPoints?: Record<string, number>;
  annotations: { timeMs: number; text: string }[];
}

export type TestPointChange =
  | { kind: 'test-point-started'; point: TestPoint; marks: { channel: string; seq: number; /** restart-window when absent */ kind?: string }[] }
  | { kind: 'test-point-ready'; point: TestPoint; record: TestPointRecord }
  | { kind: 'test-point-stopped'; point: TestPoint; record: TestPointRecord };

export interface DerivedStatus {
  /** Whether the derived result is at its target; null when it has none (treated as met). */
  atTarget(name: string): boolean | null;
  recordEntries(names: string[]): unknown[];
}

const ID_PATTERN = /^[A-Za-z0-9][A-Za-z0-9_.\-]{0,63}$/;

/** Most annotations a test point keeps. */
const MAX_ANNOTATIONS = 200;

export class TestPoints {
  private readonly points = new Map<string, TestPoint>();
  private readonly registry: ChannelRegistry;
  private derived: DerivedStatus | null = null;
  private sequence = 0;
  private rig: { id: string | null; name: string | null } = { id: null, name: null };

  constructor(registry: ChannelRegistry) {
    this.registry = registry;
  }

  useDerived(derived: DerivedStatus): void {
    this.derived = derived;
  }

  /** The rig every record names (from the configuration). */
  useRig(rig: { id: string | null; name: string | null }): void {
    this.rig = { ...rig };
  }

  list(): TestPoint[] {
    return [...this.points.values()];
  }

  get(id: string): TestPoint | undefined {
    return this.points.get(id);
  }

  /** Restores stored test points (after a restart); their windows are restored by replay. */
  load(points: TestPoint[]): void {
    for (const point of points) {
      this.points.set(point.id, point);
      const n = Number(/(\d+)$/.exec(point.id)?.[1] ?? 0);
      if (n > this.sequence) this.sequence = n;
    }
  }

  /**
   * `expected`: channels the configuration names (inputs of derived results), accepted before their
   * first sample; any other channel that has never had a sample is refused.
   */
  start(request: { id?: string; name?: string; channels: string[]; derived?: string[]; setPoints?: Record<string, number> }, nowMs: number, knownDerived: string[] = [], expected: (channel: string) => boolean = () => false): TestPointChange {
    const channels = [...new Set(request.channels)];
    if (channels.length === 0 && (request.derived ?? []).length === 0) throw new PlateauError('ERR_TEST_POINT_EMPTY');
    for (const name of channels) {
      if (typeof name !== 'string' || !/^[\p{L}\p{N}_.:\-/]{1,128}$/u.test(name)) throw new PlateauError('ERR_TEST_POINT_CHANNEL', { name: String(name).slice(0, 80) });
    }
    for (const name of request.derived ?? []) {
      if (!knownDerived.includes(name)) throw new PlateauError('ERR_TEST_POINT_DERIVED', { name: String(name).slice(0, 80), known: knownDerived.join(', ') || 'none' });
    }
    const id = request.id ?? `tp-${++this.sequence}`;
    if (!ID_PATTERN.test(id)) throw new PlateauError('ERR_TEST_POINT_ID', { id: id.slice(0, 80) });
    const existing = this.points.get(id);
    if (existing && existing.state !== 'stopped') throw new PlateauError('ERR_TEST_POINT_RUNNING', { id });
    // a channel that has never received a sample is refused rather than created empty (a typo would otherwise wait forever)
    for (const name of channels) {
      if (this.registry.get(name) === undefined && !expected(name)) {
        const known = this.registry.all().map((c) => c.name);
        throw new PlateauError('ERR_TEST_POINT_CHANNEL_UNKNOWN', { name: name.slice(0, 80), known: known.length === 0 ? 'none yet' : `${known.slice(0, 20).join(', ')}${known.length > 20 ? `, ... (${known.length} in all)` : ''}` });
      }
    }
    const setPoints = checkSetPoints(request.setPoints, channels);
    const marks: { channel: string; seq: number; kind?: string }[] = [];
    const startSeq: Record<string, number> = {};
    for (const name of channels) {
      const channel = this.registry.ensure(name, null);
      startSeq[name] = channel.nextSeq;
      if (channel.pipeline.options.window.kind === 'growing') marks.push({ channel: name, seq: channel.restartWindow().seq });
      // The stability rules that take their set point from the test point: this one's, or none.
      const setPoint = channel.setSetPoint(setPoints[name] ?? null);
      if (setPoint !== null) marks.push({ channel: name, seq: setPoint.seq, kind: setPoint.kind });
      // Its own window from here: another test point's start later forks it rather than restarting it.
      const open = channel.openWindow(id);
      marks.push({ channel: name, seq: open.seq, kind: open.kind });
    }
    const point: TestPoint = {
      id,
      name: (request.name ?? id).slice(0, 200),
      channels,
      derived: request.derived ?? [],
      state: 'running',
      createdMs: nowMs,
      readyMs: null,
      stoppedMs: null,
      startSeq,
      annotations: [],
      ...(Object.keys(setPoints).length > 0 ? { setPoints } : {}),
    };
    this.points.set(id, point);
    return { kind: 'test-point-started', point, marks };
  }

  /** Stops a test point and makes its record; the caller closes its windows (`closeWindows`) once it has read what it needs of them. */
  stop(id: string, nowMs: number): TestPointChange {
    const point = this.requireRunning(id);
    point.state = 'stopped';
    point.stoppedMs = nowMs;
    return { kind: 'test-point-stopped', point, record: this.record(point, 'stopped', nowMs) };
  }

  /** Closes a stopped test point's windows; returns the marks to store. */
  closeWindows(point: TestPoint): { channel: string; seq: number; kind: string }[] {
    const marks: { channel: string; seq: number; kind: string }[] = [];
    for (const name of point.channels) {
      const close = this.registry.get(name)?.closeWindow(point.id) ?? null;
      if (close !== null) marks.push({ channel: name, seq: close.seq, kind: close.kind });
    }
    return marks;
  }

  /** The window of test point `point` over `name`: its own, or the channel's pipeline (a test point from before windows of their own). */
  windowOf(point: TestPoint, name: string): ChannelPipeline | undefined {
    const channel = this.registry.get(name);
    if (!channel) return undefined;
    return channel.windowOf(point.id) ?? channel.pipeline;
  }

  annotate(id: string, text: string, nowMs: number): TestPoint {
    const point = this.points.get(id);
    if (!point) throw new PlateauError('ERR_TEST_POINT_UNKNOWN', { id });
    if (point.annotations.length >= MAX_ANNOTATIONS) throw new PlateauError('ERR_TEST_POINT_ANNOTATIONS', { id, max: MAX_ANNOTATIONS });
    point.annotations.push({ timeMs: nowMs, text: text.slice(0, 2000) });
    return point;
  }

  /** Running test points whose channels (and derived results) are all at target become ready. */
  evaluate(nowMs: number): TestPointChange[] {
    const changes: TestPointChange[] = [];
    for (const point of this.points.values()) {
      if (point.state !== 'running') continue;
      const channelsReady = point.channels.every((name) => channelReady(this.windowOf(point, name)));
      const derivedReady = point.derived.every((name) => this.derived?.atTarget(name) !== false);
      if (channelsReady && derivedReady) {
        point.state = 'ready';
        point.readyMs = nowMs;
        changes.push({ kind: 'test-point-ready', point, record: this.record(point, 'ready', nowMs) });
      }
    }
    return changes;
  }

  /** The verdict per channel, for display: its state, whether it is ready, and what it waits for. */
  verdict(point: TestPoint): { channel: string; state: string; reached: boolean; pending: string[] }[] {
    return point.channels.map((name) => {
      const pipeline = this.windowOf(point, name);
      if (!pipeline) return { channel: name, state: 'no data', reached: false, pending: ['no samples yet'] };
      const summary = pipeline.summary();
      const verdict = summary.verdict;
      if (pipeline.criteria !== null) {
        // Under the readiness policy: the rules' reasons beside the verdict's.
        const readiness = pipeline.criteria.readiness({ ready: verdict.ready, reasons: verdict.pending.map((p) => p.message) });
        return { channel: name, state: pipeline.state, reached: readiness.ready, pending: readiness.reasons };
      }
      return { channel: name, state: pipeline.state, reached: verdict.ready, pending: verdict.pending.map((p) => p.message) };
    });
  }

  record(point: TestPoint, kind: 'ready' | 'stopped', nowMs: number): TestPointRecord {
    const entries = point.channels.map((name) => {
      const channel = this.registry.get(name);
      const pipeline = this.windowOf(point, name);
      if (!channel || !pipeline) throw new Error(`test point ${point.id}: channel ${name} is not in the registry`);
      const snapshot = pipeline.snapshot();
      // The stationary bootstrap's standard error beside the analytic one (a cross-check); what the
      // report shows, frozen with the record (the daemon adds the trace, read with the store).
      const evidence: RecordEvidence = { snapshot: { ...snapshot, events: [] }, cusum: pipeline.cusumTrace(), trace: null };
      return { ...recordEntry(snapshot, channel.unit), bootstrap: channelBootstrapCheck(pipeline.series.values(), snapshot), evidence };
    });
    return {
      testPoint: {
        id: point.id,
        name: point.name,
        startedAt: new Date(point.createdMs).toISOString(),
        readyAt: point.readyMs === null ? null : new Date(point.readyMs).toISOString(),
        stoppedAt: point.stoppedMs === null ? null : new Date(point.stoppedMs).toISOString(),
        ...(point.setPoints ? { setPoints: { ...point.setPoints } } : {}),
      },
      rig: { ...this.rig },
      // the ready record is the first; the stop record is the second when the point was ready before
      recordNumber: `${point.id}/${kind === 'stopped' && point.readyMs !== null ? 2 : 1}`,
      kind,
      createdAt: new Date(nowMs).toISOString(),
      provisional: entries.some((e) => e.provisional === true),
      entries,
      derived: this.derived ? this.derived.recordEntries(point.derived) : [],
      caution: RECORD_CAUTION,
    };
  }

  private requireRunning(id: string): TestPoint {
    const point = this.points.get(id);
    if (!point) throw new PlateauError('ERR_TEST_POINT_UNKNOWN', { id });
    if (point.state === 'stopped') throw new PlateauError('ERR_TEST_POINT_STOPPED', { id });
    return point;
  }
}

/** The set points of a start request: numbers, for channels of the test point. */
function checkSetPoints(given: unknown, channels: string[]): Record<string, number> {
  if (given === undefined || given === null) return {};
  if (typeof given !== 'object' || Array.isArray(given)) throw new PlateauError('ERR_TEST_POINT_SET_POINT', { name: 'setPoints', problem: 'expected a mapping of channel names to numbers' });
  const out: Record<string, number> = {};
  for (const [name, value] of Object.entries(given as Record<string, unknown>)) {
    if (!channels.includes(name)) throw new PlateauError('ERR_TEST_POINT_SET_POINT', { name: name.slice(0, 80), problem: 'not a channel of this test point' });
    if (typeof value !== 'number' || !Number.isFinite(value)) throw new PlateauError('ERR_TEST_POINT_SET_POINT', { name: name.slice(0, 80), problem: 'expected a number' });
    out[name] = value;
  }
  return out;
}
