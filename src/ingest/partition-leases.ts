import { performance } from 'node:perf_hooks';
import type { KV } from '@nats-io/kv';

/**
 * Partition leases in a JetStream key-value bucket whose entries expire after the lease time.
 *
 * Keys: `p.<partition>` holds the owner's name; `w.<worker>` says a worker is alive. Every
 * heartbeat (a third of the lease) a worker
 *   1. renews its presence and each lease it holds by compare-and-set on the entry's revision
 *      (a renewal that fails means someone else holds the key: the partition is lost at once);
 *   2. reads the live workers (the `w.` keys: an entry not renewed expires with the bucket's TTL)
 *      and computes its share: sorted by name, worker i of W owns the partitions p with p mod W = i;
 *   3. releases what is no longer its share (stops reading it, then deletes the key at its
 *      revision) and tries to create the keys of its share that are free (create fails while
 *      another worker holds one; that worker releases it at its own next heartbeat, or the entry
 *      expires when it died).
 *
 * Safety (never two owners): a lease is the worker's until `sent + leaseSeconds - margin`, where
 * `sent` is the monotonic time at which the renewal that succeeded was sent. The server stamps the
 * entry when it receives it, after `sent`, and expires it `leaseSeconds` later, so the holder's
 * deadline passes before anyone can create the key again (with clocks that run at the same rate;
 * the margin covers their drift). The sample source checks the deadline before it hands out or
 * acknowledges anything of the partition, so a worker paused past its lease (SIGSTOP, a long GC)
 * does nothing with the partition when it wakes, even before its timer runs.
 */
export interface LeaseHandlers {
  /** The partition is ours until `deadline` (performance.now() ms): start reading it. */
  acquired(partition: number, deadline: number): Promise<void>;
  /** The lease was renewed; false when the partition stopped being read (it is released, to be acquired again). */
  renewed(partition: number, deadline: number): boolean;
  /** Ours no more (a renewal failed or the deadline passed): stop at once, acknowledge nothing. */
  lost(partition: number, reason: string): void;
  /** Give it up cleanly (rebalance, stop): stop reading, let what is committed be acknowledged. */
  release(partition: number): Promise<void>;
  error(error: Error): void;
}

export interface PartitionLeasesOptions {
  kv: KV;
  worker: string;
  partitions: number;
  leaseSeconds: number;
  handlers: LeaseHandlers;
  now?: () => number;
  /**
   * The live workers' names (default: the bucket's `w.` keys through the client's key listing,
   * which opens a consumer each time: on a cluster that is a round through the meta leader per
   * heartbeat). Bounded by the heartbeat's period either way.
   */
  liveWorkers?: () => Promise<string[]>;
  /** Removes this worker's presence at a clean stop (default: delete its key). */
  removePresence?: () => Promise<void>;
}

interface Held {
  revision: number;
  deadline: number;
}

export class PartitionLeases {
  private readonly options: PartitionLeasesOptions;
  private readonly held = new Map<number, Held>();
  private timer: NodeJS.Timeout | null = null;
  private running: Promise<void> | null = null;
  private presence: number | null = null;
  /** Partitions acquired whose set-up (`handlers.acquired`) is still running. */
  private readonly acquiring = new Map<number, Promise<void>>();
  private stopped = false;
  /** Live workers seen at the last heartbeat. */
  workers: string[] = [];

  constructor(options: PartitionLeasesOptions) {
    this.options = options;
  }

  get leaseMs(): number {
    return this.options.leaseSeconds * 1000;
  }

  /** Margin kept before the server can expire a lease: a tenth of it, at most 1 s. */
  private get marginMs(): number {
    return Math.min(1000, this.leaseMs / 10);
  }

  private now(): number {
    return (this.options.now ?? (() => performance.now()))();
  }

  /** The partitions this worker holds, sorted. */
  owned(): number[] {
    return [...this.held.keys()].sort((a, b) => a - b);
  }

  /** The partitions a worker owns among `workers` (sorted by name): p mod W = its index. */
  static share(worker: string, workers: string[], partitions: number): number[] {
    const sorted = [...new Set([...workers, worker])].sort();
    const index = sorted.indexOf(worker);
    const out: number[] = [];
    for (let p = 0; p < partitions; p++) if (p % sorted.length === index) out.push(p);
    return out;
  }

  /** Runs the first heartbeat, then one every third of the lease. */
  async start(): Promise<void> {
    this.stopped = false;
    await this.heartbeat();
    this.timer = setInterval(() => void this.heartbeat(), Math.max(100, this.leaseMs / 3));
    this.timer.unref?.();
  }

  /** One heartbeat (serialised: a heartbeat still running is not overlapped). */
  heartbeat(): Promise<void> {
    if (this.running) return this.running;
    this.running = this.beat()
      .catch((error: unknown) => this.options.handlers.error(error as Error))
      .finally(() => {
        this.running = null;
      });
    return this.running;
  }

