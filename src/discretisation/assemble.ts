import { cellAt, cellCentre, cellHeight, cellWidth, type Grid } from '../grid.js';
import { inputError } from '../errors.js';
import type { ModelInput } from '../scenario/types.js';
import { GridOperator } from './operator.js';

/**
 * The discretised flow problem of one scenario: the physical conductances (for budgets and fluxes),
 * the fixed-head cells and their groups, the sources, and the linear system A x = b the solvers see.
 * See ../shared/spec/discretisation.md. Everything is full-grid (nx*ny), indexed `row * nx + col`.
 */
export interface FlowSystem {
  grid: Grid;
  dx: number;
  dy: number;
  /** 1 = active cell. */
  active: Uint8Array;
  /** 1 = fixed-head cell (always active). */
  fixed: Uint8Array;
  /** Prescribed head on fixed cells, NaN elsewhere. */
  fixedHead: Float64Array;
  /** Index into `groups` for fixed cells, -1 elsewhere. */
  fixedGroup: Int32Array;
  /** Fixed-head group names, in scenario order. */
  groups: string[];
  /** Physical conductance between p and p+1 (both active), 0 otherwise. L^2/T. */
  conductanceEast: Float64Array;
  /** Physical conductance between p and p+nx (both active), 0 otherwise. */
  conductanceSouth: Float64Array;
  /** Summed well rate per cell (L^3/T, negative = withdrawal). */
  wellRate: Float64Array;
  /** Recharge volume rate per unknown cell, R*dx*dy (L^3/T); zero on fixed and inactive cells. */
  rechargeRate: Float64Array;
  /** The well each input well landed in, in input order. */
  wellCells: Int32Array;
  /**
   * Heads are solved as x = h - datum so that the right-hand side holds flows, not head levels:
   * with absolute heads a large fixed-head term dominates ||b|| and a small relative residual can still
   * leave visible head errors. datum = mean prescribed head.
   */
  datum: number;
  operator: GridOperator;
  /** Right-hand side for x = h - datum; zero on identity rows. */
  rhs: Float64Array;
  counts: {
    cells: number;
    active: number;
    fixed: number;
    unknowns: number;
    /** Fixed-head data that fell on inactive cells and was ignored, per group. */
    fixedOnInactive: number[];
    regions: number;
  };
}

/** Harmonic mean conductance of two transmissivities across a face, scaled by face length / distance. */
function harmonicConductance(ratio: number, tp: number, tq: number): number {
  return (ratio * 2 * tp * tq) / (tp + tq);
}

