import type { SubscriptionConfig } from '../config/plateau-config.js';

/**
 * The sample-source port: where measurement messages come from (MQTT, or the partitions of a
 * JetStream stream with durable positions). Implementations: MqttSampleSource,
 * JetStreamSampleSource and MemorySampleSource (src/ingest, the last for tests and embedding);
 * test/contract/sample-source.contract.ts runs the same suite against each.
 *
 * A source hands out batches of deliveries, each batch with one acknowledgement token. The daemon
 * acknowledges a token only after the samples of its batch are committed to the store; until then
 * the source must be able to deliver the batch again (after a reconnect or a restart). Contract:
 * - every delivery carries its topic, its payload, the configured subscription it matched (null
 *   when none does) and its position in the source; positions of one log increase;
 * - `acknowledge(tokens)` releases exactly those batches (a token twice, or a token from before a
 *   reconnect, is ignored: the source redelivers what the old connection held);
 * - a batch that is never acknowledged is delivered again by a new connection or a new instance
 *   with the same identity; delivery is at least once: an acknowledgement still on its way when
 *   the connection drops is lost with it, and that batch comes again too (the daemon's duplicate
 *   rule recognises it);
 * - `start` resolves once connected and subscribed, or after a bounded wait when the far end is
 *   down (the source then keeps trying in the background); `stop` resolves once disconnected and
 *   never acknowledges.
 */
export interface SourcePosition {
  /**
   * The log the sequence belongs to, stable across restarts (what a durable position is stored
   * under): the source's name, or for a partitioned source one partition's log, `<name>/p<p>`
   * (JetStreamSampleSource); positions increase per log.
   */
  source: string;
  /** Increases with every delivery of the source. */
  sequence: number;
  /**
   * True when the sequence survives a restart of the far end (a stream sequence) and the source
   * can resume after it; false when it only orders deliveries within this connection (MQTT: the
   * broker's persistent session is what resumes).
   */
  durable: boolean;
}

/** Opaque: only the source that issued a token can read it. */
export interface AckToken {
  readonly source: string;
}

export interface SourceDelivery {
  topic: string;
  payload: Uint8Array;
  /** The most specific configured subscription whose filter matches the topic; null when none does. */
  subscription: SubscriptionConfig | null;
  position: SourcePosition;
}

export interface SourceBatch {
  deliveries: SourceDelivery[];
  token: AckToken;
}

export interface SourceHandlers {
  /** Called once per batch, in the order the source received them. */
  batch(batch: SourceBatch): void;
  connection(connected: boolean, detail: string): void;
  error(error: Error): void;
}

export interface SourceStatus {
  connected: boolean;
  /** Reconnection attempts since start. */
  reconnects: number;
  /** Batches handed out and not yet acknowledged. */
  unacknowledged: number;
}

export interface SampleSource {
  readonly name: string;
  /** `resumeAfter`: the last committed position, for a durable source (others ignore it). */
  start(handlers: SourceHandlers, resumeAfter: SourcePosition | null): Promise<void>;
  /** Acknowledges the batches of these tokens; returns how many acknowledgements were sent. */
  acknowledge(tokens: readonly AckToken[]): number;
  status(): SourceStatus;
  stop(): Promise<void>;
}
