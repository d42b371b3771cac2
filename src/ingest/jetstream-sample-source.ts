import { performance } from 'node:perf_hooks';
import { jetstream, jetstreamManager, type ConsumerMessages, type JsMsg } from '@nats-io/jetstream';
import type { SubscriptionConfig } from '../config/plateau-config.js';
import type { AckToken, SampleSource, SourceHandlers, SourcePosition, SourceStatus } from '../ports/sample-source.js';
import { consumerConfig } from './jetstream-layout.js';
import type { NatsLink } from './nats-link.js';
import { consumerName, partitionSource, subjectToTopic } from './nats-subjects.js';
import { mostSpecific } from './topic-filters.js';

/**
 * The sample-source port over NATS JetStream, for the partitions this worker holds.
 *
 * Each held partition is read from its durable pull consumer (`<stream>_p<p>`); each message is
 * one batch (the commit cycle gathers what arrives together into one commit). A delivery's position is its stream sequence under the partition's own name
 * (`<source name>/p<p>`, durable: the daemon stores it with the commit and skips a sequence it has
 * already taken, see src/daemon/delivery-fence.ts); positions of one partition increase.
 *
 * `assign(p, startAfter)` starts reading a partition. With a number (the stream sequence this
 * worker's state covers), the consumer is created again to start right after it, so that a worker
 * that takes a partition over reads exactly what its own state lacks, whatever the previous owner
 * acknowledged; with null, the consumer continues where it is (its unacknowledged messages come
 * again). `release(p)` stops reading it. A partition may carry a deadline (the lease's): past it
 * nothing of the partition is handed out or acknowledged any more, even if the timer that would
 * have noticed has not run yet (a paused process wakes up past its lease).
 *
 * A reconnection, `release` and `stop` send a negative acknowledgement for what is outstanding
 * (the server sends it again at once) and make the old tokens void.
 */
interface Partition {
  index: number;
  name: string;
  epoch: number;
  messages: ConsumerMessages | null;
  reader: Promise<void> | null;
  /** performance.now() after which the partition is no longer ours (Infinity: no lease). */
  deadline: number;
  /**
   * A message arrived past the deadline and was not handed out: from then on nothing of the
   * partition is (a later message handed out after a dropped one would leave a gap that the
   * daemon's sequence fence could not tell from a redelivery). Read again only after a new assign.
   */
  expired: boolean;
  /**
   * The consumer's delivery sequence expected next (0: take the first one seen). The server numbers
   * every delivery of a consumer, first or again, one after the other, and this worker is the
   * consumer's only reader: a number skipped is a delivery that never arrived (sent by a consumer
   * leader on a node that died, or lost with a connection). The messages after it would move the
   * sequence fence past the lost one, whose redelivery would then be skipped as a repeat: so the
   * partition stops there, as past its deadline, and is read again from where the state ends.
   */
  nextDelivery: number;
  /** Messages handed out and not yet acknowledged, by stream sequence. */
  outstanding: Map<number, JsMsg>;
  /** Batches handed out and not yet acknowledged. */
  tokens: Set<JetStreamToken>;
}

interface JetStreamToken extends AckToken {
  partition: number;
  epoch: number;
  messages: JsMsg[];
}

export interface JetStreamSourceOptions {
  link: NatsLink;
  stream: string;
  subjectPrefix: string;
  subscriptions: SubscriptionConfig[];
  /** Messages asked for per pull. */
  fetchBatch?: number;
  name?: string;
  /** Close the link on stop (true when the source is the link's only user). */
  ownsLink?: boolean;
}

/** A released partition's outstanding messages come again after this long (the connection's pull requests are gone by then). */
const RELEASE_NAK_DELAY_MS = 1000;

export class JetStreamSampleSource implements SampleSource {
  readonly name: string;
  private readonly options: JetStreamSourceOptions;
  private readonly partitions = new Map<number, Partition>();
  /** Partitions whose consumer is being positioned by assign(), with the deadline to start with. */
  private readonly assigning = new Map<number, { deadline: number; released: boolean }>();
  private handlers: SourceHandlers | null = null;
  private epochs = 0;
  private unsubscribe: (() => void) | null = null;
  private stopped = false;
  /** Lost deliveries noticed (each made its partition be read again). */
  gaps = 0;

  constructor(options: JetStreamSourceOptions) {
    this.options = options;
    this.name = options.name ?? `jetstream/${options.stream}`;
  }

  /** Connects (the link); `resumeAfter` is not read: positions are per partition, given to assign(). */
  async start(handlers: SourceHandlers, _resumeAfter: SourcePosition | null = null): Promise<void> {
    this.handlers = handlers;
    this.stopped = false;
    await this.options.link.open();
    this.unsubscribe = this.options.link.onConnection((connected, detail) => {
      if (connected) for (const p of this.partitions.values()) this.voidOutstanding(p, 0);
      handlers.connection(connected, detail);
    });
    handlers.connection(true, `connected to ${this.options.link.servers.join(',')}`);
  }

  /** The partitions being read. */
  held(): number[] {
    return [...this.partitions.keys()].sort((a, b) => a - b);
  }

  /** The position name of partition p (what the store keeps its committed sequence under). */
  partitionName(p: number): string {
    return partitionSource(this.name, p);
  }

  async assign(index: number, startAfter: number | null, deadline = Number.POSITIVE_INFINITY): Promise<void> {
    if (this.partitions.has(index)) await this.release(index);
    // Renewals that come while the consumer is being positioned move this deadline (setDeadline).
    const pending = { deadline, released: false };
    this.assigning.set(index, pending);
    try {
      await this.open(index, startAfter, pending);
    } finally {
      if (this.assigning.get(index) === pending) this.assigning.delete(index);
    }
  }