export function assembleSystem(model: ModelInput): FlowSystem {
  const { grid } = model;
  const { nx, ny } = grid;
  const n = nx * ny;
  const dx = cellWidth(grid);
  const dy = cellHeight(grid);

  const active = new Uint8Array(n);
  const tx = new Float64Array(n);
  const conductivity = model.conductivity;
  const thickness = model.thickness;
  const anisotropy = model.anisotropy;
  let activeCount = 0;
  for (let p = 0; p < n; p++) {
    const k = conductivity[p]!;
    const b = typeof thickness === 'number' ? thickness : thickness[p]!;
    // NaN compares false, so nodata (already NaN) and NaN both land here as inactive.
    if (k > 0 && b > 0 && Number.isFinite(k) && Number.isFinite(b)) {
      active[p] = 1;
      tx[p] = k * b;
      activeCount++;
    }
  }
  if (activeCount === 0) {
    throw inputError('the model has no active cell: every conductivity (or thickness) value is nodata, NaN or <= 0', {
      hint: 'check the nodata value and units of the conductivity raster',
    });
  }

  // Physical conductances (spec: harmonic mean; raster edges and inactive neighbours are no-flow).
  const conductanceEast = new Float64Array(n);
  const conductanceSouth = new Float64Array(n);
  const ewRatio = dy / dx;
  const nsRatio = (dx / dy) * anisotropy;
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    for (let j = 0; j < nx - 1; j++) {
      const p = row + j;
      if (active[p] && active[p + 1]) conductanceEast[p] = harmonicConductance(ewRatio, tx[p]!, tx[p + 1]!);
    }
    if (i < ny - 1) {
      for (let j = 0; j < nx; j++) {
        const p = row + j;
        // Ty = a*T on both sides: the anisotropy factor comes out of the harmonic mean.
        if (active[p] && active[p + nx]) conductanceSouth[p] = harmonicConductance(nsRatio, tx[p]!, tx[p + nx]!);
      }
    }
  }

  // Fixed heads: later entries win where they overlap; data on inactive cells is ignored and counted.
  const fixed = new Uint8Array(n);
  const fixedHead = new Float64Array(n).fill(NaN);
  const fixedGroup = new Int32Array(n).fill(-1);
  const groups = model.fixedHeads.map((f) => f.name);
  const fixedOnInactive = model.fixedHeads.map(() => 0);
  model.fixedHeads.forEach((entry, g) => {
    const { cells, heads } = entry;
    for (let k = 0; k < cells.length; k++) {
      const p = cells[k]!;
      const h = heads[k]!;
      if (!active[p]) {
        if (!entry.activeOnly) fixedOnInactive[g]!++;
        continue;
      }
      if (!Number.isFinite(h)) {
        throw inputError(`${entry.source} (${entry.name}): fixed head at row ${Math.floor(p / nx)}, col ${p % nx} is not a finite number`, {
          cell: { row: Math.floor(p / nx), col: p % nx },
        });
      }
      fixed[p] = 1;
      fixedHead[p] = h;
      fixedGroup[p] = g;
    }
  });

  let fixedCount = 0;
  let headSum = 0;
  for (let p = 0; p < n; p++) {
    if (fixed[p]) {
      fixedCount++;
      headSum += fixedHead[p]!;
    }
  }
  const datum = fixedCount > 0 ? headSum / fixedCount : 0;

  const { wellRate, wellCells, rechargeRate } = placeSources(model, active, fixed, fixedGroup, groups);

  const regions = checkRegions(grid, active, fixed, conductanceEast, conductanceSouth);

  // The linear system on unknown cells (active, not fixed); identity rows elsewhere.
  const diag = new Float64Array(n);
  const east = new Float64Array(n);
  const south = new Float64Array(n);
  const unknown = new Uint8Array(n);
  const rhs = new Float64Array(n);
  let unknownCount = 0;
  for (let p = 0; p < n; p++) {
    if (active[p] && !fixed[p]) {
      unknown[p] = 1;
      unknownCount++;
    }
  }
  for (let p = 0; p < n; p++) {
    if (!unknown[p]) {
      diag[p] = 1;
      continue;
    }
    const row = Math.floor(p / nx);
    const col = p - row * nx;
    let d = 0;
    let b = wellRate[p]! + rechargeRate[p]!;
    // Each neighbour: add its conductance to the diagonal; couple to unknowns, move fixed heads to b.
    if (col < nx - 1) {
      const c = conductanceEast[p]!;
      d += c;
      if (unknown[p + 1]) east[p] = c;
      else if (fixed[p + 1]) b += c * (fixedHead[p + 1]! - datum);
    }
    if (col > 0) {
      const c = conductanceEast[p - 1]!;
      d += c;
      if (fixed[p - 1]) b += c * (fixedHead[p - 1]! - datum);
    }
    if (row < ny - 1) {
      const c = conductanceSouth[p]!;
      d += c;
      if (unknown[p + nx]) south[p] = c;
      else if (fixed[p + nx]) b += c * (fixedHead[p + nx]! - datum);
    }
    if (row > 0) {
      const c = conductanceSouth[p - nx]!;
      d += c;
      if (fixed[p - nx]) b += c * (fixedHead[p - nx]! - datum);
    }
    diag[p] = d;
    rhs[p] = b;
  }

  return {
    grid,
    dx,
    dy,
    active,
    fixed,
    fixedHead,
    fixedGroup,
    groups,
    conductanceEast,
    conductanceSouth,
    wellRate,
    rechargeRate,
    wellCells,
    datum,
    operator: new GridOperator(nx, ny, diag, east, south, unknown),
    rhs,
    counts: { cells: n, active: activeCount, fixed: fixedCount, unknowns: unknownCount, fixedOnInactive, regions },
  };
}