  private async beat(): Promise<void> {
    if (this.stopped) return;
    const { kv, worker, partitions, handlers } = this.options;
    // Past a deadline already (the process was paused): lost, before anything else.
    for (const [p, h] of this.held) {
      if (this.now() >= h.deadline) {
        this.held.delete(p);
        handlers.lost(p, 'the lease ran out before it was renewed');
      }
    }
    const presenceKey = `w.${worker}`;
    try {
      this.presence = this.presence === null ? await kv.create(presenceKey, worker).catch(() => kv.put(presenceKey, worker)) : await kv.update(presenceKey, worker, this.presence);
    } catch {
      this.presence = await kv.put(presenceKey, worker);
    }
    for (const [p, h] of [...this.held]) {
      const sent = this.now();
      try {
        const revision = await kv.update(`p.${p}`, worker, h.revision);
        const deadline = sent + this.leaseMs - this.marginMs;
        this.held.set(p, { revision, deadline });
        if (!handlers.renewed(p, deadline)) {
          await this.release(p);
          continue;
        }
      } catch (error) {
        this.held.delete(p);
        handlers.lost(p, `the renewal failed: ${(error as Error).message}`);
      }
    }
    // Bounded by the heartbeat's period, so that a stalled listing does not hold up the next renewals.
    const period = Math.max(100, this.leaseMs / 3);
    const live = this.options.liveWorkers ? await bounded(this.options.liveWorkers(), period, 'listing the live workers') : (await listKeys(kv, 'w.*', period)).map((key) => key.slice(2));
    this.workers = [...new Set([...live, worker])].sort();
    const share = new Set(PartitionLeases.share(worker, this.workers, partitions));
    for (const p of this.owned()) {
      if (share.has(p) || this.stopped) continue;
      await this.release(p);
    }
    for (const p of share) {
      if (this.held.has(p) || this.stopped) continue;
      const sent = this.now();
      let revision: number;
      try {
        revision = await kv.create(`p.${p}`, worker);
      } catch {
        continue; // held by another worker: it releases it, or it expires
      }
      const deadline = sent + this.leaseMs - this.marginMs;
      this.held.set(p, { revision, deadline });
      // Not awaited: setting a partition up (its consumer positioned, its channels restored from a
      // shared checkpoint) can take longer than a lease on a busy cluster, and the renewals must go
      // on meanwhile. The source hands out nothing past the deadline it holds, whatever happens.
      const acquiring = handlers.acquired(p, deadline).catch(async (error: unknown) => {
        handlers.error(error as Error);
        if (this.held.has(p)) await this.releaseNow(p);
      });
      this.acquiring.set(p, acquiring);
      void acquiring.finally(() => {
        if (this.acquiring.get(p) === acquiring) this.acquiring.delete(p);
      });
    }
  }

  private async release(p: number): Promise<void> {
    // A partition still being set up is released once that is done (else its reading would start after the release).
    await this.acquiring.get(p);
    await this.releaseNow(p);
  }

  private async releaseNow(p: number): Promise<void> {
    const h = this.held.get(p);
    if (!h) return;
    await this.options.handlers.release(p);
    this.held.delete(p);
    // Deleted at its revision: a lease someone else already holds is left alone.
    await this.options.kv.delete(`p.${p}`, { previousSeq: h.revision }).catch(() => undefined);
  }

  /** Stops the heartbeat without releasing anything: what a frozen process looks like (tests). */
  suspend(): void {
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
  }

  /** Stops the heartbeat and releases every lease (a clean stop hands the partitions over at once). */
  async stop(): Promise<void> {
    this.stopped = true;
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
    // A heartbeat in flight ends within its requests' timeouts (each bounded, keys too).
    await this.running;
    for (const p of this.owned()) await this.release(p);
    if (this.presence !== null) await (this.options.removePresence?.() ?? this.options.kv.delete(`w.${this.options.worker}`)).catch(() => undefined);
  }
}

/**
 * The keys of a bucket matching `filter`, within `ms`: the client lists keys through a consumer that
 * ends when the last key or an idle heartbeat arrives; on a cluster that loses a node meanwhile,
 * neither may ever come, and a heartbeat waiting on it would wait for ever (and every later one
 * behind it). Past `ms` the listing is stopped and this rejects: the heartbeat fails, is logged, and
 * the next one tries again.
 */
export async function listKeys(kv: KV, filter: string, ms: number): Promise<string[]> {
  const keys: string[] = [];
  let timer: NodeJS.Timeout | undefined;
  let timedOut = false;
  const listing = (async () => {
    const iterator = await kv.keys(filter);
    timer = setTimeout(() => {
      timedOut = true;
      iterator.stop();
    }, ms);
    for await (const key of iterator) keys.push(key);
  })();
  // The requests that open the listing have their own timeouts; this bounds them all the same.
  let outer: NodeJS.Timeout | undefined;
  const limit = new Promise<never>((_, reject) => {
    outer = setTimeout(() => reject(new Error(`listing the keys ${filter} did not end within ${Math.round(ms)} ms`)), ms + 1000);
  });
  try {
    await Promise.race([listing, limit]);
  } finally {
    clearTimeout(timer);
    clearTimeout(outer);
  }
  if (timedOut) throw new Error(`listing the keys ${filter} did not end within ${Math.round(ms)} ms`);
  return keys;
}

/** The promise's value, or an error after `ms` (what did not end, and its bound). */
async function bounded<T>(promise: Promise<T>, ms: number, what: string): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  try {
    return await Promise.race([promise, new Promise<never>((_, reject) => (timer = setTimeout(() => reject(new Error(`${what} did not end within ${Math.round(ms)} ms`)), ms)))]);
  } finally {
    clearTimeout(timer);
  }
}
