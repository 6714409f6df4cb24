/**
 * Head-dependent boundaries (../shared/spec/physics.md), one term per `headDependent` entry: per cell p with
 * conductance C_p and stage/level H_p,
 *
 *   linear  Q = C (H - h)                                  always
 *   river   Q = C (H - h) while h > B;  C (H - B) once h <= B   (B the bed bottom; none given: always linear)
 *   drain   Q = C (H - h) while h > H;  0 otherwise             (removes water only)
 *
 * Each cell has a switch state: 1 = the head-dependent branch (C on the diagonal, C·H on the right-hand side),
 * 0 = the other branch (a constant loss, or nothing). Every cell starts at 1; the outer loop (../outerLoop.ts)
 * updates the states from the heads and solves again until no cell switches. A cell in state 1 with C > 0
 * anchors its region's level; a river below its bed or a dry drain does not.
 *
 * A cell both fixed-head and head-dependent is an input error naming both entries; cells on inactive ground are
 * ignored and counted (an edge by definition covers only its active cells).
 */
import { inputError } from '../../errors.js';
import type { HeadDependentInput } from '../../scenario/types.js';
import type { ModelInput } from '../../scenario/types.js';
import type { FlowTerm, MapCellStyle, TermContext, TermKind } from './types.js';

// Patterns other than the fixed heads' diagonal hatching, so that a head-dependent boundary never reads as a fixed head.
const STYLES: Record<HeadDependentInput['kind'], { style: MapCellStyle; legend: (name: string) => string }> = {
  river: { style: { pattern: 'cross-hatch', colour: '#1f63b5', angle: 0 }, legend: (name) => `River "${name}" (head-dependent)` },
  drain: { style: { pattern: 'dots', colour: '#9a5200' }, legend: (name) => `Drain "${name}" (outflow only)` },
  linear: { style: { pattern: 'outline', colour: '#6a2c91' }, legend: (name) => `Head-dependent "${name}"` },
};

function build(model: ModelInput, context: TermContext): FlowTerm[] {
  return (model.headDependent ?? []).map((entry) => headDependentTerm(entry, context));
}

