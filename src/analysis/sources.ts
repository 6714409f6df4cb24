/**
 * Where added pumping comes from: the change of every water-budget term between a baseline and a variant.
 *
 * In a steady state every unit of added withdrawal is balanced by changes in the other terms: more inflow from,
 * or less outflow to, a fixed-head boundary (the depletion of river or lake flow, often called capture),
 * changed recharge, or changed injection. This is the budget view of Theis (1940, "The source of water derived
 * from wells", Civil Engineering 10(5), from memory); reporting the changes as fractions of the added pumping is
 * trade practice. The fractions of the non-well terms sum to 100 % up to the two runs' budget discrepancies.
 */
import type { BudgetPart, BudgetTerm, WaterBudget } from './budget.js';

export interface SourceOfWater {
  term: string;
  /** Change of inflow into the aquifer (variant - baseline), L^3/T. */
  inflowChange: number;
  /** Change of outflow out of the aquifer (variant - baseline), L^3/T. */
  outflowChange: number;
  /** inflowChange - outflowChange: what this term adds to the aquifer's supply (positive = more water from it). */
  netChange: number;
  /** 100 * netChange / addedPumping; null when the pumping did not change. */
  percentOfAddedPumping: number | null;
  /** Set on a sub-row (a reach of a river): the term it is part of. Sub-rows are not added to the total. */
  partOf?: string;
}

export interface SourcesOfWater {
  /** Increase of net well withdrawal (variant - baseline), L^3/T; positive when the variant pumps more. */
  addedPumping: number;
  /** Every term but the pumping, baseline order first, then terms only the variant has. */
  terms: SourceOfWater[];
  /** Sum of the terms' percentages (100 % up to the budget discrepancies); null when the pumping did not change. */
  totalPercent: number | null;
}

/** Below this share of the total flow a change of pumping counts as none (fractions of it would be noise). */
const NEGLIGIBLE = 1e-12;

export function sourcesOfWater(baseline: WaterBudget, variant: WaterBudget): SourcesOfWater {
  const names: string[] = [];
  for (const t of baseline.terms) if (!names.includes(t.term)) names.push(t.term);
  for (const t of variant.terms) if (!names.includes(t.term)) names.push(t.term);
  const find = (budget: WaterBudget, name: string): BudgetTerm =>
    budget.terms.find((t) => t.term === name) ?? { term: name, inflow: 0, outflow: 0 };

  const pumped = new Set([...baseline.terms, ...variant.terms].filter((t) => t.pumping).map((t) => t.term));
  let addedPumping = 0;
  for (const name of pumped) {
    const b = find(baseline, name);
    const v = find(variant, name);
    addedPumping += v.outflow - v.inflow - (b.outflow - b.inflow);
  }
  const scale = Math.max(baseline.totalIn, baseline.totalOut, variant.totalIn, variant.totalOut, 0);
  const meaningful = Math.abs(addedPumping) > NEGLIGIBLE * scale && addedPumping !== 0;

  const terms: SourceOfWater[] = [];
  let total = 0;
  for (const name of names) {
    if (pumped.has(name)) continue;
    const b = find(baseline, name);
    const v = find(variant, name);
    const inflowChange = v.inflow - b.inflow;
    const outflowChange = v.outflow - b.outflow;
    const netChange = inflowChange - outflowChange;
    const percent = meaningful ? (100 * netChange) / addedPumping : null;
    if (percent !== null) total += percent;
    terms.push({ term: name, inflowChange, outflowChange, netChange, percentOfAddedPumping: percent });
    // Reaches: one sub-row each, named "term: reach", after their term (not counted in the total).
    const partNames: string[] = [];
    for (const budget of [b, v]) for (const part of budget.parts ?? []) if (!partNames.includes(part.part)) partNames.push(part.part);
    for (const partName of partNames) {
      const findPart = (t: { parts?: BudgetPart[] }) => t.parts?.find((x) => x.part === partName) ?? { inflow: 0, outflow: 0 };
      const pb = findPart(b);
      const pv = findPart(v);
      const inChange = pv.inflow - pb.inflow;
      const outChange = pv.outflow - pb.outflow;
      const net = inChange - outChange;
      terms.push({
        term: `${name}: ${partName}`,
        inflowChange: inChange,
        outflowChange: outChange,
        netChange: net,
        percentOfAddedPumping: meaningful ? (100 * net) / addedPumping : null,
        partOf: name,
      });
    }
  }
  return { addedPumping, terms, totalPercent: meaningful ? total : null };
}