  private async open(index: number, startAfter: number | null, pending: { deadline: number; released: boolean }): Promise<void> {
    const nc = this.options.link.nc;
    const stream = this.options.stream;
    const durable = consumerName(stream, index);
    if (startAfter !== null) {
      const jsm = await jetstreamManager(nc);
      await jsm.consumers.delete(stream, durable).catch(() => false);
      await jsm.consumers.add(stream, consumerConfig({ stream, subjectPrefix: this.options.subjectPrefix }, index, startAfter));
    }
    const consumer = await jetstream(nc).consumers.get(stream, durable);
    // Released (the lease lost or given up) while the consumer was being positioned: not read.
    if (pending.released || this.stopped) return;
    const partition: Partition = { index, name: this.partitionName(index), epoch: ++this.epochs, messages: null, reader: null, deadline: pending.deadline, expired: false, nextDelivery: 0, outstanding: new Map(), tokens: new Set() };
    this.partitions.set(index, partition);
    const messages = await consumer.consume({ max_messages: this.options.fetchBatch ?? 256, expires: 5000 });
    partition.messages = messages;
    partition.reader = (async () => {
      try {
        for await (const msg of messages) this.take(partition, msg);
      } catch (error) {
        if (!this.stopped) this.handlers?.error(error as Error);
      }
    })();
  }

  /** A renewed lease's deadline; false when the partition is not read here any more (it must be assigned again). */
  setDeadline(index: number, deadline: number): boolean {
    const pending = this.assigning.get(index);
    if (pending && !pending.released) {
      pending.deadline = deadline;
      return true;
    }
    const p = this.partitions.get(index);
    if (!p || p.expired) return false;
    p.deadline = deadline;
    return true;
  }

  /** Stops reading partition p; what it handed out and was not acknowledged is sent again (to the next owner). */
  async release(index: number): Promise<void> {
    const pending = this.assigning.get(index);
    if (pending) pending.released = true;
    const p = this.partitions.get(index);
    if (!p) return;
    this.partitions.delete(index);
    // Not waiting for the reader to end (it ends with the pull request in flight): a heartbeat
    // must not wait that long, the other leases' renewals follow it.
    p.messages?.stop();
    // Delayed: the server would otherwise send them again at once to this connection's pull
    // request, which is still open until it expires or the connection closes.
    this.voidOutstanding(p, performance.now() < p.deadline ? RELEASE_NAK_DELAY_MS : null);
  }

  /** Messages handed out and not acknowledged, per partition. */
  outstanding(index: number): number {
    return this.partitions.get(index)?.outstanding.size ?? 0;
  }

  /** One batch per message: the commit cycle gathers what arrives together into one commit. */
  private take(p: Partition, msg: JsMsg): void {
    if (this.partitions.get(p.index) !== p || p.expired || this.handlers === null) return;
    // Past the lease, the partition may be someone else's: hand out nothing more (the next owner,
    // or this worker after a new assign, reads it from where its state ends).
    if (performance.now() >= p.deadline) {
      p.expired = true;
      p.messages?.stop();
      return;
    }
    const delivery = msg.info.deliverySequence;
    if (p.nextDelivery > 0 && delivery > p.nextDelivery) {
      // A delivery was lost: hand out nothing more; the lease's next renewal sees the partition
      // stopped, releases it and takes it again, which reads it from this worker's own position.
      p.expired = true;
      p.messages?.stop();
      this.gaps++;
      this.handlers.error(new Error(`partition ${p.index}: delivery ${delivery} came where ${p.nextDelivery} was due (a delivery was lost, as when a NATS node goes down): the partition is read again from the last stream sequence taken`));
      return;
    }
    // A smaller number: a new consumer leader whose state was behind numbers again from there.
    p.nextDelivery = delivery + 1;
    const topic = subjectToTopic(msg.subject, this.options.subjectPrefix);
    p.outstanding.set(msg.seq, msg);
    const token: JetStreamToken = { source: this.name, partition: p.index, epoch: p.epoch, messages: [msg] };
    p.tokens.add(token);
    this.handlers.batch({ deliveries: [{ topic, payload: msg.data, subscription: mostSpecific(this.options.subscriptions, topic), position: { source: p.name, sequence: msg.seq, durable: true } }], token });
  }

  acknowledge(tokens: readonly AckToken[]): number {
    let sent = 0;
    const now = performance.now();
    for (const t of tokens) {
      if (t.source !== this.name) continue;
      const token = t as JetStreamToken;
      const p = this.partitions.get(token.partition);
      if (!p || p.epoch !== token.epoch || now >= p.deadline || !p.tokens.delete(token)) continue;
      let any = false;
      for (const m of token.messages) {
        if (p.outstanding.get(m.seq) !== m) continue;
        p.outstanding.delete(m.seq);
        m.ack();
        any = true;
      }
      if (any) sent++;
    }
    return sent;
  }

  status(): SourceStatus {
    let unacknowledged = 0;
    for (const p of this.partitions.values()) unacknowledged += p.tokens.size;
    return { connected: !this.stopped && this.options.link.connected, reconnects: this.options.link.reconnects, unacknowledged };
  }

  async stop(): Promise<void> {
    this.stopped = true;
    for (const index of [...this.partitions.keys()]) await this.release(index);
    this.unsubscribe?.();
    this.unsubscribe = null;
    if (this.options.ownsLink ?? true) await this.options.link.close();
  }

  /** Makes the partition's tokens void; with a delay, asks the server to send their messages again after it. */
  private voidOutstanding(p: Partition, nakDelayMs: number | null): void {
    p.epoch = ++this.epochs;
    if (nakDelayMs !== null) for (const m of p.outstanding.values()) m.nak(nakDelayMs);
    p.outstanding.clear();
    p.tokens.clear();
  }
}
