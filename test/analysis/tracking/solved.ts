/**
 * A solved model turned into tracking input (trackingInputFromSystem: the budget's face flows, fixed-head groups
 * and wells as stop labels).
 * The one place the tests call the solver (its name may change with the pipeline's restructuring).
 */
import { solveModel } from '../../../src/pipeline.js';
import { buildTrackingField, type TrackingField, type TrackingInput } from '../../../src/analysis/tracking/field.js';
import { trackingInputFromSystem } from '../../../src/analysis/tracking/fromSystem.js';
import type { ModelInput } from '../../../src/scenario/types.js';

export interface Solved {
  input: TrackingInput;
  field: TrackingField;
  head: Float64Array;
}

export function solveForTracking(model: ModelInput, porosity: number | Float64Array, weakSinkFraction = 0): Solved {
  const result = solveModel(model);
  if (!result.stats.converged) throw new Error('test model did not converge');
  const input = trackingInputFromSystem(result.system, result.head, {
    wells: model.wells,
    thickness: model.thickness,
    porosity,
    weakSinkFraction,
  });
  return { input, field: buildTrackingField(input), head: result.head };
}
