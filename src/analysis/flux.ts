/**
 * Darcy flux per cell from the stencil's face flows, so that it agrees with the water budget.
 *
 * Face flows (the same terms as the cell balance in the discretisation contract):
 *   eastward flow through the face between p and p+1:   Q_e[p] = east[p]  * (h_p - h_{p+1})
 *   rowward  flow through the face between p and p+nx:  Q_s[p] = south[p] * (h_p - h_{p+nx})
 * with `east`/`south` the full conductances between active cells (zero across no-flow faces).
 *
 * Cell-centred specific discharge (length/time): the mean of the flows through the cell's two faces in one
 * direction, divided by the face area,
 *   q_col = (Q_e[p-1] + Q_e[p]) / 2 / (b_p * dy),     q_row = (Q_s[p-nx] + Q_s[p]) / 2 / (b_p * dx),
 * which is the cell-centre value of the velocity field that varies linearly between opposite faces, as in
 * Pollock's semi-analytical particle tracking (Pollock 1988, Ground Water 26(6); citation from memory). A no-flow face counts as
 * zero flow, so a cell against a closed face shows half the flow through its open face. For uniform K and a
 * uniform gradient it equals Darcy's law q = -K dh/dx exactly (Darcy 1856); see test/analysis/flux.test.ts.
 * Map directions: qx is east-positive, qy north-positive; the signs of the geotransform's pixel width and
 * height say which way columns and rows run.
 *
 * Average linear (seepage) velocity v = q / n_e with effective porosity n_e (Freeze & Cherry 1979, "Groundwater"; citation from memory).
 */
import { cellHeight, cellWidth, type Grid } from '../grid.js';
import { inputError } from '../errors.js';
import { fieldAt } from '../field.js';

export interface FaceFlows {
  /** Eastward (column + 1) flow through the face between p and p+1, length^3/time; 0 on the last column. */
  east: Float64Array;
  /** Flow towards row + 1 through the face between p and p+nx, length^3/time; 0 on the last row. */
  south: Float64Array;
}

export interface DarcyFlux {
  /** Specific discharge, east-positive, length/time; NaN on inactive cells. */
  qx: Float64Array;
  /** Specific discharge, north-positive, length/time; NaN on inactive cells. */
  qy: Float64Array;
  /** sqrt(qx^2 + qy^2). */
  magnitude: Float64Array;
}

export interface LinearVelocity {
  /** Average linear velocity, east-positive, length/time; NaN on inactive cells or where porosity is missing. */
  vx: Float64Array;
  vy: Float64Array;
  speed: Float64Array;
}

export interface FluxInput {
  grid: Grid;
  /** Solved head, nx*ny, NaN on inactive cells. */
  head: Float64Array;
  /** Conductance between p and p+1 (zero when either cell is inactive or on the last column). */
  eastConductance: Float64Array;
  /** Conductance between p and p+nx (zero when either cell is inactive or on the last row). */
  southConductance: Float64Array;
  /** Saturated thickness: one number or one value per cell. */
  thickness: number | Float64Array;
}

/** Flow through every interior face, from the stencil's conductances and the head. */
export function faceFlows(
  grid: Grid,
  head: Float64Array,
  eastConductance: Float64Array,
  southConductance: Float64Array,
  out?: FaceFlows,
): FaceFlows {
  const { nx, ny } = grid;
  const n = nx * ny;
  checkLength('head', head, n);
  checkLength('east conductance', eastConductance, n);
  checkLength('south conductance', southConductance, n);
  const east = out?.east ?? new Float64Array(n);
  const south = out?.south ?? new Float64Array(n);
  east.fill(0);
  south.fill(0);
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    for (let p = row; p < row + nx - 1; p++) {
      const c = eastConductance[p]!;
      // Zero conductance means a no-flow face; skip so NaN heads of inactive neighbours do not leak in.
      if (c !== 0) east[p] = c * (head[p]! - head[p + 1]!);
    }
  }
  for (let p = 0; p < n - nx; p++) {
    const c = southConductance[p]!;
    if (c !== 0) south[p] = c * (head[p]! - head[p + nx]!);
  }
  return { east, south };
}

