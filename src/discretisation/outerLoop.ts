/**
 * The outer (fixed-point) iteration around the linear solver, for flow terms whose linearisation depends on the
 * heads (switching rivers and drains, water-table conductances; ../shared/spec/physics.md):
 *
 *   repeat { linearise every term about the heads; solve the linear system } until no term changes its state and
 *   the largest head change is below the tolerance,
 *
 * with cycle detection (a switch state seen before) and an iteration cap. With linear terms only, the system as
 * assembled is already linearised: one linear solve, no behaviour change.
 */
import { checkRegions, headsFromSolution, linearise, type FlowSystem } from './assemble.js';
import { anchorMask } from './terms/types.js';
import { setDiagonal, solveLinear, type Plan, type SessionHandle } from '../executor/plan.js';
import type { LinearAnswer, LinearSolve } from '../executor/types.js';

export interface OuterSettings {
  /** Largest head change between outer iterations (length units) that counts as settled. */
  headTolerance: number;
  maxOuterIterations: number;
}

const SWITCHED_OFF_HINT =
  'its only boundaries are drains (or rivers below their bed) that switched off at the heads reached: with nothing else to hold its level the region has no steady state; add a fixed head or a boundary that can supply water, or reduce the pumping there';

export const DEFAULT_OUTER: OuterSettings = { headTolerance: 1e-6, maxOuterIterations: 50 };

export type OuterStop = 'linear' | 'settled' | 'cycle' | 'iteration-limit';

export interface OuterReport {
  /** Linear solves done (1 for a linear problem). */
  iterations: number;
  stopReason: OuterStop;
  /** Per outer iteration: cells whose switch state changed, and the largest head change. */
  history: Array<{ stateChanges: number; maxHeadChange: number }>;
}

/**
 * Solve `system` with the solver of `session`, iterating on its nonlinear terms. When the system is relinearised
 * its operator diagonal and right-hand side are replaced in place (system.operator.diag, system.rhs).
 */
export function* solveOuter(
  system: FlowSystem,
  session: SessionHandle,
  linear: Omit<LinearSolve, 'rhs' | 'x'>,
  settings: OuterSettings = DEFAULT_OUTER,
): Plan<LinearAnswer & { outer: OuterReport }> {
  const start = new Float64Array(system.operator.n);
  const nonlinear = system.terms.filter((t) => t.nonlinear);
  if (nonlinear.length === 0) {
    const answer = yield* solveLinear(session, { ...linear, rhs: system.rhs, x: start });
    return { ...answer, outer: { iterations: 1, stopReason: 'linear', history: [] } };
  }
  const seen = new Set<string>();
  const history: OuterReport['history'] = [];
  let previous: Float64Array | null = null;
  let x: Float64Array = start;
  // Inner iterations over every outer iteration (each solve starts from the previous heads, so the last alone says little).
  let inner = 0;
  for (;;) {
    const solved: LinearAnswer = yield* solveLinear(session, { ...linear, rhs: system.rhs, x });
    inner += solved.stats.iterations;
    const answer: LinearAnswer = { ...solved, stats: { ...solved.stats, iterations: inner } };
    x = answer.x;
    const head = headsFromSolution(system, x);
    let stateChanges = 0;
    for (const term of nonlinear) stateChanges += term.updateState(head);
    let maxHeadChange = Infinity;
    if (previous) {
      maxHeadChange = 0;
      for (let p = 0; p < head.length; p++) {
        const d = Math.abs(head[p]! - previous[p]!);
        if (d > maxHeadChange) maxHeadChange = d;
      }
    }
    history.push({ stateChanges, maxHeadChange });
    const key = nonlinear.map((t) => t.stateKey()).join('|');
    let stopReason: OuterStop | null = null;
    if (stateChanges === 0 && maxHeadChange <= settings.headTolerance) stopReason = 'settled';
    else if (stateChanges > 0 && seen.has(key)) stopReason = 'cycle';
    else if (history.length >= settings.maxOuterIterations) stopReason = 'iteration-limit';
    seen.add(key);
    if (stopReason) return { ...answer, outer: { iterations: history.length, stopReason, history } };
    previous = head;
    // A region held only by cells that switched off (drains run dry) has no level left: report it, never solve it.
    if (stateChanges > 0) checkRegions(system.grid, system.active, anchorMask(system.terms, head.length), system.conductanceEast, system.conductanceSouth, SWITCHED_OFF_HINT);
    const next = linearise(system, system.operator.unknown, head);
    system.operator.diag.set(next.diag);
    system.rhs = next.rhs;
    yield* setDiagonal(session, next.diag);
  }
}
