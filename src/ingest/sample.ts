/** One accepted measurement: a channel, a time (epoch milliseconds) and a finite value. */
export interface Sample {
  channel: string;
  timeMs: number;
  value: number;
  unit?: string;
  /** The time came from the payload (true) or is the arrival time (false). */
  stamped: boolean;
}

/** Why a payload, or part of one, was not accepted. Counted per reason; listed in the README. */
export const REJECT_REASONS = [
  'too-large',
  'unparseable',
  'too-deep',
  'wrong-type',
  'missing-field',
  'not-a-number',
  'nan',
  'infinite',
  'out-of-range',
  'bad-time',
  'bad-channel',
  'unknown-topic',
  'too-many-samples',
  'bad-frame',
  'unknown-alias',
  'bad-sequence',
  'stale-death',
  'duplicate',
  'out-of-order',
  'redelivered',
  'engine-error',
] as const;
export type RejectReason = (typeof REJECT_REASONS)[number];

export interface Rejection {
  reason: RejectReason;
  /** Where and what, for the log: "topic rig/hx1/inlet: record 3 field v is a string". */
  detail: string;
  /** The channel the refused sample was for, when the payload named one before it failed (counted per channel too). */
  channel?: string;
}

/**
 * Largest magnitude a measurement may have: squares and sums of squares of 10^8 such values stay
 * finite in double precision, so no statistic can overflow to Infinity. No physical quantity in any
 * unit a rig reports comes near it.
 */
export const MAX_MAGNITUDE = 1e100;

/** Plausible sample times, epoch milliseconds: 1970 to 2200. */
export const MAX_TIME_MS = 7_258_118_400_000;

/**
 * Samples of one channel decoded into typed arrays (binary frames; SenML packs in the daemon): no object per sample. Entries
 * 0 .. length-1 hold the samples, in order.
 */
export interface SampleBlock {
  channel: string;
  unit?: string;
  /** Epoch milliseconds. */
  times: Float64Array;
  values: Float64Array;
  length: number;
  stamped: boolean;
}

/** What a message asks of the daemon besides its samples. */
export interface DecodeEffects {
  /** Messages to publish (rebirth requests). */
  publish: { topic: string; payload: Uint8Array }[];
  /** Channels to mark stale at once, and why. */
  stale: { channels: string[]; cause: string }[];
  /** Messages lost by a sequence number, and the channels of the node that lost them. */
  sequenceGaps: { node: string; missing: number; channels: string[]; timeMs: number }[];
}

export interface DecodeResult {
  samples: Sample[];
  rejections: Rejection[];
  /** Samples decoded as blocks (they come after `samples` in arrival order). */
  blocks?: SampleBlock[];
  /** What the message asks of the daemon besides its samples (Sparkplug B). */
  effects?: DecodeEffects;
}