/**
 * Cell-centred Darcy flux (specific discharge) from the face flows; see the module comment for the rule.
 * `allocate` makes the three result arrays (e.g. in shared memory, for worker threads that read them).
 */
export function darcyFlux(input: FluxInput, allocate: (n: number) => Float64Array = (n) => new Float64Array(n)): DarcyFlux {
  const { grid, head, thickness } = input;
  const { nx, ny } = grid;
  const n = nx * ny;
  if (typeof thickness !== 'number') checkLength('thickness', thickness, n);
  else if (!(thickness > 0))
    throw inputError(`thickness must be positive to compute the flux, got ${thickness}`, { key: 'aquifer.thickness' });
  const flows = faceFlows(grid, head, input.eastConductance, input.southConductance);
  const dx = cellWidth(grid);
  const dy = cellHeight(grid);
  const colSign = grid.transform[1] >= 0 ? 1 : -1; // +1: columns run east
  const rowSign = grid.transform[5] < 0 ? -1 : 1; // -1: rows run south (north-up), so rowward flow is southward
  const qx = allocate(n);
  const qy = allocate(n);
  const magnitude = allocate(n);
  const fe = flows.east;
  const fs = flows.south;
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      const b = fieldAt(thickness, p);
      if (!Number.isFinite(head[p]!) || !(b > 0)) {
        qx[p] = NaN;
        qy[p] = NaN;
        magnitude[p] = NaN;
        continue;
      }
      const west = j > 0 ? fe[p - 1]! : 0;
      const north = i > 0 ? fs[p - nx]! : 0;
      const x = (colSign * 0.5 * (west + fe[p]!)) / (b * dy);
      const y = (rowSign * 0.5 * (north + fs[p]!)) / (b * dx);
      qx[p] = x + 0; // + 0 turns -0 into 0
      qy[p] = y + 0;
      magnitude[p] = Math.sqrt(x * x + y * y);
    }
  }
  return { qx, qy, magnitude };
}

/**
 * Average linear velocity v = q / n_e. `porosity` is one number or one value per cell (NaN = unknown, gives
 * NaN velocity there); values must lie in (0, 1].
 */
export function linearVelocity(grid: Grid, flux: DarcyFlux, porosity: number | Float64Array): LinearVelocity {
  const n = flux.qx.length;
  if (typeof porosity === 'number') {
    if (!(porosity > 0 && porosity <= 1)) {
      throw inputError(`porosity must lie in (0, 1], got ${porosity}`, {
        key: 'porosity',
        hint: 'give the effective porosity as a fraction, e.g. 0.2 for 20 %',
      });
    }
  } else {
    checkLength('porosity', porosity, n);
    for (let p = 0; p < n; p++) {
      const v = porosity[p]!;
      if (Number.isFinite(v) && !(v > 0 && v <= 1) && Number.isFinite(flux.qx[p]!)) {
        throw inputError(`porosity must lie in (0, 1], got ${v} at row ${Math.floor(p / grid.nx)}, column ${p % grid.nx}`, {
          key: 'porosity',
          cell: { row: Math.floor(p / grid.nx), col: p % grid.nx },
          hint: 'give the effective porosity as a fraction, e.g. 0.2 for 20 %; use nodata where it is unknown',
        });
      }
    }
  }
  const vx = new Float64Array(n);
  const vy = new Float64Array(n);
  const speed = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    const ne = fieldAt(porosity, p);
    // NaN porosity or NaN flux propagate to NaN velocity.
    vx[p] = flux.qx[p]! / ne;
    vy[p] = flux.qy[p]! / ne;
    speed[p] = flux.magnitude[p]! / ne;
  }
  return { vx, vy, speed };
}

function checkLength(what: string, array: Float64Array, n: number): void {
  if (array.length !== n) {
    throw inputError(`${what} has ${array.length} values, the grid has ${n} cells`, { hint: 'pass one value per cell, row-major' });
  }
}
