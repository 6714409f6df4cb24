/**
 * Drawdown of a variant against a baseline (baseline head - variant head, positive = lowered): the field, its
 * extremes, the values at points (observations, receptors) and at well bores, and the withdrawal of a well list.
 */
import type { Grid } from '../grid.js';
import type { WellInput } from '../scenario/types.js';
import { headAtPoint } from './points.js';
import type { WellboreResult } from './wellbore.js';

/** A drawdown read at a point: bilinear between the surrounding cell centres when all are active, else the cell value. */
export interface PointDrawdown {
  id: string;
  x: number;
  y: number;
  /** NaN where the point is inactive in the variant. */
  drawdown: number;
}

export interface WellboreDrawdown {
  id: string;
  rate: number;
  /** Head at the bore before the change: the baseline well-bore head if the well pumps in the baseline, else the baseline cell head. */
  baselineHead: number;
  wellboreHead: number;
  drawdown: number;
  minimumHead: number | null;
  belowMinimum: boolean;
}

/** baseline - variant head, NaN where either is inactive. */
export function drawdownField(
  baselineHead: Float64Array,
  variantHead: Float64Array,
  out = new Float64Array(baselineHead.length),
): Float64Array {
  for (let p = 0; p < out.length; p++) out[p] = baselineHead[p]! - variantHead[p]!;
  return out;
}

/** Safety factor on the solver's stopping level, and rounding in machine epsilons (see drawdownNoiseLevel). */
const SOLVER_SAFETY = 100;
const ROUNDING_EPSILONS = 1000;

/**
 * The smallest change of head a comparison can tell from noise, in length units: for each of the two solves, its
 * final relative residual times the largest |head - datum| (the size of the solved unknowns) times a safety factor
 * of 100 (the error in heads is the residual scaled by the inverse operator, which this does not bound: common
 * practice, an estimate), plus 1000 machine epsilons of the largest |head| for rounding in the subtraction.
 * Drawdowns smaller than this (e.g. -3.7e-13 m in cells a variant does not reach) are rounding, not results.
 */
export function drawdownNoiseLevel(runs: ReadonlyArray<{ relativeResidual: number; head: Float64Array; datum: number }>): number {
  let level = 0;
  let largestHead = 0;
  for (const run of runs) {
    let largest = 0;
    for (let p = 0; p < run.head.length; p++) {
      const h = run.head[p]!;
      if (h !== h) continue;
      const x = Math.abs(h - run.datum);
      if (x > largest) largest = x;
      if (Math.abs(h) > largestHead) largestHead = Math.abs(h);
    }
    const residual = Number.isFinite(run.relativeResidual) ? run.relativeResidual : 0;
    level += SOLVER_SAFETY * residual * largest;
  }
  return level + ROUNDING_EPSILONS * Number.EPSILON * largestHead;
}

/** Set every value with |value| < level to 0 (NaN stays); returns how many were set. */
export function zeroBelow(field: Float64Array, level: number): number {
  let count = 0;
  for (let p = 0; p < field.length; p++) {
    const v = field[p]!;
    if (v !== 0 && Math.abs(v) < level) {
      field[p] = 0;
      count++;
    }
  }
  return count;
}

/** Largest drawdown and where (null when there is none), and the largest rise as a positive number (0 when none). */
export function drawdownExtremes(
  grid: Grid,
  drawdown: Float64Array,
): { maxDrawdown: { value: number; row: number; col: number; x: number; y: number } | null; maxRise: number } {
  let best = -Infinity;
  let at = -1;
  let maxRise = 0;
  for (let p = 0; p < drawdown.length; p++) {
    const s = drawdown[p]!;
    if (s > best) {
      best = s;
      at = p;
    }
    if (-s > maxRise) maxRise = -s;
  }
  if (at < 0) return { maxDrawdown: null, maxRise };
  const row = Math.floor(at / grid.nx);
  const col = at - row * grid.nx;
  const t = grid.transform;
  return { maxDrawdown: { value: best, row, col, x: t[0] + (col + 0.5) * t[1], y: t[3] + (row + 0.5) * t[5] }, maxRise };
}

/** The drawdown at a point in cell `cell`; NaN without a drawdown field. */
export function pointDrawdown(grid: Grid, drawdown: Float64Array | null, id: string, x: number, y: number, cell: number): PointDrawdown {
  const value = drawdown === null ? NaN : (headAtPoint(grid, drawdown, x, y) ?? drawdown[cell]!);
  return { id, x, y, drawdown: value };
}

/**
 * Well-bore drawdowns of a variant's wells: the head there before the change is the baseline's well-bore head when
 * the same well pumps in the baseline at the same place, else the baseline's head in the well's cell. NaN drawdowns
 * when the variant is unsound.
 */
export function wellboreDrawdowns(
  baseline: { wellbore: WellboreResult[]; cells: Int32Array; head: Float64Array },
  variant: { wellbore: WellboreResult[]; cells: Int32Array },
  sound: boolean,
): WellboreDrawdown[] {
  const baseBores = new Map(baseline.wellbore.map((w, k) => [w.id, { bore: w, cell: baseline.cells[k]! }]));
  return variant.wellbore.map((w, k) => {
    const cell = variant.cells[k]!;
    const before = baseBores.get(w.id);
    const baselineHead = before && before.cell === cell ? before.bore.wellboreHead : baseline.head[cell]!;
    return {
      id: w.id,
      rate: w.rate,
      baselineHead,
      wellboreHead: w.wellboreHead,
      drawdown: sound ? baselineHead - w.wellboreHead : NaN,
      minimumHead: w.minimumHead,
      belowMinimum: w.belowMinimum,
    };
  });
}

/** Sum of withdrawal rates (positive number), L^3/T. */
export function totalWithdrawal(wells: readonly WellInput[]): number {
  let withdrawal = 0;
  for (const w of wells) if (w.rate < 0) withdrawal -= w.rate;
  return withdrawal;
}
