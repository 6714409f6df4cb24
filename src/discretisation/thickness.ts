/**
 * The saturated thickness of the aquifer at given heads: the one place that says how thick the water-bearing
 * layer is where water flows, for everything that turns a flow into a velocity (particle tracking). For the
 * confined aquifer it is the aquifer thickness whatever the head; an aquifer type whose saturated thickness depends
 * on the head (a water table) answers here from `head`.
 */
import type { ModelInput } from '../scenario/types.js';

/** Saturated thickness per cell (or one number) at the solved heads `head` (NaN off the active area). */
export function saturatedThickness(model: ModelInput, head: Float64Array): Float64Array | number {
  void head; // confined: the thickness does not depend on the head
  return model.thickness;
}
