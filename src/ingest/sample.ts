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
}

/**
 * Largest magnitude a measurement may have: squares and sums of squares of 10^8 such values stay
 * finite in double precision, so no statistic can overflow to Infinity. No physical quantity in any
 * unit a rig reports comes near it.
 */
export const MAX_MAGNITUDE = 1e100;

/** Plausible sample times, epoch milliseconds: 1970 to 2200. */
export const MAX_TIME_MS = 7_258_118_400_000;

export interface DecodeResult {
  samples: Sample[];
  rejections: Rejection[];
}
