/**
 * The result of one solve, as every later stage sees it (outputs, reports, compare): a type module with the one
 * judgement made on it (is it sound?). It imports nothing but types and the error class, so that the layers that
 * build files from results never import the layers that produce them.
 */
import { PiezomapError } from '../errors.js';
import type { FlowSystem } from '../discretisation/assemble.js';
import type { OuterReport } from '../discretisation/outerLoop.js';
import type { ModelInput } from '../scenario/types.js';
import type { SolveStats } from '../solvers/types.js';
import type { WaterBudget } from './budget.js';
import type { CalibrationStatistics } from './calibration.js';
import type { ObservationResult, WellResult } from './points.js';
import type { WellboreResult } from './wellbore.js';
import type { TrackingRun } from './tracking/run.js';

/** Above this budget discrepancy a run fails loudly even when the residual criterion was met. */
export const BUDGET_DISCREPANCY_LIMIT_PERCENT = 0.1;

export interface SolveResult {
  /** The model with the solver settings that applied (command-line overrides included). */
  model: ModelInput;
  system: FlowSystem;
  /** Head per cell, NaN on inactive cells. */
  head: Float64Array;
  /** The last linear solve's statistics (set-up time included in setupSeconds). */
  stats: SolveStats;
  /** The outer iteration around the linear solver (one iteration when every term is linear). */
  outer: OuterReport;
  budget: WaterBudget;
  wells: WellResult[];
  observations: ObservationResult[];
  /** Well-bore heads (Peaceman), in well order. */
  wellbore: WellboreResult[];
  /** Simulated vs observed statistics; null without observations. */
  calibration: CalibrationStatistics | null;
  /** Capture zones, pathlines and point tracks (scenario key `tracking`); absent without it or for an unsound solve. */
  tracking?: TrackingRun;
  warnings: string[];
  /** Wall seconds per stage. */
  timings: Record<string, number>;
  peakMemoryMiB: number;
}

/** Why a finished solve must not be presented as a result, or null when it is sound. */
export function resultProblem(result: SolveResult): PiezomapError | null {
  const { stats, budget, outer } = result;
  if (!stats.converged) {
    const factor = stats.convergenceFactor ?? stats.spectralRadius;
    const note = stats.notes.length ? `\n  ${stats.notes.join('\n  ')}` : '';
    return new PiezomapError(
      'solver',
      `solver ${stats.method} did not reach the tolerance (${stats.stopReason}): relative residual ${stats.relativeResidual.toExponential(2)} after ${stats.iterations} iterations` +
        (factor !== null && factor !== undefined ? `, convergence factor ${factor.toFixed(6)}` : '') +
        note,
      { hint: 'try solver.method "auto" or "pcg-multigrid", or raise solver.maxIterations' },
    );
  }
  if (outer.stopReason === 'cycle' || outer.stopReason === 'iteration-limit') {
    const waterTable = result.system.waterTable !== null;
    const last = outer.history
      .slice(-3)
      .map(
        (h) =>
          `largest head change ${h.maxHeadChange.toExponential(2)}, flow residual ${h.flowResidual.toExponential(2)}, ${h.dryCells} dry cell(s), damping ${h.damping}`,
      );
    return new PiezomapError(
      'solver',
      `the outer iteration did not settle (${outer.stopReason}) after ${outer.iterations} linear solves` +
        (last.length ? `; last iterations:\n  ${last.join('\n  ')}\n  (every outer iteration is in convergence.csv)` : ''),
      {
        hint: waterTable
          ? 'cells keep drying and rewetting or the pumping exceeds what the aquifer can give: try aquifer.initialHead nearer the expected water table, lower the well rates near thin saturated zones, or check aquifer.bottom'
          : 'check the head-dependent terms for cells that switch back and forth',
      },
    );
  }
  if (Math.abs(budget.discrepancyPercent) > BUDGET_DISCREPANCY_LIMIT_PERCENT) {
    return new PiezomapError(
      'solver',
      `water budget does not close: discrepancy ${budget.discrepancyPercent.toFixed(4)} % exceeds ${BUDGET_DISCREPANCY_LIMIT_PERCENT} % although the residual criterion was met`,
      { hint: 'tighten solver.tolerance (e.g. 1e-10)' },
    );
  }
  return null;
}
