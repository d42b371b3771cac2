/**
 * Stability and uniformity of a source computed live: the spread of a group of channels read at the
 * same instant (several thermometers in one bath, several pressure taps on one header).
 *
 * Why: a calibration bath or furnace is only known to be uniform within some bound; a group of
 * sensors in it measures that bound directly. The half-width of the group's readings, a = (max -
 * min) / 2, is taken as the half-width of a rectangular distribution for the point the unit under
 * test sees (GUM 4.3.7: "the quantity lies within the interval, any value equally likely"), so
 * u = a / sqrt(3). The sample standard deviation of the group is reported beside it: with many
 * sensors it estimates the spatial spread directly, with few (2 to 4, the usual case) the range is
 * the safer bound. Choice: the component uses the half-range; the caller passes the readings of one
 * instant (or per-channel means over one window, for uniformity rather than momentary spread).
 *
 * Cost: O(n) for n channels, no allocation.
 * Returns null for fewer than two finite readings (no spread can be seen).
 */
export interface GroupSpread {
  count: number;
  mean: number;
  min: number;
  max: number;
  /** (max - min) / 2, the half-width of the rectangular component. */
  halfWidth: number;
  /** halfWidth / sqrt(3). */
  standardUncertainty: number;
  /** Sample standard deviation of the readings (n - 1 divisor). */
  sd: number;
}

export function groupSpread(readings: ArrayLike<number>): GroupSpread | null {
  let count = 0;
  let min = Number.POSITIVE_INFINITY;
  let max = Number.NEGATIVE_INFINITY;
  let mean = 0;
  let m2 = 0;
  for (let i = 0; i < readings.length; i++) {
    const x = readings[i] as number;
    if (!Number.isFinite(x)) continue;
    count++;
    if (x < min) min = x;
    if (x > max) max = x;
    const delta = x - mean; // Welford (1962), Technometrics 4(3), 419-420
    mean += delta / count;
    m2 += delta * (x - mean);
  }
  if (count < 2) return null;
  const halfWidth = (max - min) / 2;
  return { count, mean, min, max, halfWidth, standardUncertainty: halfWidth / Math.sqrt(3), sd: Math.sqrt(Math.max(0, m2) / (count - 1)) };
}
