import type { FlowSystem } from '../discretisation/assemble.js';

export interface BudgetTerm {
  term: string;
  /** Into the aquifer, L^3/T (>= 0). */
  inflow: number;
  /** Out of the aquifer, L^3/T (>= 0). */
  outflow: number;
  /** True for the term whose change `compare` reports as added pumping (the wells). */
  pumping?: boolean;
  /** Sub-rows of the term (e.g. a river's reaches), which sum to the term's row; absent when it has none. */
  parts?: BudgetPart[];
}

export interface BudgetPart {
  part: string;
  inflow: number;
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
 * Water budget of a solved head field (../shared/spec/discretisation.md, physics.md): one row per flow term, in the
 * terms' order; each cell's flow into the aquifer counts as inflow when positive and as outflow when negative
 * (a fixed-head cell's flow is its net exchange with its non-fixed neighbours, so flow between two fixed cells
 * is not counted).
 */
export function waterBudget(system: FlowSystem, head: Float64Array): WaterBudget {
  const terms: BudgetTerm[] = system.terms.map((term) => {
    const flow = new Float64Array(term.cells.length);
    term.flow(head, flow);
    let inflow = 0;
    let outflow = 0;
    for (let k = 0; k < flow.length; k++) {
      const f = flow[k]!;
      if (f > 0) inflow += f;
      else outflow -= f;
    }
    const parts = term.parts ? partSums(term.parts, flow) : null;
    return { term: term.label, inflow, outflow, ...(term.pumping ? { pumping: true } : {}), ...(parts ? { parts } : {}) };
  });
  let totalIn = 0;
  let totalOut = 0;
  for (const t of terms) {
    totalIn += t.inflow;
    totalOut += t.outflow;
  }
  const mean = (totalIn + totalOut) / 2;
  return { terms, totalIn, totalOut, discrepancyPercent: mean > 0 ? (100 * (totalIn - totalOut)) / mean : 0 };
}

/** Per part: cell flows summed as the term's row is (positive = inflow). */
function partSums(parts: { readonly names: readonly string[]; readonly of: Int32Array }, flow: Float64Array): BudgetPart[] {
  const inflow = new Float64Array(parts.names.length);
  const outflow = new Float64Array(parts.names.length);
  for (let k = 0; k < flow.length; k++) {
    const f = flow[k]!;
    const i = parts.of[k]!;
    if (f > 0) inflow[i]! += f;
    else outflow[i]! -= f;
  }
  return parts.names.map((part, i) => ({ part, inflow: inflow[i]!, outflow: outflow[i]! }));
}
