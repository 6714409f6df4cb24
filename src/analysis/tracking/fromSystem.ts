/**
 * Tracking input from an assembled and solved flow system: the budget's face flows (`faceFlows`) and the cells that
 * stop particles, read from the flow terms without naming any. The one bridge between the discretisation and the
 * tracking engine; everything else in this folder works on plain arrays.
 *
 * Stop labels, term by term (src/discretisation/terms/types.ts):
 * - the pumping term (wells): each of its cells is labelled by the id of the well in it (kind `well`; wells
 *   sharing a cell share a label named by their ids joined with `+`);
 * - every other term that is not areal (fixed heads, head-dependent rivers and drains, ...): a cell where its flow
 *   at the solved heads is not zero is a boundary labelled by the term's `label` (kind `boundary`): where the flow
 *   takes water out of the aquifer it stops forward particles (a discharging boundary), where it feeds the aquifer
 *   it stops backward ones (the water came from there); the field (field.ts) decides which from the cell's net
 *   exchange. A cell of two such terms takes the label of the one with the larger flow there;
 * - areal terms (recharge, leakage) label nothing: particles pass their cells.
 * Well labels win over boundary labels on the same cell.
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
  /** Saturated thickness per cell or one number (discretisation/thickness.ts `saturatedThickness`). */
  thickness: Float64Array | number;
  porosity: Float64Array | number;
  weakSinkFraction?: number;
}

/** Labels: one per boundary term that labels a cell (in term order, by its label), then one per well cell. */
export function trackingInputFromSystem(system: FlowSystem, head: Float64Array, options: SystemTrackingOptions): TrackingInput {
  const { grid } = system;
  const { nx, ny } = grid;
  if (!(grid.transform[1] > 0 && grid.transform[5] < 0)) {
    // The engine's frame is north-up (columns east, rows south); mapping other orientations is not done here.
    throw inputError(
      `particle tracking needs a north-up grid (positive pixel width, negative pixel height); this grid's geotransform is [${grid.transform.join(', ')}]`,
      {
        key: 'tracking',
        hint: 'warp the rasters to a north-up grid (e.g. gdalwarp) before tracking',
      },
    );
  }
  const n = nx * ny;
  const flows = faceFlows(grid, head, system.conductanceEast, system.conductanceSouth);
  const stopLabel = new Int32Array(n).fill(-1);
  const labels: StopLabel[] = [];
  // Boundary terms: the label of the term with the largest |flow| on each cell.
  const strongest = new Float64Array(n);
  const labelOfName = new Map<string, number>();
  let wellTerm = false;
  for (const term of system.terms) {
    if (term.pumping) {
      wellTerm = true;
      continue;
    }
    if (term.areal) continue;
    const flow = new Float64Array(term.cells.length);
    term.flow(head, flow);
    for (let k = 0; k < flow.length; k++) {
      const f = Math.abs(flow[k]!);
      const p = term.cells[k]!;
      if (!(f > 0) || f <= strongest[p]!) continue;
      let l = labelOfName.get(term.label);
      if (l === undefined) {
        labels.push({ kind: 'boundary', name: term.label });
        l = labels.length - 1;
        labelOfName.set(term.label, l);
      }
      strongest[p] = f;
      stopLabel[p] = l;
    }
  }
  if (wellTerm) {
    const labelOfCell = new Map<number, number>();
    const cells = wellCells(grid, options.wells);
    options.wells.forEach(({ id }, k) => {
      const cell = cells[k]!;
      if (cell < 0 || !system.active[cell]) return; // refused by the loader and the well term before any solve
      const existing = labelOfCell.get(cell);
      if (existing !== undefined) {
        labels[existing] = { kind: 'well', name: `${labels[existing]!.name}+${id}` };
        return;
      }
      labels.push({ kind: 'well', name: id });
      labelOfCell.set(cell, labels.length - 1);
      stopLabel[cell] = labels.length - 1;
    });
  }
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
