/**
 * Time grid helpers shared by the criteria modules. Times are seconds (payload or arrival times,
 * often since the epoch); two times closer than TIME_EPSILON are taken as equal, so a reading
 * stamped exactly 900 s before the newest is inside a 900 s window despite binary round-off of
 * decimal time stamps (at 1.7e9 s a double resolves about 2.4e-7 s).
 */
export const TIME_EPSILON = 1e-6;

/** Index of the grid step of length `step` (from `origin`) that `time` falls in. O(1). */
export function gridIndex(time: number, origin: number, step: number): number {
  return Math.floor((time - origin + TIME_EPSILON) / step);
}