/**
 * Sources of a model on a grid whose active and fixed cells are known: wells summed per cell (a well outside
 * the grid, in an inactive or in a fixed-head cell is an input error naming it), recharge as a volume rate on
 * unknown cells only (on a fixed cell it would leave at once).
 */
export function placeSources(
  model: ModelInput,
  active: Uint8Array,
  fixed: Uint8Array,
  fixedGroup: Int32Array,
  groups: string[],
): { wellRate: Float64Array; wellCells: Int32Array; rechargeRate: Float64Array } {
  const { grid } = model;
  const nx = grid.nx;
  const n = nx * grid.ny;
  const wellRate = new Float64Array(n);
  const wellCells = new Int32Array(model.wells.length);
  model.wells.forEach((well, w) => {
    const cell = cellAt(grid, well.x, well.y);
    if (!cell) {
      throw inputError(`well "${well.id}" (${well.source}) at x=${well.x}, y=${well.y} lies outside the grid`, {
        key: well.source,
        hint: 'check the coordinates and pointCrs: points are in the raster CRS unless pointCrs names another',
      });
    }
    const p = cell.row * nx + cell.col;
    if (!active[p]) {
      throw inputError(`well "${well.id}" (${well.source}) lies in an inactive cell (row ${cell.row}, col ${cell.col})`, {
        key: well.source,
        cell,
        hint: 'move the well into the active aquifer or check the conductivity raster there',
      });
    }
    if (fixed[p]) {
      throw inputError(
        `well "${well.id}" (${well.source}) lies in a fixed-head cell of "${groups[fixedGroup[p]!]}" (row ${cell.row}, col ${cell.col}): its water would come straight from the boundary`,
        { key: well.source, cell, hint: 'move the well off the fixed-head cells' },
      );
    }
    wellRate[p]! += well.rate;
    wellCells[w] = p;
  });
  const rechargeRate = new Float64Array(n);
  const recharge = model.recharge;
  const cellArea = cellWidth(grid) * cellHeight(grid);
  for (let p = 0; p < n; p++) {
    if (active[p] && !fixed[p]) {
      const r = typeof recharge === 'number' ? recharge : recharge[p]!;
      if (Number.isFinite(r)) rechargeRate[p] = r * cellArea;
    }
  }
  return { wellRate, wellCells, rechargeRate };
}

/**
 * The system of `model` on the operator of `base`, for a model that differs from base's only in its sources
 * (wells, recharge): conductances, fixed heads, datum and operator are shared (not copied); only the sources
 * and the right-hand side are new. The caller guarantees that the aquifer and fixed heads are the same.
 */
export function withSources(base: FlowSystem, model: ModelInput): FlowSystem {
  const { grid, active, fixed, fixedGroup, groups, fixedHead, conductanceEast, conductanceSouth, datum } = base;
  const { nx, ny } = grid;
  const { wellRate, wellCells, rechargeRate } = placeSources(model, active, fixed, fixedGroup, groups);
  const unknown = base.operator.unknown;
  const rhs = new Float64Array(nx * ny);
  for (let p = 0; p < rhs.length; p++) {
    if (!unknown[p]) continue;
    const row = Math.floor(p / nx);
    const col = p - row * nx;
    // The same right-hand side as assembleSystem: sources plus the fixed neighbours' heads times conductance.
    let b = wellRate[p]! + rechargeRate[p]!;
    if (col < nx - 1 && fixed[p + 1]) b += conductanceEast[p]! * (fixedHead[p + 1]! - datum);
    if (col > 0 && fixed[p - 1]) b += conductanceEast[p - 1]! * (fixedHead[p - 1]! - datum);
    if (row < ny - 1 && fixed[p + nx]) b += conductanceSouth[p]! * (fixedHead[p + nx]! - datum);
    if (row > 0 && fixed[p - nx]) b += conductanceSouth[p - nx]! * (fixedHead[p - nx]! - datum);
    rhs[p] = b;
  }
  return { ...base, grid: model.grid, wellRate, wellCells, rechargeRate, rhs };
}

