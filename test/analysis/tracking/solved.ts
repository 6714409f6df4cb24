/**
 * A solved model turned into tracking input, the way the pipeline will do it: heads from the library solver,
 * face flows from `faceFlows` (the budget's), fixed-head groups and wells as stop labels.
 * The one place the tests call the solver (its name may change with the pipeline's restructuring).
 */
import { solveModel } from '../../../src/pipeline.js';
import { faceFlows } from '../../../src/analysis/flux.js';
import { buildTrackingField, type StopLabel, type TrackingField, type TrackingInput } from '../../../src/analysis/tracking/field.js';
import type { ModelInput } from '../../../src/scenario/types.js';

export interface Solved {
  input: TrackingInput;
  field: TrackingField;
  head: Float64Array;
}

export function solveForTracking(model: ModelInput, porosity: number | Float64Array, weakSinkFraction = 0): Solved {
  const result = solveModel(model);
  if (!result.stats.converged) throw new Error('test model did not converge');
  const { system, head } = result;
  const { nx, ny } = system.grid;
  const flows = faceFlows(system.grid, head, system.conductanceEast, system.conductanceSouth);
  const stopLabel = new Int32Array(nx * ny).fill(-1);
  const labels: StopLabel[] = system.groups.map((name) => ({ kind: 'boundary' as const, name }));
  for (let p = 0; p < nx * ny; p++) if (system.fixed[p]) stopLabel[p] = system.fixedGroup[p]!;
  model.wells.forEach((w, k) => {
    labels.push({ kind: 'well', name: w.id });
    stopLabel[system.wellCells[k]!] = labels.length - 1;
  });
  const input: TrackingInput = {
    nx,
    ny,
    dx: system.dx,
    dy: system.dy,
    x0: system.grid.transform[0],
    y0: system.grid.transform[3],
    faceEast: flows.east,
    faceSouth: flows.south,
    active: system.active,
    thickness: model.thickness,
    porosity,
    stopLabel,
    labels,
    weakSinkFraction,
  };
  return { input, field: buildTrackingField(input), head };
}
