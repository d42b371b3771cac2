import { afterEach, describe, expect, it } from 'vitest';
import type { Publisher } from '../../src/ports/publisher.js';
import type { StoredEvent } from '../../src/ports/store.js';
import { waitFor } from '../helpers/brokers.js';

/**
 * The publisher port's contract (src/ports/publisher.ts), run against every implementation by
 * test/contract/publisher.test.ts. A factory gives a publisher and a way to follow it as a consumer
 * would (an MQTT subscriber, an in-process listener), and one whose transport is down.
 */
export interface Follower {
  events: Record<string, unknown>[];
  volatile: Record<string, unknown>[];
  /** Every status message seen, per subject, in order. */
  statuses: Map<string, Record<string, unknown>[]>;
  close(): Promise<void>;
}

export interface PublisherUnderTest {
  publisher: Publisher;
  follow(): Promise<Follower>;
  /** A publisher of the same kind whose transport is down (or was never up). */
  down(): Promise<Publisher>;
  close(): Promise<void>;
}

const event = (id: number, kind: string, source = 'hx7.glycol_in_degC'): StoredEvent => ({ id, timeMs: 1_790_000_000_000 + id, source, kind, at: id * 10, body: { channel: source, detail: `event ${id}`, nested: { values: [1, 2.5] } } });

export function publisherContract(name: string, make: () => Promise<PublisherUnderTest>, available: () => boolean = () => true): void {
  describe(`the publisher port: ${name}`, () => {
    const open: PublisherUnderTest[] = [];
    const followers: Follower[] = [];
    const setup = async () => {
      const under = await make();
      open.push(under);
      return under;
    };
    const follow = async (under: PublisherUnderTest) => {
      const follower = await under.follow();
      followers.push(follower);
      return follower;
    };
    afterEach(async () => {
      for (const follower of followers.splice(0)) await follower.close();
      for (const under of open.splice(0)) await under.close();
    });

    it('committed events reach a follower once each, in id order, with their kind, source, index and body intact', async (context) => {
      if (!available()) return context.skip();
      const under = await setup();
      const follower = await follow(under);
      const events = Array.from({ length: 30 }, (_, i) => event(i + 1, i % 3 === 0 ? 'steady' : 'stale'));
      for (const e of events) under.publisher.event(e);
      await waitFor(() => follower.events.length >= 30, 5000, '30 events');
      await new Promise((resolve) => setTimeout(resolve, 100));
      expect(follower.events).toEqual(events);
    });

    it('a volatile event reaches a follower at once, marked as not stored', async (context) => {
      if (!available()) return context.skip();
      const under = await setup();
      const follower = await follow(under);
      under.publisher.volatileEvent({ timeMs: 1_790_000_000_000, source: 'daemon', kind: 'store-failing', body: { error: { code: 'ERR_STORE_FULL' } } });
      await waitFor(() => follower.volatile.length >= 1, 5000, 'the volatile event');
      expect(follower.volatile[0]).toMatchObject({ source: 'daemon', kind: 'store-failing', body: { error: { code: 'ERR_STORE_FULL' } } });
      expect(follower.volatile[0]?.id ?? null).toBeNull();
      expect(follower.events).toEqual([]);
    });

    it('status: a status equal to the last one is not sent again; a follower that comes later gets the newest of each subject', async (context) => {
      if (!available()) return context.skip();
      const under = await setup();
      const early = await follow(under);
      under.publisher.status('channel/hx7.flow', { state: 'warming', n: 1 });
      under.publisher.status('channel/hx7.flow', { state: 'warming', n: 1 });
      under.publisher.status('channel/hx7.flow', { state: 'steady', n: 2 });
      under.publisher.status('test-point/sp-3', { state: 'running' });
      await waitFor(() => (early.statuses.get('channel/hx7.flow')?.length ?? 0) >= 2 && early.statuses.has('test-point/sp-3'), 5000, 'the statuses');
      await new Promise((resolve) => setTimeout(resolve, 100));
      expect(early.statuses.get('channel/hx7.flow')).toEqual([{ state: 'warming', n: 1 }, { state: 'steady', n: 2 }]);
      const late = await follow(under);
      await waitFor(() => late.statuses.has('channel/hx7.flow') && late.statuses.has('test-point/sp-3'), 5000, 'the newest statuses');
      expect(late.statuses.get('channel/hx7.flow')?.at(-1)).toEqual({ state: 'steady', n: 2 });
      expect(late.statuses.get('test-point/sp-3')?.at(-1)).toEqual({ state: 'running' });
    });

    it('nothing throws, with no follower or with the transport down', async (context) => {
      if (!available()) return context.skip();
      const under = await setup();
      const down = await under.down();
      for (const publisher of [under.publisher, down]) {
        expect(() => {
          publisher.event(event(1, 'steady'));
          publisher.volatileEvent({ timeMs: 1, source: 'daemon', kind: 'store-failing', body: {} });
          publisher.status('daemon', { status: 'failing' });
        }).not.toThrow();
      }
    });
  });
}
