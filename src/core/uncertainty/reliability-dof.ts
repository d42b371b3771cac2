/**
 * Degrees of freedom of a Type B standard uncertainty from its judged reliability (JCGM 100:2008,
 * GUM, G.4.2, eq. (G.3)):
 *   nu_i ~ 1/2 (Delta u(x_i) / u(x_i))^-2,
 * where Delta u / u is the relative uncertainty of the standard uncertainty itself ("reliable to
 * about 25 %" gives nu = 8; 10 % gives 50; 50 % gives 2, the values of GUM H.1).
 * A standard uncertainty taken as exactly known (no reliability stated) has nu = infinity: common
 * practice for Type B evaluations, which the GUM describes in G.4.2 (wording from memory).
 *
 * Cost: O(1).
 * @throws RangeError when the relative uncertainty is negative or not finite.
 */
export function dofFromReliability(relativeUncertaintyOfU: number | null | undefined): number {
  if (relativeUncertaintyOfU === null || relativeUncertaintyOfU === undefined || relativeUncertaintyOfU === 0) return Number.POSITIVE_INFINITY;
  if (!(relativeUncertaintyOfU > 0) || !Number.isFinite(relativeUncertaintyOfU)) throw new RangeError(`dofFromReliability requires a relative uncertainty of u that is finite and non-negative, got ${relativeUncertaintyOfU}`);
  return 0.5 / (relativeUncertaintyOfU * relativeUncertaintyOfU);
}
