import { sharedFloat64Array, sharedUint8Array } from '../executor/shared.js';
import { cellCentre, cellHeight, cellWidth, type Grid } from '../grid.js';
import { inputError, PiezomapError } from '../errors.js';
import { fieldAt } from '../field.js';
import { TERM_KINDS } from './terms/registry.js';
import { anchorMask, type FlowTerm, type TermContext } from './terms/types.js';
import type { ModelInput } from '../scenario/types.js';
import { GridOperator } from '../solvers/operator.js';
import { buildWaterTable, defaultWaterTableStart, updateSaturation, waterTableConductances, type WaterTable } from './aquifer.js';

/**
 * The discretised flow problem of one scenario: the physical conductances (for budgets and fluxes), the flow
 * terms (./terms: fixed heads, wells, recharge), the prescribed cells they fix, and the linear system A x = b the
 * solvers see, linearised about the starting heads.
 * See ../shared/spec/discretisation.md. Everything is full-grid (nx*ny), indexed `row * nx + col`.
 */
export interface FlowSystem {
  grid: Grid;
  dx: number;
  dy: number;
  /** 1 = active cell. */
  active: Uint8Array;
  /** 1 = prescribed (Dirichlet, e.g. fixed-head) cell, always active. */
  fixed: Uint8Array;
  /** Prescribed head on fixed cells, NaN elsewhere. */
  fixedHead: Float64Array;
  /** Index into `groups` for fixed cells, -1 elsewhere. */
  fixedGroup: Int32Array;
  /** Labels of the Dirichlet terms (fixed-head groups), in scenario order. */
  groups: string[];
  /** Physical conductance between p and p+1 (both active), 0 otherwise. L^2/T. */
  conductanceEast: Float64Array;
  /** Physical conductance between p and p+nx (both active), 0 otherwise. */
  conductanceSouth: Float64Array;
  /** Every source, sink and boundary, in budget order (./terms/registry.ts). */
  terms: FlowTerm[];
  /**
   * Heads are solved as x = h - datum so that the right-hand side holds flows, not head levels:
   * with absolute heads a large fixed-head term dominates ||b|| and a small relative residual can still
   * leave visible head errors. datum = mean prescribed head.
   */
  datum: number;
  /**
   * Unconfined or convertible aquifers: the head-dependent saturated thickness (./aquifer.ts), null for confined.
   * Its conductances are in conductanceEast/South, updated in place by the outer iteration.
   */
  waterTable: WaterTable | null;
  /** Heads the system is linearised about before any solve (and the outer iteration's start). */
  startHead: Float64Array;
  operator: GridOperator;
  /** Right-hand side for x = h - datum; zero on identity rows. */
  rhs: Float64Array;
  counts: {
    cells: number;
    active: number;
    fixed: number;
    unknowns: number;
    /** Prescribed-head data that fell on inactive cells and was ignored, per group. */
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
    const b = fieldAt(thickness, p);
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

  // Dirichlet terms first: their cells are prescribed and eliminated.
  const context: TermContext = {
    grid,
    dx,
    dy,
    active,
    fixed: new Uint8Array(n),
    fixedGroup: new Int32Array(n).fill(-1),
    groups: [],
    datum: 0,
    conductanceEast,
    conductanceSouth,
  };
  const dirichlet = TERM_KINDS.filter((k) => k.dirichlet).flatMap((k) => k.build(model, context));
  const fixedHead = new Float64Array(n).fill(NaN);
  const { fixed, fixedGroup } = context;
  dirichlet.forEach((term, g) => {
    const heads = term.prescribedHeads!;
    for (let k = 0; k < term.cells.length; k++) {
      const p = term.cells[k]!;
      fixed[p] = 1;
      fixedHead[p] = heads[k]!;
      fixedGroup[p] = g;
    }
  });
  context.groups = dirichlet.map((t) => t.label);

  let fixedCount = 0;
  let headSum = 0;
  for (let p = 0; p < n; p++) {
    if (fixed[p]) {
      fixedCount++;
      headSum += fixedHead[p]!;
    }
  }
  const datum = fixedCount > 0 ? headSum / fixedCount : 0;
  context.datum = datum;

  // Water-table aquifers: conductances from the saturated thickness at the starting heads (replacing the above).
  const type = model.aquiferType ?? 'confined';
  let waterTable: WaterTable | null = null;
  let initial = startingHeads(fixedHead, active, datum);
  if (type !== 'confined') {
    initial =
      model.initialHead === undefined
        ? defaultWaterTableStart(active, fixed, fixedHead, datum, model.aquiferBottom!, model.aquiferTop)
        : startFromField(model.initialHead, fixedHead, active);
    waterTable = buildWaterTable(type, conductivity, anisotropy, model.aquiferBottom!, model.aquiferTop, active, initial)!;
    updateSaturation(waterTable, initial, active);
    waterTableConductances(waterTable, nx, ny, dx, dy, active, conductanceEast, conductanceSouth);
  }
  context.waterTable = waterTable;

  const others = TERM_KINDS.filter((k) => !k.dirichlet).flatMap((k) => k.build(model, context));
  // Budget order: the registry's, Dirichlet kinds included where the registry lists them.
  const terms = TERM_KINDS.flatMap((k) =>
    k.dirichlet ? dirichlet.filter((t) => t.kind === k.kind) : others.filter((t) => t.kind === k.kind),
  );

  const anchor = anchorMask(terms, n);
  const regions = checkRegions(grid, active, anchor, conductanceEast, conductanceSouth);

  // The operator's bands in shared memory: a solve worker uses them without a copy (src/executor/shared.ts).
  const unknown = sharedUint8Array(n);
  let unknownCount = 0;
  for (let p = 0; p < n; p++) {
    if (active[p] && !fixed[p]) {
      unknown[p] = 1;
      unknownCount++;
    }
  }
  // The couplings between unknowns depend on the aquifer only; diagonal and right-hand side also on the terms.
  const east = sharedFloat64Array(n);
  const south = sharedFloat64Array(n);
  for (let p = 0; p < n; p++) {
    if (!unknown[p]) continue;
    if (unknown[p + 1] && (p + 1) % nx !== 0) east[p] = conductanceEast[p]!;
    if (p + nx < n && unknown[p + nx]) south[p] = conductanceSouth[p]!;
  }
  const base: Omit<FlowSystem, 'operator' | 'rhs' | 'startHead'> = {
    grid,
    dx,
    dy,
    active,
    fixed,
    fixedHead,
    fixedGroup,
    groups: context.groups,
    conductanceEast,
    conductanceSouth,
    terms,
    datum,
    waterTable,
    counts: {
      cells: n,
      active: activeCount,
      fixed: fixedCount,
      unknowns: unknownCount,
      fixedOnInactive: dirichlet.map((t) => t.ignoredCells),
      regions,
    },
  };
  const { diag, rhs } = linearise(base, unknown, initial);
  return { ...base, startHead: initial, operator: new GridOperator(nx, ny, diag, east, south, unknown), rhs };
}

/** Starting heads from a given field (aquifer.initialHead): prescribed cells keep their heads, inactive NaN. */
function startFromField(field: Float64Array | number, fixedHead: Float64Array, active: Uint8Array): Float64Array {
  const head = new Float64Array(fixedHead.length);
  for (let p = 0; p < head.length; p++) head[p] = !active[p] ? NaN : fixedHead[p] === fixedHead[p] ? fixedHead[p]! : fieldAt(field, p);
  return head;
}

/** Heads to linearise about before any solve: the prescribed heads, the datum elsewhere on the active area. */
export function startingHeads(fixedHead: Float64Array, active: Uint8Array, datum: number): Float64Array {
  const head = new Float64Array(fixedHead.length);
  for (let p = 0; p < head.length; p++) head[p] = !active[p] ? NaN : fixedHead[p] === fixedHead[p] ? fixedHead[p]! : datum;
  return head;
}

/**
 * The operator's diagonal and the right-hand side for x = h - datum, with every term linearised about `head`:
 * on unknown cells the sum of the conductances to the neighbours plus the terms' diagonal, and the terms' right-hand
 * side plus the prescribed neighbours' heads times conductance (Dirichlet elimination); identity rows elsewhere.
 * The one place a right-hand side is built (assembly, variants on a shared operator, outer iterations).
 */
export function linearise(
  system: Pick<FlowSystem, 'grid' | 'fixed' | 'fixedHead' | 'conductanceEast' | 'conductanceSouth' | 'terms' | 'datum'>,
  unknown: Uint8Array,
  head: Float64Array,
): { diag: Float64Array; rhs: Float64Array } {
  const { grid, fixed, fixedHead, conductanceEast, conductanceSouth, terms, datum } = system;
  const { nx, ny } = grid;
  const n = nx * ny;
  const diag = sharedFloat64Array(n);
  // in shared memory too: a solve worker reads it without a copy
  const rhs = sharedFloat64Array(n);
  for (const term of terms) term.linearise(head, diag, rhs);
  for (let p = 0; p < n; p++) {
    if (!unknown[p]) {
      diag[p] = 1;
      rhs[p] = 0;
      continue;
    }
    const row = Math.floor(p / nx);
    const col = p - row * nx;
    let d = 0;
    let b = rhs[p]!;
    // Each neighbour: add its conductance to the diagonal; move prescribed heads to b.
    if (col < nx - 1) {
      const c = conductanceEast[p]!;
      d += c;
      if (fixed[p + 1]) b += c * (fixedHead[p + 1]! - datum);
    }
    if (col > 0) {
      const c = conductanceEast[p - 1]!;
      d += c;
      if (fixed[p - 1]) b += c * (fixedHead[p - 1]! - datum);
    }
    if (row < ny - 1) {
      const c = conductanceSouth[p]!;
      d += c;
      if (fixed[p + nx]) b += c * (fixedHead[p + nx]! - datum);
    }
    if (row > 0) {
      const c = conductanceSouth[p - nx]!;
      d += c;
      if (fixed[p - nx]) b += c * (fixedHead[p - nx]! - datum);
    }
    diag[p] = d + diag[p]!;
    rhs[p] = b;
  }
  return { diag, rhs };
}

/**
 * The system of `model` on the operator of `base`, for a model that differs from base's only in terms that add
 * to the right-hand side alone (wells, recharge): conductances, prescribed heads, datum and operator are shared
 * (not copied); the terms and the right-hand side are new, built by the same code as assembleSystem's. The caller
 * guarantees that the aquifer and the prescribed heads are the same.
 */
export function withSources(base: FlowSystem, model: ModelInput): FlowSystem {
  const context: TermContext = {
    grid: base.grid,
    dx: base.dx,
    dy: base.dy,
    active: base.active,
    fixed: base.fixed,
    fixedGroup: base.fixedGroup,
    groups: base.groups,
    datum: base.datum,
    conductanceEast: base.conductanceEast,
    conductanceSouth: base.conductanceSouth,
    waterTable: base.waterTable,
  };
  const terms = TERM_KINDS.flatMap((k) => (k.rhsOnly ? k.build(model, context) : base.terms.filter((t) => t.kind === k.kind)));
  const system = { ...base, grid: model.grid, terms };
  const unknown = base.operator.unknown;
  const { diag, rhs } = linearise(system, unknown, startingHeads(base.fixedHead, base.active, base.datum));
  for (let p = 0; p < diag.length; p++) {
    if (diag[p] !== base.operator.diag[p]) throw new PiezomapError('internal', 'a variant on the shared operator changed its diagonal');
  }
  return { ...system, rhs };
}

/**
 * Label the connected active regions (cells joined by a non-zero conductance). A region without an
 * anchor (a cell of a term that fixes the level, e.g. a fixed head) has no unique steady head (the matrix is singular): refuse it, saying where it is.
 * Returns the number of regions.
 */
export function checkRegions(
  grid: Grid,
  active: Uint8Array,
  anchor: Uint8Array,
  conductanceEast: Float64Array,
  conductanceSouth: Float64Array,
  hint?: string,
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
    let minRow = ny,
      maxRow = -1,
      minCol = nx,
      maxCol = -1,
      size = 0;
    while (head < tail) {
      const p = queue[head++]!;
      size++;
      if (anchor[p]) hasFixed = true;
      const row = Math.floor(p / nx);
      const col = p - row * nx;
      if (row < minRow) minRow = row;
      if (row > maxRow) maxRow = row;
      if (col < minCol) minCol = col;
      if (col > maxCol) maxCol = col;
      if (col < nx - 1 && conductanceEast[p]! > 0 && label[p + 1] === -1) {
        label[p + 1] = regions;
        queue[tail++] = p + 1;
      }
      if (col > 0 && conductanceEast[p - 1]! > 0 && label[p - 1] === -1) {
        label[p - 1] = regions;
        queue[tail++] = p - 1;
      }
      if (row < ny - 1 && conductanceSouth[p]! > 0 && label[p + nx] === -1) {
        label[p + nx] = regions;
        queue[tail++] = p + nx;
      }
      if (row > 0 && conductanceSouth[p - nx]! > 0 && label[p - nx] === -1) {
        label[p - nx] = regions;
        queue[tail++] = p - nx;
      }
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
      `${floatingCount} connected active region${floatingCount === 1 ? ' has' : 's have'} no fixed head and no boundary or leakage that sets its level, so the steady head there is undetermined:\n  ` +
        floating.join('\n  ') +
        more,
      {
        hint:
          hint ??
          'add a fixed head (or a head-dependent boundary) that reaches the region, or make it inactive (nodata in the conductivity raster)',
      },
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