function headDependentTerm(entry: HeadDependentInput, context: TermContext): FlowTerm {
  const { grid, active, fixed, fixedGroup, groups } = context;
  const nx = grid.nx;
  let ignored = 0;
  let kept = 0;
  const keep = new Uint8Array(entry.cells.length);
  for (let k = 0; k < entry.cells.length; k++) {
    const p = entry.cells[k]!;
    if (!active[p]) {
      if (!entry.activeOnly) ignored++;
      continue;
    }
    const cell = { row: Math.floor(p / nx), col: p % nx };
    if (fixed[p]) {
      throw inputError(
        `${entry.source} ("${entry.name}") and the fixed-head entry "${groups[fixedGroup[p]!]}" both hold the cell at row ${cell.row}, col ${cell.col}: a cell is either fixed-head or head-dependent`,
        {
          key: entry.source,
          cell,
          hint: `remove the cell from one of them (a fixed head already takes any water; "${entry.name}" would add nothing there)`,
        },
      );
    }
    if (!Number.isFinite(entry.heads[k]!)) {
      throw inputError(
        `${entry.source} ("${entry.name}"): the ${entry.kind === 'drain' ? 'level' : 'stage'} at row ${cell.row}, col ${cell.col} is not a finite number`,
        { key: entry.source, cell },
      );
    }
    if (!(entry.conductance[k]! >= 0) || !Number.isFinite(entry.conductance[k]!)) {
      throw inputError(
        `${entry.source} ("${entry.name}"): the conductance at row ${cell.row}, col ${cell.col} is ${entry.conductance[k]}, not a number >= 0`,
        { key: entry.source, cell },
      );
    }
    keep[k] = 1;
    kept++;
  }
  const cells = new Int32Array(kept);
  const stage = new Float64Array(kept);
  const conductance = new Float64Array(kept);
  // The level below which the cell switches: the bed bottom (river), the level (drain); -Infinity: never.
  const floor = new Float64Array(kept);
  const part = entry.reach ? new Int32Array(kept) : null;
  for (let k = 0, j = 0; k < entry.cells.length; k++) {
    if (!keep[k]) continue;
    cells[j] = entry.cells[k]!;
    stage[j] = entry.heads[k]!;
    conductance[j] = entry.conductance[k]!;
    const b = entry.bottom ? entry.bottom[k]! : NaN;
    floor[j] = entry.kind === 'drain' ? entry.heads[k]! : entry.kind === 'river' && Number.isFinite(b) ? b : -Infinity;
    if (part) part[j] = entry.reach![k]!;
    j++;
  }
  const switching = entry.kind === 'drain' || (entry.kind === 'river' && floor.some((f) => f > -Infinity));
  const state = new Uint8Array(kept).fill(1);
  const drain = entry.kind === 'drain';
  const { style, legend } = STYLES[entry.kind];
  const label = entry.name;
  return {
    kind: 'head-dependent',
    label,
    cells,
    prescribedHeads: null,
    anchors: true,
    nonlinear: switching,
    mapLegend: legend(label),
    mapStyle: style,
    exchangeRaster: true,
    pumping: false,
    ignoredCells: ignored,
    parts: part ? { names: entry.reachNames, of: part } : null,
    linearise(_head, diag, rhs) {
      const datum = context.datum;
      for (let k = 0; k < cells.length; k++) {
        const p = cells[k]!;
        const c = conductance[k]!;
        if (state[k]) {
          diag[p]! += c;
          rhs[p]! += c * (stage[k]! - datum);
        } else if (!drain) {
          // A river below its bed loses at the fixed rate C (H - B).
          rhs[p]! += c * (stage[k]! - floor[k]!);
        }
      }
    },
    updateState(head) {
      if (!switching) return 0;
      let changes = 0;
      for (let k = 0; k < cells.length; k++) {
        const s = head[cells[k]!]! > floor[k]! ? 1 : 0;
        if (s !== state[k]) {
          state[k] = s;
          changes++;
        }
      }
      return changes;
    },
    stateKey() {
      if (!switching) return '';
      // One character per 6 cells keeps the key short on long rivers.
      let key = '';
      for (let k = 0; k < state.length; k += 6) {
        let bits = 0;
        for (let j = 0; j < 6 && k + j < state.length; j++) bits |= state[k + j]! << j;
        key += String.fromCharCode(48 + bits);
      }
      return key;
    },
    flow(head, out) {
      for (let k = 0; k < cells.length; k++) {
        const h = head[cells[k]!]!;
        const c = conductance[k]!;
        if (h > floor[k]!) out[k] = c * (stage[k]! - h);
        else out[k] = drain ? 0 : c * (stage[k]! - floor[k]!);
      }
    },
    markAnchors(mask) {
      for (let k = 0; k < cells.length; k++) if (state[k] && conductance[k]! > 0) mask[cells[k]!] = 1;
    },
    notes(done) {
      const notes: string[] = [];
      if (ignored > 0) notes.push(`${ignored} cell(s) of "${label}" fall on inactive cells and ${done ? 'were' : 'will be'} ignored`);
      if (done && switching) {
        let off = 0;
        for (let k = 0; k < state.length; k++) if (!state[k]) off++;
        if (off > 0) {
          notes.push(
            drain
              ? `${off} of ${cells.length} cell(s) of drain "${label}" are dry (head at or below the drain level)`
              : `${off} of ${cells.length} cell(s) of river "${label}" have the head at or below the bed bottom and lose water at the fixed rate`,
          );
        }
      }
      return notes;
    },
  };
}

export const headDependentKind: TermKind = { kind: 'head-dependent', dirichlet: false, rhsOnly: false, build };
