import type { StateRecord } from '../core/state/record.js';
import type { ChannelOptions } from './channel-options.js';
import type { ChannelPipelineState } from './channel-pipeline.js';
import { canonicalJson, differingKeys, fingerprint } from './state-record.js';
import type { SteadinessState } from './steadiness.js';

/**
 * A channel's checkpoint: a named, versioned record holding the pipeline's record, the options the
 * state was built under and a fingerprint of those of them that shape the state, and what to do
 * with a checkpoint at restart:
 * - same version, same shaping options: load it (options that only read the state, such as the
 *   target or the confidence, may have changed: the state is carried over to them, and said so);
 * - an older layout with a migration: migrate it, then load it (the log names the versions);
 * - other shaping options, a newer version, an unknown or unreadable record: replay the channel
 *   from its stored samples (the log says why).
 * Never a silent cast: every record's loader checks its name and version (src/core/state/record.ts).
 *
 * Options that shape the state: the window, the lags, the estimator (tau_int drives the detectors'
 * block sizes), the false-alarm budget, whether the detectors run. Options that only read it: the
 * confidence, the target, the rate and the stale time (they decide later verdicts, and a replay
 * would only rewrite events already published).
 */
export interface ChannelRecord extends StateRecord<'channel', 1> {
  /** Every option the state was built under (for the log, when they differ). */
  options: Record<string, unknown>;
  /** Fingerprint of the shaping options. */
  fingerprint: string;
  /** Store index of the pipeline's sample 0 (not 0 only after a rebuild from a history that retention had shortened). */
  seqOffset: number;
  pipeline: ChannelPipelineState;
  /** When the channel was steady (src/engine/steadiness.ts), for derived results. */
  steadiness: SteadinessState;
}

export const SHAPING_OPTIONS = ['window', 'maxLag', 'estimator', 'falseAlarmSamples', 'detectors'] as const;

