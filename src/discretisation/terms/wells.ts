/**
 * Wells: one term for all wells of a model (budget row "wells"), a prescribed rate per well summed per cell
 * (negative = withdrawal). A well outside the grid, in an inactive cell or in a fixed-head cell is an input error
 * naming it. Its change between two runs is the pumping that `compare` splits into sources of water.
 * In an unconfined or convertible aquifer a well delivers its rate only while its cell is wet: the fraction a drying
 * cell can give comes from ../aquifer.ts (deliveryFraction), which makes the term nonlinear; the rate not delivered
 * is reported by the analysis (src/analysis/wellbore.ts), never dropped silently.
 */
import { cellAt } from '../../grid.js';
import { inputError } from '../../errors.js';
import type { ModelInput } from '../../scenario/types.js';
import { linearTerm, type FlowTerm, type TermContext, type TermKind } from './types.js';
import { deliveryFraction, deliverySlope } from '../aquifer.js';

function build(model: ModelInput, context: TermContext): FlowTerm[] {
  const { grid, active, fixed, fixedGroup, groups } = context;
  const nx = grid.nx;
  const perCell = new Map<number, number>();
  for (const well of model.wells) {
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
    // Summed in input order from 0, as a per-cell rate array would be.
    perCell.set(p, (perCell.get(p) ?? 0) + well.rate);
  }
  const cells = Int32Array.from([...perCell.keys()].sort((a, b) => a - b));
  const rates = Float64Array.from(cells, (p) => perCell.get(p)!);
  const table = context.waterTable ?? null;
  if (table !== null) {
    // Withdrawals from a water table: the rate a drying cell can deliver (injection is not limited).
    return [
      {
        ...linearTerm,
        nonlinear: true,
        kind: 'wells',
        label: 'wells',
        cells,
        prescribedHeads: null,
        anchors: false,
        mapLegend: null,
        pumping: true,
        linearise(head, diag, rhs) {
          // Q f(h) ~ Q f(h0) + Q f'(h0) (h - h0) (Newton's linearisation of the delivered rate): -Q f'(h0) >= 0 on the
          // diagonal keeps the operator symmetric positive definite and lets a drying cell settle in one system.
          const { datum } = context;
          for (let k = 0; k < cells.length; k++) {
            const p = cells[k]!;
            const q = rates[k]!;
            if (q >= 0) {
              rhs[p]! += q;
              continue;
            }
            const h0 = head[p]!;
            const c = -q * deliverySlope(table, p, h0);
            diag[p]! += c;
            rhs[p]! += q * deliveryFraction(table, p, h0) + c * (h0 - datum);
          }
        },
        flow(head, out) {
          for (let k = 0; k < cells.length; k++) {
            const p = cells[k]!;
            const q = rates[k]!;
            out[k] = q < 0 ? q * deliveryFraction(table, p, head[p]!) : q;
          }
        },
      },
    ];
  }
  return [
    {
      ...linearTerm,
      kind: 'wells',
      label: 'wells',
      cells,
      prescribedHeads: null,
      anchors: false,
      mapLegend: null,
      pumping: true,
      linearise(_head, _diag, rhs) {
        for (let k = 0; k < cells.length; k++) rhs[cells[k]!]! += rates[k]!;
      },
      flow(_head, out) {
        out.set(rates);
      },
    },
  ];
}

export const wellKind: TermKind = { kind: 'wells', dirichlet: false, rhsOnly: true, build };
