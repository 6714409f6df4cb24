/**
 * Tracking input from an assembled and solved flow system: the budget's face flows (`faceFlows`), fixed-head
 * groups as boundary labels, wells as well labels. The one bridge between the discretisation and the tracking
 * engine; everything else in this folder works on plain arrays.
 */
import type { FlowSystem } from '../../discretisation/assemble.js';
import { inputError } from '../../errors.js';
import { faceFlows } from '../flux.js';
import { wellCells } from '../points.js';
import type { WellInput } from '../../scenario/types.js';
import type { StopLabel, TrackingInput } from './field.js';

export interface SystemTrackingOptions {
  /** The model's wells (their cells are located on the system's grid). */
  wells: readonly WellInput[];
  /** Saturated thickness per cell or one number (the aquifer thickness when confined). */
  thickness: Float64Array | number;
  porosity: Float64Array | number;
  weakSinkFraction?: number;
}

/**
 * Labels: one per fixed-head group (kind `boundary`, its name), then one per well cell (kind `well`; wells sharing
 * a cell share a label named by their ids joined with `+`).
 */
export function trackingInputFromSystem(system: FlowSystem, head: Float64Array, options: SystemTrackingOptions): TrackingInput {
  const { grid } = system;
  const { nx, ny } = grid;
  if (!(grid.transform[1] > 0 && grid.transform[5] < 0)) {
    // The engine's frame is north-up (columns east, rows south); mapping other orientations is not done here.
    throw inputError(`particle tracking needs a north-up grid (positive pixel width, negative pixel height); this grid's geotransform is [${grid.transform.join(', ')}]`, {
      key: 'tracking',
      hint: 'warp the rasters to a north-up grid (e.g. gdalwarp) before tracking',
    });
  }
  const n = nx * ny;
  const flows = faceFlows(grid, head, system.conductanceEast, system.conductanceSouth);
  const stopLabel = new Int32Array(n).fill(-1);
  const labels: StopLabel[] = system.groups.map((name) => ({ kind: 'boundary', name }));
  for (let p = 0; p < n; p++) if (system.fixed[p]) stopLabel[p] = system.fixedGroup[p]!;
  const labelOfCell = new Map<number, number>();
  const cells = wellCells(grid, options.wells);
  options.wells.forEach(({ id }, k) => {
    const cell = cells[k]!;
    if (cell < 0) return; // outside the grid: refused by the loader before any solve
    if (system.fixed[cell]) return; // a well on a fixed-head cell: the boundary label stands
    const existing = labelOfCell.get(cell);
    if (existing !== undefined) {
      labels[existing] = { kind: 'well', name: `${labels[existing]!.name}+${id}` };
      return;
    }
    labels.push({ kind: 'well', name: id });
    labelOfCell.set(cell, labels.length - 1);
    stopLabel[cell] = labels.length - 1;
  });
  const input: TrackingInput = {
    nx,
    ny,
    dx: system.dx,
    dy: system.dy,
    x0: grid.transform[0],
    y0: grid.transform[3],
    faceEast: flows.east,
    faceSouth: flows.south,
    active: system.active,
    thickness: options.thickness,
    porosity: options.porosity,
    stopLabel,
    labels,
  };
  if (options.weakSinkFraction !== undefined) input.weakSinkFraction = options.weakSinkFraction;
  return input;
}
