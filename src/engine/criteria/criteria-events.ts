/**
 * What a channel's stability criteria tell the world: edge-triggered events, once per change, as
 * plain objects (like channel-events.ts). `at` is the 0-based index of the sample that caused the
 * event, counted from the tracker's first sample; `time` is that sample's time (seconds).
 *
 *   criterion-holds  the rule's condition has now been met continuously for its hold duration
 *                    (`since`: when the condition became met; value, tolerance and margin now)
 *   criterion-lost   a rule that held no longer does (`heldSince`: when its condition became met;
 *                    the value that broke it, null when the window could not give one, and why)
 */
export type CriterionEvent =
  | { kind: 'criterion-holds'; at: number; time: number; rule: string; since: number; value: number; tolerance: number; margin: number }
  | { kind: 'criterion-lost'; at: number; time: number; rule: string; heldSince: number; value: number | null; tolerance: number | null; margin: number | null; reason: string };

export type CriterionEventKind = CriterionEvent['kind'];

export const CRITERION_EVENT_KINDS: CriterionEventKind[] = ['criterion-holds', 'criterion-lost'];
