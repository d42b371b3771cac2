import type { SourceBatch } from '../ports/sample-source.js';

/**
 * Exactly-once state on at-least-once delivery: a delivery from a durable log (a JetStream
 * partition) whose sequence this daemon has already taken, or committed before a restart, is a
 * redelivery and is skipped; its batch's token still joins the pending batch, so it is
 * acknowledged once the commit that holds the original (or a later one) succeeded.
 *
 * Per log (a position's `source`): the highest sequence taken, which starts at the committed
 * position the store holds (read once per log).
 */
export class DeliveryFence {
  private readonly taken = new Map<string, number>();
  private readonly committed: (source: string) => number;
  /** Deliveries skipped as redeliveries. */
  skipped = 0;

  constructor(committed: (source: string) => number) {
    this.committed = committed;
  }

  /** The highest sequence of a log this daemon's state covers (taken or committed). */
  covered(source: string): number {
    let seq = this.taken.get(source);
    if (seq === undefined) {
      seq = this.committed(source);
      this.taken.set(source, seq);
    }
    return seq;
  }

  /** The state now covers the log up to `seq` (restored from a shared checkpoint taken there). */
  advance(source: string, seq: number): void {
    if (seq > this.covered(source)) this.taken.set(source, seq);
  }

  /** The batch without its redeliveries (the same token). */
  filter(batch: SourceBatch): SourceBatch {
    let kept = batch.deliveries;
    for (let i = 0; i < batch.deliveries.length; i++) {
      const d = batch.deliveries[i] as SourceBatch['deliveries'][number];
      if (!d.position.durable) continue;
      const covered = this.covered(d.position.source);
      if (d.position.sequence <= covered) {
        if (kept === batch.deliveries) kept = batch.deliveries.slice(0, i);
        this.skipped++;
        continue;
      }
      this.taken.set(d.position.source, d.position.sequence);
      if (kept !== batch.deliveries) kept.push(d);
    }
    return kept === batch.deliveries ? batch : { deliveries: kept, token: batch.token };
  }
}
