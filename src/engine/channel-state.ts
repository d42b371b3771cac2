import type { StateRecord } from '../core/state/record.js';
import type { ChannelOptions } from './channel-options.js';
import { PIPELINE_STATE_VERSION, type ChannelPipelineState } from './channel-pipeline.js';
import { canonicalJson, differingKeys, fingerprint } from './state-record.js';
import type { SteadinessState } from './steadiness.js';
import type { ChannelCriteriaState } from './criteria/channel-criteria.js';

/**
 * A channel's checkpoint: a named, versioned record holding the pipeline's record, the options the
 * state was built under and a fingerprint of those of them that shape the state, and what to do
 * with a checkpoint at restart:
 * - same version, same shaping options: load it (options that only read the state, such as the
 *   target or the confidence, may have changed: the state is carried over to them, and said so);
 * - a pipeline record written by an earlier engine: replay (see EARLIER_ENGINE);
 * - other shaping options, a newer version, an unknown or unreadable record: replay the channel
 *   from its stored samples (the log says why).
 * Never a silent cast: every record's loader checks its name and version (src/core/state/record.ts).
 *
 * Options that shape the state: the window, the lags, the estimator (tau_int drives the detectors'
 * block sizes), the warm-up setting, the false-alarm budget, whether the detectors run. Options that only read it: the
 * confidence, the target, the rate and the stale time (they decide later verdicts, and a replay
 * would only rewrite events already published).
 */
/** Version 3: the test points' windows over the channel (src/engine/channel.ts). */
export interface ChannelWindowsState {
  attached: string[];
  lastRestartAt: number;
  forks: { id: string; pipeline: ChannelPipelineState; criteria: ChannelCriteriaState | null }[];
}

export interface ChannelRecord extends StateRecord<'channel', 1 | 2 | 3> {
  /** Every option the state was built under (for the log, when they differ). */
  options: Record<string, unknown>;
  /** Fingerprint of the shaping options. */
  fingerprint: string;
  /** Store index of the pipeline's sample 0 (not 0 only after a rebuild from a history that retention had shortened). */
  seqOffset: number;
  pipeline: ChannelPipelineState;
  /** When the channel was steady (src/engine/steadiness.ts), for derived results. */
  steadiness: SteadinessState;
  /**
   * Version 2: the stability rules' tracker (its own named, versioned record with the fingerprint
   * of its rules), null without rules. Version 1 has none: loaded as it is when the channel has no
   * rules, replayed from the stored samples when it has (the rules need the readings).
   */
  criteria?: ChannelCriteriaState | null;
  /**
   * Version 3: the test points' own windows (attached to the pipeline, or forked from it). Versions
   * 1 and 2 have none, which is what they were: before version 3 no test point had a window of its
   * own (a test point started then reads the channel's pipeline).
   */
  windows?: ChannelWindowsState;
}

/** The channel record this plateau writes. */
export const CHANNEL_RECORD_VERSION = 3;

export const SHAPING_OPTIONS = ['window', 'maxLag', 'estimator', 'warmup', 'falseAlarmSamples', 'detectors'] as const;

/** The options as plain data, with defaults made explicit (so an omitted flag and its default compare equal). */
export function plainOptions(options: ChannelOptions): Record<string, unknown> {
  return JSON.parse(canonicalJson({ ...options, warmup: options.warmup ?? { mode: 'auto' }, detectors: options.detectors ?? true })) as Record<string, unknown>;
}

export function shapingFingerprint(options: ChannelOptions): string {
  const plain = plainOptions(options);
  return fingerprint(Object.fromEntries(SHAPING_OPTIONS.map((key) => [key, plain[key]])));
}

/** A channel's options as its records carry them: plain, and the fingerprint of the shaping ones (computed once per channel). */
export interface OptionsIdentity {
  plain: Record<string, unknown>;
  fingerprint: string;
}

export function optionsIdentity(options: ChannelOptions): OptionsIdentity {
  return { plain: plainOptions(options), fingerprint: shapingFingerprint(options) };
}

export function channelRecord(identity: OptionsIdentity, seqOffset: number, pipeline: ChannelPipelineState, steadiness: SteadinessState, criteria: ChannelCriteriaState | null = null, windows: ChannelWindowsState = { attached: [], lastRestartAt: -1, forks: [] }): ChannelRecord {
  return { record: 'channel', version: CHANNEL_RECORD_VERSION, options: identity.plain, fingerprint: identity.fingerprint, seqOffset, pipeline, steadiness, criteria, windows };
}

