import { cellAt, type Grid } from '../grid.js';
import { inputError } from '../errors.js';
import type { FlowSystem } from '../discretisation/assemble.js';
import type { ObservationInput, ReceptorInput, WellInput } from '../scenario/types.js';

export interface WellResult {
  id: string;
  x: number;
  y: number;
  row: number;
  col: number;
  rate: number;
  /** Head of the cell holding the well (the block average, not the well-bore head). */
  cellHead: number;
}

export interface ObservationResult {
  id: string;
  x: number;
  y: number;
  row: number;
  col: number;
  observed: number;
  /** Head at the point, bilinear between the four surrounding cell centres when all are active, else the cell's head. */
  simulated: number;
  /** simulated - observed. */
  residual: number;
}

/**
 * The cell of each well, in input order. Wells are checked when the system is assembled (outside the grid or on
 * an inactive or fixed cell is an input error there), so every well lies in a cell here.
 */
export function wellCells(grid: Grid, wells: readonly WellInput[]): Int32Array {
  return Int32Array.from(wells, (w) => {
    const cell = cellAt(grid, w.x, w.y);
    return cell ? cell.row * grid.nx + cell.col : -1;
  });
}

export function wellResults(system: FlowSystem, wells: WellInput[], head: Float64Array): WellResult[] {
  const nx = system.grid.nx;
  const cells = wellCells(system.grid, wells);
  return wells.map((w, k) => {
    const p = cells[k]!;
    return { id: w.id, x: w.x, y: w.y, row: Math.floor(p / nx), col: p % nx, rate: w.rate, cellHead: head[p]! };
  });
}

/** Locate every observation point up front (outside the grid or in an inactive cell is an input error). */
export function locateObservations(system: FlowSystem, observations: ObservationInput[]): Int32Array {
  return locatePoints(system, observations, 'observation', 'check the coordinates and pointCrs');
}

/**
 * Locate every receptor (outside the grid or in an inactive cell is an input error). `solve` makes no use of
 * receptors, but checks them as `compare` and `inspect` do, so that a scenario is refused or accepted the same way
 * by every command.
 */
export function locateReceptors(system: FlowSystem, receptors: ReceptorInput[]): Int32Array {
  return locatePoints(system, receptors, 'receptor', "check the coordinates, pointCrs and the receptor's crs");
}

/** The cell of each point; a point outside the grid or on an inactive cell is an input error naming it. */
function locatePoints(
  system: FlowSystem,
  points: ReadonlyArray<{ id: string; x: number; y: number; source: string }>,
  kind: string,
  hint: string,
): Int32Array {
  const { grid, active } = system;
  const cells = new Int32Array(points.length);
  points.forEach((point, k) => {
    const cell = cellAt(grid, point.x, point.y);
    if (!cell) {
      throw inputError(`${kind} "${point.id}" (${point.source}) at x=${point.x}, y=${point.y} lies outside the grid`, {
        key: point.source,
        hint,
      });
    }
    const p = cell.row * grid.nx + cell.col;
    if (!active[p]) {
      throw inputError(`${kind} "${point.id}" (${point.source}) lies in an inactive cell (row ${cell.row}, col ${cell.col})`, {
        key: point.source,
        cell,
      });
    }
    cells[k] = p;
  });
  return cells;
}

export function observationResults(system: FlowSystem, observations: ObservationInput[], head: Float64Array): ObservationResult[] {
  const cells = locateObservations(system, observations);
  return observations.map((o, k) => {
    const p = cells[k]!;
    const simulated = headAtPoint(system.grid, head, o.x, o.y) ?? head[p]!;
    return {
      id: o.id,
      x: o.x,
      y: o.y,
      row: Math.floor(p / system.grid.nx),
      col: p % system.grid.nx,
      observed: o.head,
      simulated,
      residual: simulated - o.head,
    };
  });
}

/**
 * Bilinear interpolation of a cell-centred field at a map point; null when any of the four surrounding
 * centres is outside the grid or inactive (NaN), so the caller falls back to the cell value.
 */
export function headAtPoint(grid: Grid, field: Float64Array, x: number, y: number): number | null {
  const t = grid.transform;
  const fc = (x - t[0]) / t[1] - 0.5;
  const fr = (y - t[3]) / t[5] - 0.5;
  const c0 = Math.floor(fc);
  const r0 = Math.floor(fr);
  if (c0 < 0 || r0 < 0 || c0 + 1 >= grid.nx || r0 + 1 >= grid.ny) return null;
  const u = fc - c0;
  const v = fr - r0;
  const p = r0 * grid.nx + c0;
  const a = field[p]!,
    b = field[p + 1]!,
    c = field[p + grid.nx]!,
    d = field[p + grid.nx + 1]!;
  const value = (1 - v) * ((1 - u) * a + u * b) + v * ((1 - u) * c + u * d);
  return Number.isFinite(value) ? value : null;
}
