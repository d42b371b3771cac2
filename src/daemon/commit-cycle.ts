import type { StoreHealth } from '../ports/daemon-api.js';
import type { Logger } from 'pino';
import type { Clock } from '../ports/clock.js';
import type { AckToken } from '../ports/sample-source.js';
import type { EventToWrite, Store, StoredEvent } from '../ports/store.js';
import { PendingBatch } from './pending-batch.js';

/**
 * The commit cycle: batch -> commit -> acknowledge only what committed.
 *
 * Everything the daemon accepts waits in one PendingBatch. A commit is due at once (after the burst
 * of messages in hand, setImmediate) when acknowledgements, events or test points wait on it, else
 * within `flushIntervalMs`. A commit writes the whole pending batch in one store transaction; only
 * when it succeeds are the source batches acknowledged (the broker may then forget them) and the
 * stored events handed on to be published. The store commits synchronously, so nothing is
 * accepted while it runs: what the transaction wrote is exactly what the tokens stand for.
 *
 * When a commit fails the batch stays whole, nothing is acknowledged, and the commit is retried
 * after a backoff (retryInitialMs, doubling up to retryMaxMs); samples that arrive meanwhile join
 * the batch and are committed with it. While commits fail the daemon is unhealthy: `health` says
 * since when and why, the first failure is logged as an error with its stack and reported through
 * `healthChanged` (the daemon raises the `store-failing` alert and turns /healthz to 503), and the
 * first commit that succeeds again carries a `store-recovered` event with the outage's figures and
 * reports the recovery. With MQTT at QoS 1 the broker stops sending once its window of
 * unacknowledged messages is full, so a failing store throttles the stream instead of losing it.
 */
/** How commits fare: the store-health view of the daemon's API (src/ports/daemon-api.ts). */
export type CommitHealth = StoreHealth;

export interface CommitCycleOptions {
  store: Pick<Store, 'commit'>;
  clock: Clock;
  log: Logger;
  flushIntervalMs: number;
  /** First retry after a failed commit (ms); doubles per failure up to retryMaxMs. */
  retryInitialMs?: number;
  retryMaxMs?: number;
  /** Sends the acknowledgements of committed source batches; returns how many went out. */
  acknowledge(tokens: AckToken[]): number;
  /** Fills the batch before an attempt (checkpoints due, test-point changes) and returns the counters to store. */
  prepare(batch: PendingBatch, final: boolean): Record<string, number>;
  /** The events of a successful commit, as stored (ids assigned). */
  committed(events: StoredEvent[]): void;
  /** The store started failing, or recovered. */
  healthChanged(health: CommitHealth): void;
  /** After each successful commit, the state in memory being exactly what is committed (the shared checkpoints are taken here). */
  afterCommit?(): void;
}

const RETRY_INITIAL_MS = 50;
const RETRY_MAX_MS = 5000;
/** While failing, log a repeated failure at most this often. */
const FAILURE_LOG_INTERVAL_MS = 60_000;

export class CommitCycle {
  readonly batch = new PendingBatch();
  private readonly options: CommitCycleOptions;
  private readonly retryInitialMs: number;
  private readonly retryMaxMs: number;
  private immediate: NodeJS.Immediate | null = null;
  private cancelTimer: (() => void) | null = null;
  private cancelRetry: (() => void) | null = null;
  private failingSince: number | null = null;
  private failedAttempts = 0;
  private lastError: { code: string; message: string } | null = null;
  private lastFailureLog = Number.NEGATIVE_INFINITY;
  private commits = 0;
  private lastCommitMs = 0;
  private maxCommitMs = 0;
  private acknowledged = 0;
  private stopped = false;

  constructor(options: CommitCycleOptions) {
    this.options = options;
    this.retryInitialMs = options.retryInitialMs ?? RETRY_INITIAL_MS;
    this.retryMaxMs = options.retryMaxMs ?? RETRY_MAX_MS;
  }

  get failing(): boolean {
    return this.failingSince !== null;
  }

  /** Acknowledgements sent since the start. */
  get acknowledgedCount(): number {
    return this.acknowledged;
  }

  health(): CommitHealth {
    return {
      failing: this.failing,
      since: this.failingSince,
      attempts: this.failedAttempts,
      lastError: this.lastError,
      pendingSamples: this.batch.sampleCount,
      pendingAcknowledgements: this.batch.tokenCount,
      commits: this.commits,
      lastCommitMs: this.lastCommitMs,
      maxCommitMs: this.maxCommitMs,
    };
  }

