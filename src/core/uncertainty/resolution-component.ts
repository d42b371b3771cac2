import type { Lattice } from '../resolution/lattice.js';
import type { TypeBSpec } from './type-b-component.js';

/**
 * The resolution component proposed for a channel whose readings lie on a lattice: the indication's
 * step delta found by detectLattice (src/core/resolution/lattice.ts) becomes a rectangular component
 * of half-width delta / 2 (JCGM 100:2008, GUM, F.2.2.1), u = delta / sqrt(12).
 *
 * Proposed only for a coarse lattice (step >= sd / 4, the lattice's own rule): there the readings'
 * mean can carry a quantisation bias of a good part of a step that no Type A evaluation sees, and
 * the component makes the interval cover it. Finer lattices return null: their bias is negligible
 * (common practice). A configured resolution component (same kind) takes precedence; the caller
 * decides.
 *
 * Cost: O(1).
 */
export function proposeResolutionComponent(lattice: Lattice | null, name = 'resolution of the indication (proposed from the readings)'): (TypeBSpec & { kind: 'resolution' }) | null {
  if (lattice === null || !lattice.coarse || !(lattice.step > 0)) return null;
  return { kind: 'resolution', name, step: lattice.step };
}
