/**
 * The result of a comparison of pumping plans, as outputs and reports see it: types and the one judgement made on
 * them (is it sound?). Imports only types and the error class, so that output/ never imports compare/run.ts.
 */
import { PiezomapError } from '../errors.js';
import type { FlowSystem } from '../discretisation/assemble.js';
import type { PointDrawdown, WellboreDrawdown } from '../analysis/drawdown.js';
import type { SolveResult } from '../analysis/result.js';
import type { SourcesOfWater } from '../analysis/sources.js';
import type { CaptureComparison } from '../analysis/tracking/compareCapture.js';
import type { ModelInput, ReceptorInput } from '../scenario/types.js';

export type { PointDrawdown, WellboreDrawdown } from '../analysis/drawdown.js';

export interface VariantComparison {
  name: string;
  result: SolveResult;
  /** True when solved on the baseline's operator and solver set-up (only the right-hand side was new). */
  sharedOperator: boolean;
  /** Why the operator was or was not shared, in words. */
  sharing: string;
  /** Why the result must not be presented (not converged, budget not closed), or null. */
  problem: PiezomapError | null;
  /** baseline - variant head per cell, NaN where either is inactive; null when either run is unsound. */
  drawdown: Float64Array | null;
  /** Largest drawdown and where; null without drawdown. */
  maxDrawdown: { value: number; row: number; col: number; x: number; y: number } | null;
  /** Largest rise (most negative drawdown, e.g. from injection or more recharge), as a positive number; 0 when none. */
  maxRise: number;
  /** At the baseline's observation points. */
  observations: PointDrawdown[];
  receptors: PointDrawdown[];
  wellbores: WellboreDrawdown[];
  /** Changes of head smaller than this (length) are rounding and solver noise and were set to 0 (drawdownNoiseLevel). */
  noiseLevel: number;
  /** Sum of withdrawal rates (positive number), L^3/T. */
  withdrawal: number;
  sources: SourcesOfWater;
  /** Capture zones against the baseline's (both runs tracked: scenario key `tracking`), else null. */
  capture: CaptureComparison | null;
}

export interface ComparisonResult {
  baseline: SolveResult;
  baselineProblem: PiezomapError | null;
  variants: VariantComparison[];
  receptors: ReceptorInput[];
  warnings: string[];
  /** Every file the baseline and the variants read (a result folder must hold none of them). */
  inputFiles: string[];
}

/** What prepareComparison builds before its first solve: every system assembled and every point located. */
export interface PreparedComparison {
  /** The baseline with the solver settings that apply. */
  baseline: ModelInput;
  baseSystem: FlowSystem;
  receptors: ReceptorInput[];
  receptorCells: Int32Array;
  variants: PreparedVariant[];
}

export interface PreparedVariant {
  name: string;
  /** The variant with the solver settings that apply. */
  model: ModelInput;
  system: FlowSystem;
  /** True when the variant will be solved on the baseline's operator and solver set-up. */
  shared: boolean;
  sharing: string;
}

/** The first reason the comparison must not be presented as sound (baseline first), or null. */
export function comparisonProblem(c: ComparisonResult): PiezomapError | null {
  if (c.baselineProblem) return c.baselineProblem;
  for (const v of c.variants) {
    if (v.problem) return new PiezomapError(v.problem.code, `variant "${v.name}": ${v.problem.message}`, v.problem.detail);
  }
  return null;
}
