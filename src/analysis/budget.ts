import type { FlowSystem } from '../discretisation/assemble.js';

export interface BudgetTerm {
  term: string;
  /** Into the aquifer, L^3/T (>= 0). */
  inflow: number;
  /** Out of the aquifer, L^3/T (>= 0). */
  outflow: number;
}

export interface WaterBudget {
  terms: BudgetTerm[];
  totalIn: number;
  totalOut: number;
  /** 100*(in - out)/((in + out)/2); 0 when nothing flows. */
  discrepancyPercent: number;
}

/**
 * Water budget of a solved head field (../shared/spec/discretisation.md): for each fixed-head cell its net
 * exchange F = sum_q C_pq (h_p - h_q) with its active non-fixed neighbours counts as inflow when F > 0 and as
 * outflow when F < 0, summed per group; flow between two fixed cells is not counted; wells and recharge count
 * per cell by sign.
 */
export function waterBudget(system: FlowSystem, head: Float64Array): WaterBudget {
  const { grid, fixed, fixedGroup, groups, conductanceEast: ce, conductanceSouth: cs, wellRate, rechargeRate } = system;
  const { nx, ny } = grid;
  const n = nx * ny;
  const groupIn = new Float64Array(groups.length);
  const groupOut = new Float64Array(groups.length);
  let wellIn = 0, wellOut = 0, rechargeIn = 0, rechargeOut = 0;
  for (let p = 0; p < n; p++) {
    if (fixed[p]) {
      const row = Math.floor(p / nx);
      const col = p - row * nx;
      const h = head[p]!;
      let f = 0;
      // Conductance is zero towards inactive cells; skip fixed neighbours explicitly.
      if (col < nx - 1 && !fixed[p + 1] && ce[p]! > 0) f += ce[p]! * (h - head[p + 1]!);
      if (col > 0 && !fixed[p - 1] && ce[p - 1]! > 0) f += ce[p - 1]! * (h - head[p - 1]!);
      if (row < ny - 1 && !fixed[p + nx] && cs[p]! > 0) f += cs[p]! * (h - head[p + nx]!);
      if (row > 0 && !fixed[p - nx] && cs[p - nx]! > 0) f += cs[p - nx]! * (h - head[p - nx]!);
      const g = fixedGroup[p]!;
      if (f > 0) groupIn[g]! += f;
      else groupOut[g]! -= f;
    } else {
      const w = wellRate[p]!;
      if (w > 0) wellIn += w;
      else wellOut -= w;
      const r = rechargeRate[p]!;
      if (r > 0) rechargeIn += r;
      else rechargeOut -= r;
    }
  }
  const terms: BudgetTerm[] = groups.map((name, g) => ({ term: name, inflow: groupIn[g]!, outflow: groupOut[g]! }));
  terms.push({ term: 'wells', inflow: wellIn, outflow: wellOut });
  terms.push({ term: 'recharge', inflow: rechargeIn, outflow: rechargeOut });
  let totalIn = 0;
  let totalOut = 0;
  for (const t of terms) {
    totalIn += t.inflow;
    totalOut += t.outflow;
  }
  const mean = (totalIn + totalOut) / 2;
  return { terms, totalIn, totalOut, discrepancyPercent: mean > 0 ? (100 * (totalIn - totalOut)) / mean : 0 };
}