/** The options as plain data, with defaults made explicit (so an omitted flag and its default compare equal). */
export function plainOptions(options: ChannelOptions): Record<string, unknown> {
  return JSON.parse(canonicalJson({ ...options, detectors: options.detectors ?? true })) as Record<string, unknown>;
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

export function channelRecord(identity: OptionsIdentity, seqOffset: number, pipeline: ChannelPipelineState, steadiness: SteadinessState): ChannelRecord {
  return { record: 'channel', version: 1, options: identity.plain, fingerprint: identity.fingerprint, seqOffset, pipeline, steadiness };
}

export type CheckpointDecision =
  | {
      action: 'load';
      pipeline: ChannelPipelineState;
      seqOffset: number;
      /** Null for a layout that did not keep it (rebuilt from the pipeline's recent events). */
      steadiness: SteadinessState | null;
      /** The record versions migrated through, when the layout was older. */
      migrated: string | null;
      /** Options that changed without changing the state's shape, when any did. */
      carriedOver: string[];
    }
  | { action: 'replay'; reason: string };

/** What to do with a stored checkpoint under the channel's current options (see the module comment). */
export function decideCheckpoint(raw: unknown, options: ChannelOptions, identity: OptionsIdentity = optionsIdentity(options)): CheckpointDecision {
  if (isLegacyPipeline(raw)) {
    // Version 1 of the pipeline's record, from before channel records: positional arrays, no options.
    return { action: 'load', pipeline: migratePipelineV1(raw, options), seqOffset: 0, steadiness: null, migrated: 'channel-pipeline version 1 (positional, options not recorded: taken as the current ones) to version 2', carriedOver: [] };
  }
  const record = raw as Partial<ChannelRecord> | null;
  if (record === null || typeof record !== 'object' || record.record !== 'channel') return { action: 'replay', reason: 'the checkpoint is not a channel record' };
  if (record.version !== 1) return { action: 'replay', reason: `the checkpoint is a channel record of version ${String(record.version)}, which this plateau does not know (it knows version 1)` };
  if (record.fingerprint !== identity.fingerprint) {
    const changed = differingKeys(pick(record.options ?? {}, SHAPING_OPTIONS), pick(identity.plain, SHAPING_OPTIONS));
    return { action: 'replay', reason: `the checkpoint was made under other options (${changed.join(', ') || 'fingerprint'})` };
  }
  let pipeline = record.pipeline as unknown;
  let migrated: string | null = null;
  if (isLegacyPipeline(pipeline)) {
    pipeline = migratePipelineV1(pipeline, options);
    migrated = 'channel-pipeline version 1 to version 2';
  }
  return { action: 'load', pipeline: pipeline as ChannelPipelineState, seqOffset: typeof record.seqOffset === 'number' ? record.seqOffset : 0, steadiness: record.steadiness ?? null, migrated, carriedOver: differingKeys(record.options ?? {}, identity.plain) };
}

function pick(from: Record<string, unknown>, keys: readonly string[]): Record<string, unknown> {
  return Object.fromEntries(keys.map((key) => [key, from[key]]));
}

// ---- version 1 of the pipeline's record (positional arrays) --------------------------------------

interface LegacyPipeline {
  series: { ring: { values: Float64Array; times: Float64Array }; moments: number[]; lags: { committed: Float64Array; addBuffer: Float64Array; removeBuffer: Float64Array; counters: number[] }; pyramid: { levels: ({ sums: Float64Array; numbers: number[] } | null)[]; numbers: number[] }; numbers: number[] };
  numbers: number[];
  phase: ChannelPipelineState['phase'];
  flags: boolean[];
  monitor: (Record<string, unknown> & { numbers: number[] }) | null;
  indicator: ChannelPipelineState['indicator'];
  lastBreak: ChannelPipelineState['lastBreak'];
  recentEvents: ChannelPipelineState['recentEvents'];
}

function isLegacyPipeline(raw: unknown): raw is LegacyPipeline {
  const r = raw as Partial<LegacyPipeline> & { record?: unknown };
  return r !== null && typeof r === 'object' && r.record === undefined && Array.isArray(r.numbers) && Array.isArray(r.flags) && typeof r.series === 'object';
}

/** Version 1 (the positional layout of the first releases) to version 2 (named fields), field by field. */
export function migratePipelineV1(old: LegacyPipeline, options: ChannelOptions): ChannelPipelineState {
  const n = (array: number[], i: number) => array[i] as number;
  const s = old.series;
  const [received, lastValue, lastTime, warmupEnd, excluded, windowOrigin, nextWarmupCheck, nextPrecisionCheck, nextAllanCheck, indicatorBlock, indicatorSum, indicatorCount, eventCount, lastBreakAt, breakNoise, lossStreak, regainedAt] = old.numbers;
  const [precise, stale, lostBefore, averagingLimitSeen] = old.flags;
  const m = old.monitor;
  return {
    record: 'channel-pipeline',
    version: 2,
    series: {
      record: 'windowed-series',
      version: 1,
      ring: { record: 'sample-ring', version: 1, values: s.ring.values, times: s.ring.times },
      moments: { record: 'shifted-moments', version: 1, count: n(s.moments, 0), sum: n(s.moments, 1), sumCompensation: n(s.moments, 2), sumSquares: n(s.moments, 3), sumSquaresCompensation: n(s.moments, 4) },
      lags: { record: 'lagged-products', version: 1, committed: s.lags.committed, addBuffer: s.lags.addBuffer, removeBuffer: s.lags.removeBuffer, history: n(s.lags.counters, 0), pendingAdds: n(s.lags.counters, 1), pendingRemoves: n(s.lags.counters, 2), windowLength: n(s.lags.counters, 3) },
      pyramid: {
        record: 'block-pyramid',
        version: 1,
        levels: s.pyramid.levels.map((level) =>
          level === null ? null : { sums: level.sums, frontBlock: n(level.numbers, 0), total: n(level.numbers, 1), totalSquares: n(level.numbers, 2), neighbourProducts: n(level.numbers, 3), carrySum: n(level.numbers, 4), carryBlock: n(level.numbers, 5) },
        ),
        rawCarry: n(s.pyramid.numbers, 0),
        rawCarryIndex: n(s.pyramid.numbers, 1),
        windowStart: n(s.pyramid.numbers, 2),
      },
      anchor: n(s.numbers, 0),
      firstIndex: n(s.numbers, 1),
      nextIndex: n(s.numbers, 2),
      removalsSinceRebuild: n(s.numbers, 3),
      nextAnchorCheck: n(s.numbers, 4),
      pollution: n(s.numbers, 5),
      lastLargeIndex: n(s.numbers, 6),
      // The first releases did not record grown lags: the configured ones.
      maxLag: s.numbers[7] ?? options.maxLag,
    },
    received: received as number,
    lastValue: lastValue as number,
    lastTime: lastTime as number,
    warmupEnd: (warmupEnd as number) >= 0 ? (warmupEnd as number) : null,
    excluded: excluded as number,
    windowOrigin: windowOrigin as number,
    nextWarmupCheck: nextWarmupCheck as number,
    nextPrecisionCheck: nextPrecisionCheck as number,
    nextAllanCheck: nextAllanCheck as number,
    indicatorBlock: indicatorBlock as number,
    indicatorSum: indicatorSum as number,
    indicatorCount: indicatorCount as number,
    eventCount: eventCount as number,
    lastBreakAt: lastBreakAt as number,
    breakNoise: breakNoise as number,
    lossStreak: lossStreak as number,
    regainedAt: regainedAt as number,
    phase: old.phase,
    precise: precise as boolean,
    stale: stale as boolean,
    lostBefore: lostBefore as boolean,
    averagingLimitSeen: averagingLimitSeen as boolean,
    monitor:
      m === null
        ? null
        : ({
            record: 'stationarity-monitor',
            version: 1,
            settings: m.settings,
            cusum: m.cusum,
            blockSum: n(m.numbers, 0),
            blockCount: n(m.numbers, 1),
            blockStart: n(m.numbers, 2),
            historyLength: n(m.numbers, 3),
            historyStart: n(m.numbers, 4),
            blocks: n(m.numbers, 5),
            referenceMean: n(m.numbers, 6),
            origin: n(m.numbers, 7),
            history: m.history,
            trace: m.trace,
            traceCount: m.traceCount,
          } as ChannelPipelineState['monitor']),
    indicator: old.indicator,
    lastBreak: old.lastBreak,
    recentEvents: old.recentEvents,
  };
}
