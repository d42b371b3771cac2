/**
 * Standard uncertainty of a quantity known only to lie within +/- a of its estimate, for the shapes
 * of probability distribution a Type B evaluation assigns (JCGM 100:2008, GUM, 4.3.7 rectangular,
 * 4.3.9 triangular; the U-shaped (arcsine) distribution of a quantity varying sinusoidally between
 * its bounds, GUM H.1.3.3 for the cyclic temperature of the end gauge, from memory):
 *   rectangular  u = a / sqrt(3)
 *   triangular   u = a / sqrt(6)
 *   U-shaped     u = a / sqrt(2)
 * A normal distribution has no bounds: its standard uncertainty is stated directly, or as an
 * expanded uncertainty and a coverage factor (see certificate-uncertainty.ts).
 *
 * Cost: O(1).
 * @throws RangeError when the half-width is negative or not finite (programmer error: configuration
 *   is checked with one line per problem in src/config/uncertainty-config.ts).
 */
export type DistributionShape = 'normal' | 'rectangular' | 'triangular' | 'u-shaped';

export type BoundedShape = Exclude<DistributionShape, 'normal'>;

export const BOUNDED_SHAPES: readonly BoundedShape[] = ['rectangular', 'triangular', 'u-shaped'];

const DIVISOR: Record<BoundedShape, number> = {
  rectangular: Math.sqrt(3),
  triangular: Math.sqrt(6),
  'u-shaped': Math.SQRT2,
};

/** The divisor d with u = a / d for a distribution of half-width a. */
export function halfWidthDivisor(shape: BoundedShape): number {
  return DIVISOR[shape];
}

export function standardUncertaintyFromHalfWidth(shape: BoundedShape, halfWidth: number): number {
  if (!(halfWidth >= 0) || !Number.isFinite(halfWidth)) throw new RangeError(`standardUncertaintyFromHalfWidth requires a finite non-negative half-width, got ${halfWidth}`);
  return halfWidth / DIVISOR[shape];
}
