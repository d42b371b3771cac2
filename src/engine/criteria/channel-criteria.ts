import type { CriterionSpec } from '../../core/criteria/criterion-spec.js';
import { CriteriaTracker, type CriteriaTrackerState, type CriterionState } from './criteria-tracker.js';
import { combineReadiness, defaultPolicy, type Readiness, type ReadinessPolicy, type StatisticalVerdict } from './readiness-policy.js';

/**
 * A channel's stability criteria as its pipeline runs them (src/engine/channel-pipeline.ts): the
 * tracker, which the pipeline's `push` feeds with every sample it takes (calling the tracker
 * directly, and giving the events its own sample index), on the same accept path, so the daemon and
 * `plateau analyze` evaluate the rules on exactly the same readings; the readiness policy; the
 * views the API, the WebSocket, the table, the report and the records show.
 *
 * The rules watch the channel continuously: a test point starting (a window restart) does not
 * restart them, since the readings before it are the channel's history that a rule like "less than
 * 1 K in 15 min" is about; a test point's set point applies from its first sample
 * (`setSetPoint`).
 */
export interface ChannelCriteriaSettings {
  /** Readiness policy; null: the default (both when there are rules). */
  policy: ReadinessPolicy | null;
  rules: CriterionSpec[];
}

/** A rule at a glance (live displays, the summary): what the strip on the dashboard shows. */
export interface CriterionBrief {
  name: string;
  holds: boolean;
  met: boolean;
  since: number | null;
  value: number | null;
  tolerance: number | null;
  margin: number | null;
  /** Seconds until the rule can hold at the earliest (0 when it holds; null when it cannot be told). */
  secondsToHold: number | null;
}

/** The saved state of a channel's criteria: the tracker's record (its own name, version and rule fingerprint). */
export type ChannelCriteriaState = CriteriaTrackerState;

export class ChannelCriteria {
  readonly policy: ReadinessPolicy;
  readonly tracker: CriteriaTracker;

  /** @throws RangeError naming every problem of an unusable rule (the configuration reports those first). */
  constructor(settings: ChannelCriteriaSettings) {
    this.tracker = new CriteriaTracker(settings.rules);
    this.policy = settings.policy ?? defaultPolicy(settings.rules.length);
  }

  get ruleCount(): number {
    return this.tracker.specs.length;
  }

  /** The test point's set point (null: none), applied from the next sample on. */
  setSetPoint(value: number | null): void {
    this.tracker.setSetPoint(value);
  }

  get setPoint(): number | null {
    return this.tracker.setPoint;
  }

  states(): CriterionState[] {
    return this.tracker.states();
  }

  /** The rules at a glance, from `states` (or read now). */
  briefs(states: readonly CriterionState[] = this.states()): CriterionBrief[] {
    return states.map((s) => ({ name: s.name, holds: s.holds, met: s.met, since: s.since, value: s.value, tolerance: s.tolerance, margin: s.margin, secondsToHold: s.secondsToHold }));
  }

  /** Readiness under the policy, with the evidence per rule over `window` (times in seconds) when given. */
  readiness(statistical: StatisticalVerdict, window: { startTime: number; endTime: number } | null = null, states: readonly CriterionState[] = this.states()): Readiness {
    return combineReadiness({ policy: this.policy, statistical, criteria: states, window });
  }

  saveState(): ChannelCriteriaState {
    return this.tracker.saveState();
  }

  /** False (and nothing changed) for a state of another version or of other rules: the caller replays. */
  loadState(state: ChannelCriteriaState | null | undefined): boolean {
    return state !== null && state !== undefined && this.tracker.loadState(state);
  }
}

/** A criteria instance for the settings, or null when there are no rules and no policy that needs them. */
export function channelCriteria(settings: ChannelCriteriaSettings | null | undefined): ChannelCriteria | null {
  if (!settings || (settings.rules.length === 0 && settings.policy === null)) return null;
  return new ChannelCriteria(settings);
}
