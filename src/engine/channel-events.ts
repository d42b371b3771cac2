import type { BreakCause } from './stationarity-monitor.js';
import type { CriterionEvent } from './criteria/criteria-events.js';
import type { DecisionRuleKind, Verdict } from '../core/conformity/decision-rule.js';

/**
 * What a channel tells the world. Events are edge-triggered: each marks a change of state, once.
 * `at` is the 0-based index of the sample that caused it, counted from the channel's first sample
 * (in `plateau analyze`, the channel's first accepted cell).
 */
export type ChannelState = 'warming' | 'steady' | 'precise' | 'unsteady' | 'stale';

export type ChannelEvent =
  | { kind: 'steady'; at: number; warmupEnd: number; excluded: number }
  | { kind: 'stationarity-regained'; at: number; warmupEnd: number; excluded: number }
  | { kind: 'precision-reached'; at: number; standardUncertainty: number; expandedUncertainty: number | null; bound: number }
  | { kind: 'stationarity-lost'; at: number; cause: BreakCause; changePoint: number; detail: string; slope?: { perSample: number; standardUncertainty: number } }
  | { kind: 'break-revised'; at: number; cause: BreakCause; changePoint: number; slope?: { perSample: number; standardUncertainty: number }; warmup?: boolean }
  | { kind: 'warmup-extended'; at: number; warmupEnd: number; excluded: number }
  | { kind: 'steady-withdrawn'; at: number; reason: string }
  | { kind: 'averaging-limit'; at: number; m: number; tauSeconds: number | null; adev: number }
  | { kind: 'conformity-changed'; at: number; verdict: Verdict; previous: Verdict | null; rule: DecisionRuleKind; probability: number | null; value: number; expandedUncertainty: number | null }
  | { kind: 'stale'; at: number; silentSeconds: number }
  | { kind: 'fresh'; at: number }
  /** A stability rule starts or stops holding (src/engine/criteria/criteria-events.ts). */
  | CriterionEvent;

export type EventKind = ChannelEvent['kind'];
