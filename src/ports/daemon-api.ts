import type { ChannelSnapshot, ChannelSummary } from '../engine/channel-pipeline.js';
import type { DerivedSnapshot } from '../engine/derived/derived-engine.js';
import type { DerivedVerdict } from '../engine/derived/derived-record.js';
import type { TestPoint } from '../engine/test-points.js';
import type { StoredEvent, StoredRecord } from './store.js';

/**
 * What the HTTP API, the WebSocket hub and the printable report may ask of the daemon: a narrow
 * query and command interface. They never see the daemon class, its store or its engine objects;
 * src/daemon/daemon.ts implements this (delegating to its queries, commands and acknowledgements),
 * and a test can stand in for it. Errors are catalogue errors (src/errors/catalogue.ts): a command
 * refused for the request's sake throws one with a 4xx status, a failing store one with 503.
 */

/** How commits to the store fare (the commit cycle's view). */
export interface StoreHealth {
  failing: boolean;
  /** Wall-clock ms of the first failure of the current streak (null when healthy). */
  since: number | null;
  /** Failed attempts in the current streak. */
  attempts: number;
  lastError: { code: string; message: string } | null;
  pendingSamples: number;
  pendingAcknowledgements: number;
  commits: number;
  lastCommitMs: number;
  maxCommitMs: number;
}

export interface DaemonHealth {
  /** ok; degraded: the broker is not connected; failing: commits fail (nothing is acknowledged). */
  status: 'ok' | 'degraded' | 'failing';
  broker: 'connected' | 'disconnected';
  store: StoreHealth;
}

/**
 * The recent samples of a channel for its chart, with the indices that mark where the averaging
 * window starts and where the warm-up was cut (see src/daemon/channel-trace.ts).
 */
export interface ChannelTrace {
  firstIndex: number;
  /** Seconds since the epoch (null when the sample carried no time and none was known). */
  times: (number | null)[];
  values: number[];
  windowStartIndex: number;
  originIndex: number;
  /** How many of the leading samples came from the store (before the window). */
  beforeWindow: number;
  /** Gaps (samples that never came) between the trace's first and last time: seconds since the epoch. */
  gaps?: TraceGap[];
}

export interface TraceGap {
  from: number;
  to: number;
  missing: number;
  source: 'time-stamps' | 'sequence';
}

/**
 * A channel's intake since the daemon started (GET /api/channels/:name): the samples refused for
 * it, by reason (those whose payload named the channel before it failed; a payload not read at all
 * counts for the daemon only, in /api/counters), and its gaps with the newest of them listed (ISO times).
 */
export interface ChannelIntake {
  refused: { total: number; byReason: Record<string, number> };
  gaps: { count: number; missingSamples: number; sequenceGaps: number; intervalMs: number | null; learned: boolean; recent: { from: string; to: string; missing: number; source: 'time-stamps' | 'sequence' }[] };
}

/** A channel's intake in three numbers (the live summary's `intake`). */
export interface IntakeBrief {
  refused: number;
  gaps: number;
  missingSamples: number;
}

export interface CusumTrace {
  blockSize: number;
  decisionInterval: number;
  upper: number[];
  lower: number[];
}

/** One channel, read on demand. */
export interface ChannelView {
  readonly name: string;
  readonly unit: string | null;
  /** A conflict between a payload's unit and the configured one (the configured one is used), or null. */
  readonly unitNote: string | null;
  /** Changes whenever the summary may have (a sample or an event). */
  readonly version: number;
  summary(): ChannelSummary;
  snapshot(): ChannelSnapshot;
  trace(count: number): ChannelTrace;
  cusumTrace(): CusumTrace | null;
  /** The channel's newest stored events, oldest first. */
  storedEvents(limit: number): StoredEvent[];
  /** Its refused samples and gaps since the daemon started (absent where the daemon does not ingest). */
  intake?(): ChannelIntake;
  /** The totals of intake(), in O(1): for the live summaries. */
  intakeBrief?(): IntakeBrief;
}

/** A derived result as the API shows it: the engine's snapshot, the verdict and the GUM statement. */
export type DerivedView = DerivedSnapshot & DerivedVerdict & { statement: string };

export type TestPointView = TestPoint & { verdict: { channel: string; state: string; reached: boolean }[] };

export interface Acknowledgement {
  eventId: number;
  /** Id of the alert-acknowledged event that records it. */
  recordId: number;
  timeMs: number;
  note: string | null;
}

export interface TestPointRequest {
  id?: string;
  name?: string;
  channels: string[];
  derived?: string[];
  /** Set point per channel, for the stability rules that take theirs from the test point. */
  setPoints?: Record<string, number>;
}

/** A test point's own window over one of its channels, now (src/engine/channel.ts). */
export interface TestPointWindowView {
  name: string;
  unit: string | null;
  snapshot: ChannelSnapshot;
  trace: ChannelTrace;
  cusum: CusumTrace | null;
}

export interface DaemonQueries {
  health(): DaemonHealth;
  counterReport(): Record<string, unknown>;
  channels(): ChannelView[];
  channel(name: string): ChannelView | null;
  derivedNames(): string[];
  derivedResults(): DerivedView[];
  derivedResult(name: string): DerivedView | null;
  /** Stored events with id above `after`, oldest first. */
  events(after: number, limit: number): StoredEvent[];
  /** The newest `limit` stored events, oldest first. */
  latestEvents(limit: number): StoredEvent[];
  event(id: number): StoredEvent | null;
  eventsFor(source: string, limit: number): StoredEvent[];
  /** The id of the newest stored event (0 when there is none). */
  readonly lastEventId: number;
  /** Event kinds that call for a person's attention. */
  alertKinds(): readonly string[];
  acknowledgementsAfter(eventId: number): Acknowledgement[];
  testPointViews(): TestPointView[];
  testPoint(id: string): TestPointView | null;
  records(testPointId: string): StoredRecord[];
  /** The test point's window over each of its channels now (its report before a record). */
  testPointWindows(id: string, count: number): TestPointWindowView[];
}

export interface DaemonCommands {
  startTestPoint(request: TestPointRequest): TestPointView;
  stopTestPoint(id: string): TestPointView;
  annotateTestPoint(id: string, text: string): TestPointView;
  /**
   * Replaces a channel's Type B components (validated as the configuration's `typeB`: one line per
   * problem naming its key path, ERR_TYPE_B_INVALID); stored, so a restart keeps them. Returns the
   * components now in force.
   */
  setChannelTypeB(name: string, typeB: unknown): { channel: string; typeB: unknown[] };
  /** A channel's Type B components in force (null: no such channel). */
  channelTypeB(name: string): { channel: string; typeB: unknown[] } | null;
  /** Records an acknowledgement of a stored alert; acknowledging again returns the first. */
  acknowledgeEvent(id: number, note: string | null): { acknowledgement: Acknowledgement; already: boolean };
}

export interface DaemonFeed {
  /** Every committed event, as it is published. */
  onEvent(listener: (event: StoredEvent) => void): () => void;
  /** Health changes (the store failing or recovering). */
  onHealth(listener: (health: DaemonHealth) => void): () => void;
}

export type DaemonApi = DaemonQueries & DaemonCommands & DaemonFeed;