export type CheckpointDecision =
  | {
      action: 'load';
      pipeline: ChannelPipelineState;
      seqOffset: number;
      /** Null for a layout that did not keep it (rebuilt from the pipeline's recent events). */
      steadiness: SteadinessState | null;
      /** Options that changed without changing the state's shape, when any did. */
      carriedOver: string[];
      /** The stability rules' state (null: none saved); the channel replays when it does not fit its rules. */
      criteria: ChannelCriteriaState | null;
      /** The test points' windows (null before version 3: none). */
      windows: ChannelWindowsState | null;
    }
  | { action: 'replay'; reason: string };

/**
 * Pipeline records of versions 1 (positional) and 2 (named) were written by the engine before the
 * verdict's warm-up fit, spectral diagnosis and break revision: their phase, warm-up cut and
 * detector state are that engine's decisions, which this one does not share, and no change of
 * layout turns them into this engine's. Such a channel is replayed from its stored samples, which
 * gives exactly the state an uninterrupted run of this engine would have.
 */
const EARLIER_ENGINE = (version: number): string =>
  `the checkpoint was made by an earlier engine (channel-pipeline version ${version}${version === 1 ? ', positional' : ''}; this plateau writes version ${PIPELINE_STATE_VERSION}), whose warm-up and break decisions this one does not share`;

/** What to do with a stored checkpoint under the channel's current options (see the module comment). */
export function decideCheckpoint(raw: unknown, options: ChannelOptions, identity: OptionsIdentity = optionsIdentity(options)): CheckpointDecision {
  // Version 1 of the pipeline's record, from before channel records: positional arrays, no options.
  if (isLegacyPipeline(raw)) return { action: 'replay', reason: EARLIER_ENGINE(1) };
  const record = raw as Partial<ChannelRecord> | null;
  if (record === null || typeof record !== 'object' || record.record !== 'channel') return { action: 'replay', reason: 'the checkpoint is not a channel record' };
  if (record.version !== 1 && record.version !== 2 && record.version !== CHANNEL_RECORD_VERSION) return { action: 'replay', reason: `the checkpoint is a channel record of version ${String(record.version)}, which this plateau does not know (it knows versions 1 to ${CHANNEL_RECORD_VERSION})` };
  if (record.fingerprint !== identity.fingerprint) {
    const changed = differingKeys(pick(record.options ?? {}, SHAPING_OPTIONS), pick(identity.plain, SHAPING_OPTIONS));
    return { action: 'replay', reason: `the checkpoint was made under other options (${changed.join(', ') || 'fingerprint'})` };
  }
  const pipeline = record.pipeline as Partial<StateRecord> | undefined;
  if (isLegacyPipeline(pipeline)) return { action: 'replay', reason: EARLIER_ENGINE(1) };
  if (pipeline?.record === 'channel-pipeline' && typeof pipeline.version === 'number' && pipeline.version < PIPELINE_STATE_VERSION) return { action: 'replay', reason: EARLIER_ENGINE(pipeline.version) };
  const rules = options.criteria?.rules.length ?? 0;
  if (record.version === 1 && rules > 0) return { action: 'replay', reason: 'the checkpoint (channel record version 1) holds no state of the stability rules now configured' };
  return {
    action: 'load',
    pipeline: record.pipeline as ChannelPipelineState,
    seqOffset: typeof record.seqOffset === 'number' ? record.seqOffset : 0,
    steadiness: record.steadiness ?? null,
    carriedOver: differingKeys(record.options ?? {}, identity.plain),
    criteria: record.criteria ?? null,
    windows: record.windows ?? null,
  };
}

function pick(from: Record<string, unknown>, keys: readonly string[]): Record<string, unknown> {
  return Object.fromEntries(keys.map((key) => [key, from[key]]));
}

// ---- layouts written by earlier engines ----------------------------------------------------------

/** Version 1 of the pipeline's record (the first releases): positional arrays, no record name. */
function isLegacyPipeline(raw: unknown): boolean {
  const r = raw as { record?: unknown; numbers?: unknown; flags?: unknown; series?: unknown } | null;
  return r !== null && typeof r === 'object' && r.record === undefined && Array.isArray(r.numbers) && Array.isArray(r.flags) && typeof r.series === 'object';
}
