import { afterEach, describe, expect, it } from 'vitest';
import type { SubscriptionConfig } from '../../src/config/plateau-config.js';
import { DECODER_DEFAULTS } from '../../src/config/decoder-spec.js';
import type { AckToken, SampleSource, SourceBatch, SourceHandlers } from '../../src/ports/sample-source.js';
import { waitFor } from '../helpers/brokers.js';

/**
 * The sample-source port's contract (src/ports/sample-source.ts), run against every implementation
 * by test/contract/sample-source.test.ts. A factory gives a source subscribed to `subscriptions`,
 * a way to publish to it as a rig would, a way to drop its connection (it reconnects by itself),
 * and a new source with the same identity (the next process of the daemon).
 */
export interface SourceUnderTest {
  source: SampleSource;
  publish(topic: string, payload: string): Promise<void>;
  dropConnection(): Promise<void>;
  /** A new source of the same identity (the old one stopped first by the test). */
  again(): SampleSource;
  close(): Promise<void>;
}

export type SourceFactory = (prefix: string, subscriptions: SubscriptionConfig[]) => Promise<SourceUnderTest>;

interface Recorder extends SourceHandlers {
  batches: SourceBatch[];
  payloads(): string[];
}

function recorder(): Recorder {
  const batches: SourceBatch[] = [];
  return {
    batches,
    batch: (batch) => batches.push(batch),
    connection: () => undefined,
    error: () => undefined,
    payloads: () => batches.flatMap((b) => b.deliveries.map((d) => Buffer.from(d.payload).toString())),
  };
}

