/**
 * How a subscription's payloads are read: part of the configuration (src/ingest/payload-decoder.ts
 * reads payloads by it). Kept here so that the configuration depends on nothing in ingest.
 */
export const DECODER_FORMATS = ['number', 'json', 'senml', 'senml-cbor', 'binary', 'sparkplug'] as const;
export type DecoderFormat = (typeof DECODER_FORMATS)[number];

export interface DecoderSpec {
  format: DecoderFormat;
  /** Channel name: a template over topic levels ({1} is the first level, {topic} the whole topic) and {name} (the SenML name, the binary frame's channel id). */
  channel: string;
  /** Dot path of the value in a JSON object. */
  valueField: string;
  /** Dot path of the time in a JSON object (absent: arrival time). */
  timeField: string | null;
  /** Unit of numeric times in JSON payloads. */
  timeUnit: 's' | 'ms';
  /** Dot path of an array of sample objects inside a JSON object (many samples per message). */
  samplesField: string | null;
  /** Dot path of a per-sample channel suffix or name in JSON objects ({field} in the template). */
  channelField: string | null;
  /** Fixed unit, or null to take it from SenML. */
  unit: string | null;
  maxBytes: number;
  maxDepth: number;
  maxSamples: number;
  /** Sparkplug B: send a rebirth request (NCMD) to a node that needs one. */
  sparkplug: { requestRebirth: boolean };
}

export const DECODER_DEFAULTS: Omit<DecoderSpec, 'format' | 'channel'> = {
  valueField: 'v',
  timeField: 't',
  timeUnit: 's',
  samplesField: null,
  channelField: null,
  unit: null,
  maxBytes: 262_144, // bytes
  maxDepth: 8,
  maxSamples: 10_000,
  sparkplug: { requestRebirth: false },
};

