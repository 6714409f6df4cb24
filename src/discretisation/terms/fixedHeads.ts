/**
 * Fixed heads (Dirichlet boundaries), one term per `fixedHeads` entry: the head is prescribed on the entry's active
 * cells, which are eliminated from the system (their known head moves to the neighbours' right-hand side during
 * assembly). Later entries win where entries overlap; data on inactive cells is ignored and counted. The flow of a
 * fixed-head cell is its net exchange with its active non-fixed neighbours (../shared/spec/discretisation.md);
 * flow between two fixed cells is not counted.
 */
import { inputError } from '../../errors.js';
import type { ModelInput } from '../../scenario/types.js';
import type { FlowTerm, MapCellStyle, TermContext, TermKind } from './types.js';

function build(model: ModelInput, context: TermContext): FlowTerm[] {
  const { grid, active } = context;
  const nx = grid.nx;
  const n = nx * grid.ny;
  // Resolve overlaps first: the last entry that names an active cell owns it.
  const owner = new Int32Array(n).fill(-1);
  const headAt = new Float64Array(n);
  const ignored = model.fixedHeads.map(() => 0);
  model.fixedHeads.forEach((entry, g) => {
    const { cells, heads } = entry;
    for (let k = 0; k < cells.length; k++) {
      const p = cells[k]!;
      const h = heads[k]!;
      if (!active[p]) {
        if (!entry.activeOnly) ignored[g]!++;
        continue;
      }
      if (!Number.isFinite(h)) {
        throw inputError(`${entry.source} (${entry.name}): fixed head at row ${Math.floor(p / nx)}, col ${p % nx} is not a finite number`, {
          cell: { row: Math.floor(p / nx), col: p % nx },
        });
      }
      owner[p] = g;
      headAt[p] = h;
    }
  });
  const counts = model.fixedHeads.map(() => 0);
  for (let p = 0; p < n; p++) if (owner[p]! >= 0) counts[owner[p]!]!++;
  const cellsOf = counts.map((c) => new Int32Array(c));
  const headsOf = counts.map((c) => new Float64Array(c));
  const fill = counts.map(() => 0);
  for (let p = 0; p < n; p++) {
    const g = owner[p]!;
    if (g < 0) continue;
    const k = fill[g]!++;
    cellsOf[g]![k] = p;
    headsOf[g]![k] = headAt[p]!;
  }
  return model.fixedHeads.map((entry, g) => fixedHeadTerm(entry.name, cellsOf[g]!, headsOf[g]!, ignored[g]!, context, g));
}

/**
 * Inks of the fixed-head groups on maps, in group order (then repeated with the other hatching angle): dark,
 * saturated colours that stay visible over both colour ramps and differ in hue (Okabe-Ito-like order, darkened).
 */
const GROUP_INKS = ['#0c2340', '#6a1b5d', '#005a4e', '#7a3b00', '#3b3b9a', '#7f1d1d'];

function groupStyle(g: number): MapCellStyle {
  const round = Math.floor(g / GROUP_INKS.length);
  return { pattern: round % 2 === 0 ? 'hatch' : 'cross-hatch', colour: GROUP_INKS[g % GROUP_INKS.length]!, angle: g % 2 === 0 ? 45 : -45 };
}

function fixedHeadTerm(
  label: string,
  cells: Int32Array,
  heads: Float64Array,
  ignoredCells: number,
  context: TermContext,
  g: number,
): FlowTerm {
  return {
    kind: 'fixed-head',
    label,
    cells,
    prescribedHeads: heads,
    anchors: true,
    nonlinear: false,
    mapLegend: `Fixed head: ${label}`,
    mapStyle: groupStyle(g),
    pumping: false,
    ignoredCells,
    // Eliminated: nothing to add; assembly moves the prescribed heads to the neighbours' right-hand side.
    linearise: () => {},
    updateState: () => 0,
    stateKey: () => '',
    flow(head, out) {
      // The context's arrays are filled once every Dirichlet term is known (assembly), so read them here, not at build.
      const { grid, fixed, conductanceEast: ce, conductanceSouth: cs } = context;
      const { nx, ny } = grid;
      for (let k = 0; k < cells.length; k++) {
        const p = cells[k]!;
        const row = Math.floor(p / nx);
        const col = p - row * nx;
        const h = head[p]!;
        let f = 0;
        // Conductance is zero towards inactive cells; skip fixed neighbours explicitly.
        if (col < nx - 1 && !fixed[p + 1] && ce[p]! > 0) f += ce[p]! * (h - head[p + 1]!);
        if (col > 0 && !fixed[p - 1] && ce[p - 1]! > 0) f += ce[p - 1]! * (h - head[p - 1]!);
        if (row < ny - 1 && !fixed[p + nx] && cs[p]! > 0) f += cs[p]! * (h - head[p + nx]!);
        if (row > 0 && !fixed[p - nx] && cs[p - nx]! > 0) f += cs[p - nx]! * (h - head[p - nx]!);
        out[k] = f;
      }
    },
    notes: (done) =>
      ignoredCells > 0
        ? [`${ignoredCells} fixed-head cell(s) of "${label}" fall on inactive cells and ${done ? 'were' : 'will be'} ignored`]
        : [],
  };
}

export const fixedHeadKind: TermKind = { kind: 'fixed-head', dirichlet: true, rhsOnly: false, build };