export function sampleSourceContract(name: string, make: SourceFactory, available: () => boolean = () => true): void {
  describe(`the sample-source port: ${name}`, () => {
    let counter = 0;
    const open: SourceUnderTest[] = [];
    const setup = async () => {
      const prefix = `contract-${process.pid}-${Date.now().toString(36)}-${counter++}`;
      const subscriptions: SubscriptionConfig[] = [
        { ...DECODER_DEFAULTS, topic: `${prefix}/+`, format: 'json', channel: '{2}' },
        { ...DECODER_DEFAULTS, topic: `${prefix}/special`, format: 'number', channel: 'special' },
      ];
      const under = await make(prefix, subscriptions);
      open.push(under);
      return { prefix, subscriptions, under };
    };
    afterEach(async () => {
      for (const under of open.splice(0)) await under.close();
    });

    it('delivers each message once while connected: topic, payload, the most specific subscription, positions that increase', async (context) => {
      if (!available()) return context.skip();
      const { prefix, subscriptions, under } = await setup();
      const seen = recorder();
      // Acknowledged as they come: a broker holds back what exceeds its window of unacknowledged messages (Mosquitto's is 20).
      const batch = seen.batch;
      seen.batch = (b) => {
        batch(b);
        under.source.acknowledge([b.token]);
      };
      await under.source.start(seen, null);
      await waitFor(() => under.source.status().connected, 5000, 'the source to connect');
      for (let i = 0; i < 20; i++) await under.publish(`${prefix}/a`, `{"v":${i}}`);
      await under.publish(`${prefix}/special`, '42');
      await waitFor(() => seen.batches.length >= 21, 5000, '21 batches');
      await new Promise((resolve) => setTimeout(resolve, 100));
      expect(seen.payloads()).toEqual([...Array.from({ length: 20 }, (_, i) => `{"v":${i}}`), '42']);
      const deliveries = seen.batches.flatMap((b) => b.deliveries);
      expect(deliveries.slice(0, 20).every((d) => d.topic === `${prefix}/a` && d.subscription === subscriptions[0])).toBe(true);
      expect(deliveries[20]?.subscription).toBe(subscriptions[1]);
      // Positions increase per log: the source's own, or one partition's (`<name>/<partition>`, a partitioned source).
      const positions = deliveries.map((d) => d.position);
      const last = new Map<string, number>();
      for (const p of positions) {
        expect(p.sequence).toBeGreaterThan(last.get(p.source) ?? Number.NEGATIVE_INFINITY);
        last.set(p.source, p.sequence);
      }
      expect(positions.every((p) => p.source === under.source.name || p.source.startsWith(`${under.source.name}/`))).toBe(true);
      expect(seen.batches.every((b) => b.token.source === under.source.name)).toBe(true);
    });

    it('what is not acknowledged is delivered again to the next source of the same identity; what is, is not', async (context) => {
      if (!available()) return context.skip();
      const { prefix, under } = await setup();
      const first = recorder();
      await under.source.start(first, null);
      await waitFor(() => under.source.status().connected, 5000, 'the source to connect');
      for (let i = 0; i < 10; i++) await under.publish(`${prefix}/a`, `{"v":${i}}`);
      await waitFor(() => first.batches.length >= 10, 5000, '10 batches');
      const acknowledged = first.batches.filter((_, i) => i % 2 === 0);
      expect(under.source.acknowledge(acknowledged.map((b) => b.token))).toBe(5);
      expect(under.source.status().unacknowledged).toBe(5);
      await under.source.stop();
      const again = under.again();
      const second = recorder();
      await again.start(second, null);
      await waitFor(() => second.batches.length >= 5, 10_000, 'the 5 unacknowledged batches again');
      await new Promise((resolve) => setTimeout(resolve, 300));
      expect(second.payloads().sort()).toEqual([1, 3, 5, 7, 9].map((v) => `{"v":${v}}`));
      again.acknowledge(second.batches.map((b) => b.token));
      await again.stop();
    });

    it('a token acknowledged twice, or from before a reconnect, is ignored; after a reconnect the unacknowledged batches come again', async (context) => {
      if (!available()) return context.skip();
      const { prefix, under } = await setup();
      const seen = recorder();
      await under.source.start(seen, null);
      await waitFor(() => under.source.status().connected, 5000, 'the source to connect');
      for (let i = 0; i < 6; i++) await under.publish(`${prefix}/a`, `{"v":${i}}`);
      await waitFor(() => seen.batches.length >= 6, 5000, '6 batches');
      const tokens: AckToken[] = seen.batches.map((b) => b.token);
      expect(under.source.acknowledge(tokens.slice(0, 2))).toBe(2);
      expect(under.source.acknowledge(tokens.slice(0, 2))).toBe(0);
      // Let the two acknowledgements reach the far end before the connection drops (one still on
      // its way would be lost with it, and its batch come again: at least once).
      await new Promise((resolve) => setTimeout(resolve, 200));
      await under.dropConnection();
      await waitFor(() => seen.batches.length >= 10, 10_000, 'the 4 unacknowledged batches again after the reconnect');
      expect(under.source.acknowledge(tokens.slice(2))).toBe(0);
      expect(seen.payloads().slice(6).sort()).toEqual([2, 3, 4, 5].map((v) => `{"v":${v}}`));
      expect(under.source.acknowledge(seen.batches.slice(6).map((b) => b.token))).toBe(4);
      expect(under.source.status()).toMatchObject({ connected: true, unacknowledged: 0 });
      expect(under.source.status().reconnects).toBeGreaterThanOrEqual(1);
    });

    it('stop resolves and acknowledges nothing', async (context) => {
      if (!available()) return context.skip();
      const { prefix, under } = await setup();
      const seen = recorder();
      await under.source.start(seen, null);
      await waitFor(() => under.source.status().connected, 5000, 'the source to connect');
      await under.publish(`${prefix}/a`, '{"v":1}');
      await waitFor(() => seen.batches.length >= 1, 5000, 'a batch');
      await under.source.stop();
      expect(under.source.status().connected).toBe(false);
      const again = under.again();
      const second = recorder();
      await again.start(second, null);
      await waitFor(() => second.batches.length >= 1, 10_000, 'the batch again');
      again.acknowledge(second.batches.map((b) => b.token));
      await again.stop();
    });
  });
}
