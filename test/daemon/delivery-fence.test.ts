import { describe, expect, it } from 'vitest';
import { DeliveryFence } from '../../src/daemon/delivery-fence.js';
import type { SourceBatch, SourceDelivery } from '../../src/ports/sample-source.js';

// The delivery fence: a sequence of a durable log at or below what the daemon committed (before a
// restart) or took (since) is a redelivery, skipped; its token stays so that it is acknowledged.

function delivery(source: string, sequence: number, durable = true): SourceDelivery {
  return { topic: 'lab/rigA/c0', payload: new Uint8Array(), subscription: null, position: { source, sequence, durable } };
}

function batch(...deliveries: SourceDelivery[]): SourceBatch {
  return { deliveries, token: { source: 'jetstream/LAB' } };
}

describe('the delivery fence', () => {
  it('skips what the store committed before the restart, per log, and what was taken since', () => {
    const committed: Record<string, number> = { 'jetstream/LAB/p0': 10 };
    const fence = new DeliveryFence((source) => committed[source] ?? 0);
    const first = fence.filter(batch(delivery('jetstream/LAB/p0', 9), delivery('jetstream/LAB/p0', 10), delivery('jetstream/LAB/p0', 11), delivery('jetstream/LAB/p1', 1)));
    expect(first.deliveries.map((d) => `${d.position.source}#${d.position.sequence}`)).toEqual(['jetstream/LAB/p0#11', 'jetstream/LAB/p1#1']);
    expect(first.token.source).toBe('jetstream/LAB');
    expect(fence.skipped).toBe(2);
    // A redelivery of what was taken but not yet committed (a reconnect) is skipped too.
    const again = fence.filter(batch(delivery('jetstream/LAB/p0', 11), delivery('jetstream/LAB/p0', 12)));
    expect(again.deliveries.map((d) => d.position.sequence)).toEqual([12]);
    expect(fence.covered('jetstream/LAB/p0')).toBe(12);
    expect(fence.covered('jetstream/LAB/p1')).toBe(1);
    expect(fence.covered('jetstream/LAB/p2')).toBe(0);
    // An all-skipped batch keeps its token (acknowledged after the next commit).
    const empty = fence.filter(batch(delivery('jetstream/LAB/p1', 1)));
    expect(empty.deliveries).toEqual([]);
    expect(empty.token.source).toBe('jetstream/LAB');
  });

  it('passes positions that are not durable (MQTT) untouched, the same batch object', () => {
    const fence = new DeliveryFence(() => 100);
    const b = batch(delivery('mqtt', 1, false), delivery('mqtt', 1, false));
    expect(fence.filter(b)).toBe(b);
    expect(fence.skipped).toBe(0);
  });
});