/**
 * Label the connected active regions (cells joined by a non-zero conductance). A region without a
 * fixed-head cell has no unique steady head (the matrix is singular): refuse it, saying where it is.
 * Returns the number of regions.
 */
export function checkRegions(
  grid: Grid,
  active: Uint8Array,
  fixed: Uint8Array,
  conductanceEast: Float64Array,
  conductanceSouth: Float64Array,
): number {
  const { nx, ny } = grid;
  const n = nx * ny;
  const label = new Int32Array(n).fill(-1);
  const queue = new Int32Array(n);
  let regions = 0;
  const floating: string[] = [];
  let floatingCount = 0;
  for (let start = 0; start < n; start++) {
    if (!active[start] || label[start] !== -1) continue;
    let head = 0;
    let tail = 0;
    queue[tail++] = start;
    label[start] = regions;
    let hasFixed = false;
    let minRow = ny, maxRow = -1, minCol = nx, maxCol = -1, size = 0;
    while (head < tail) {
      const p = queue[head++]!;
      size++;
      if (fixed[p]) hasFixed = true;
      const row = Math.floor(p / nx);
      const col = p - row * nx;
      if (row < minRow) minRow = row;
      if (row > maxRow) maxRow = row;
      if (col < minCol) minCol = col;
      if (col > maxCol) maxCol = col;
      if (col < nx - 1 && conductanceEast[p]! > 0 && label[p + 1] === -1) { label[p + 1] = regions; queue[tail++] = p + 1; }
      if (col > 0 && conductanceEast[p - 1]! > 0 && label[p - 1] === -1) { label[p - 1] = regions; queue[tail++] = p - 1; }
      if (row < ny - 1 && conductanceSouth[p]! > 0 && label[p + nx] === -1) { label[p + nx] = regions; queue[tail++] = p + nx; }
      if (row > 0 && conductanceSouth[p - nx]! > 0 && label[p - nx] === -1) { label[p - nx] = regions; queue[tail++] = p - nx; }
    }
    if (!hasFixed) {
      floatingCount++;
      if (floating.length < 3) {
        const a = cellCentre(grid, minRow, minCol);
        const b = cellCentre(grid, maxRow, maxCol);
        floating.push(
          `${size} active cell${size === 1 ? '' : 's'} in rows ${minRow}-${maxRow}, cols ${minCol}-${maxCol} ` +
            `(x ${fmt(Math.min(a.x, b.x))} to ${fmt(Math.max(a.x, b.x))}, y ${fmt(Math.min(a.y, b.y))} to ${fmt(Math.max(a.y, b.y))})`,
        );
      }
    }
    regions++;
  }
  if (floatingCount > 0) {
    const more = floatingCount > floating.length ? `\n  and ${floatingCount - floating.length} more such region(s)` : '';
    throw inputError(
      `${floatingCount} connected active region${floatingCount === 1 ? ' has' : 's have'} no fixed head, so the steady head there is undetermined:\n  ` +
        floating.join('\n  ') + more,
      { hint: 'add a fixed head that reaches the region, or make it inactive (nodata in the conductivity raster)' },
    );
  }
  return regions;
}

function fmt(v: number): string {
  return Number.isInteger(v) ? String(v) : v.toFixed(2);
}

/** Full head field from a solution x = h - datum: unknowns from x, fixed cells their head, inactive NaN. */
export function headsFromSolution(system: FlowSystem, x: Float64Array, out = new Float64Array(x.length)): Float64Array {
  const { active, fixed, fixedHead, datum } = system;
  for (let p = 0; p < out.length; p++) {
    out[p] = !active[p] ? NaN : fixed[p] ? fixedHead[p]! : x[p]! + datum;
  }
  return out;
}