  /**
   * Asks for a commit: at once when something waits on it, else within flushIntervalMs. While
   * commits fail, the retry timer decides (asking again does not hammer a failing store).
   */
  request(): void {
    if (this.stopped || this.failing) return;
    if (this.batch.urgent) {
      if (this.immediate !== null) return;
      this.cancelTimer?.();
      this.cancelTimer = null;
      this.immediate = setImmediate(() => {
        this.immediate = null;
        this.commit(false);
      });
      return;
    }
    if (this.immediate !== null || this.cancelTimer !== null || this.batch.empty) return;
    this.cancelTimer = this.options.clock.setTimer(this.options.flushIntervalMs, () => {
      this.cancelTimer = null;
      this.commit(false);
    });
  }

  /**
   * Commits the pending batch now (a command that must be durable before it answers, a clean stop:
   * `final` checkpoints every channel). Returns whether the batch is committed.
   */
  commit(final: boolean): boolean {
    this.clearSchedule();
    const { clock, log } = this.options;
    const started = clock.monotonicMs();
    const now = clock.now();
    const counters = this.options.prepare(this.batch, final);
    if (this.batch.empty && !this.failing) return true;
    const extra: EventToWrite[] = [];
    if (this.failing) {
      extra.push({ timeMs: now, source: 'daemon', kind: 'store-recovered', at: null, body: { since: this.failingSince, failedMs: now - (this.failingSince as number), failedAttempts: this.failedAttempts, error: this.lastError, samples: this.batch.sampleCount } });
    }
    let stored: StoredEvent[];
    try {
      stored = this.options.store.commit(this.batch.toCommitBatch(counters, extra), now).events;
    } catch (error) {
      this.failed(error, now);
      return false;
    }
    const tokens = this.batch.clear();
    this.acknowledged += this.options.acknowledge(tokens);
    this.commits++;
    const elapsed = clock.monotonicMs() - started;
    this.lastCommitMs = elapsed;
    if (elapsed > this.maxCommitMs) this.maxCommitMs = elapsed;
    if (this.failing) {
      log.info({ since: new Date(this.failingSince as number).toISOString(), failedAttempts: this.failedAttempts }, 'commits succeed again: the store has recovered');
      this.failingSince = null;
      this.failedAttempts = 0;
      this.lastError = null;
      this.cancelRetry?.();
      this.cancelRetry = null;
      this.options.healthChanged(this.health());
    }
    if (stored.length > 0) this.options.committed(stored);
    this.options.afterCommit?.();
    return true;
  }

  /** Stops scheduling and makes a last attempt; returns whether everything was committed. */
  stop(): boolean {
    const committed = this.commit(true);
    this.stopped = true;
    this.clearSchedule();
    this.cancelRetry?.();
    this.cancelRetry = null;
    if (!committed) {
      this.options.log.error({ samples: this.batch.sampleCount, unacknowledged: this.batch.tokenCount }, 'stopping with a batch the store did not take: its messages were not acknowledged, so the broker delivers QoS 1 messages again to the next session; QoS 0 samples of it are lost');
    }
    return committed;
  }

  private failed(error: unknown, now: number): void {
    const { log } = this.options;
    const err = error as Error & { code?: string };
    this.lastError = { code: typeof err.code === 'string' ? err.code : 'ERR_STORE_FAILED', message: err.message ?? String(error) };
    this.failedAttempts++;
    const first = this.failingSince === null;
    if (first) {
      this.failingSince = now;
      this.lastFailureLog = now;
      log.error({ err, samples: this.batch.sampleCount, unacknowledged: this.batch.tokenCount }, 'commit failed: nothing is acknowledged until the store takes the batch; retrying');
      this.options.healthChanged(this.health());
    } else if (now - this.lastFailureLog >= FAILURE_LOG_INTERVAL_MS) {
      this.lastFailureLog = now;
      log.error({ err, failedAttempts: this.failedAttempts, samples: this.batch.sampleCount, since: new Date(this.failingSince as number).toISOString() }, 'commits still fail');
    }
    if (this.stopped) return;
    const delay = Math.min(this.retryMaxMs, this.retryInitialMs * 2 ** Math.min(30, this.failedAttempts - 1));
    this.cancelRetry?.();
    this.cancelRetry = this.options.clock.setTimer(delay, () => {
      this.cancelRetry = null;
      this.commit(false);
    });
  }

  private clearSchedule(): void {
    if (this.immediate !== null) {
      clearImmediate(this.immediate);
      this.immediate = null;
    }
    this.cancelTimer?.();
    this.cancelTimer = null;
  }
}
