/**
 * The outer (nonlinear) iteration around the linear solver, for flow terms whose linearisation depends on the
 * heads (switching rivers and drains) and for water-table aquifers, whose conductances depend on the saturated
 * thickness (./aquifer.ts; ../shared/spec/physics.md):
 *
 *   repeat { linearise every term and the conductances about the heads; solve the linear system; damp the step }
 *   until no term changes its state, the largest head change is below the tolerance and the flow residual of the
 *   nonlinear equations (the water budget cell by cell) is below its own,
 *
 * with cycle detection (a switch state seen before) and an iteration cap. The water-table iteration is Picard's
 * (successive substitution: conductances from the latest heads), with a damping factor that halves when the largest
 * head change grows and recovers while it shrinks (common practice for unconfined flow). The solver session is kept
 * throughout: its operator bands are replaced in place and its set-up (the multigrid hierarchy) rebuilt only when
 * the conductances moved by more than REBUILD_FRACTION since it was built; in between it serves as the
 * preconditioner of the changed operator, unless the last inner solve needed more than REBUILD_ITERATIONS. With linear terms and a confined aquifer, the system as assembled is
 * already linearised: one linear solve, no behaviour change.
 */
import { checkRegions, headsFromSolution, linearise, type FlowSystem } from './assemble.js';
import { anchorMask } from './terms/types.js';
import { limitFall, updateSaturation, waterTableConductances } from './aquifer.js';
import { setDiagonal, setOperator, solveLinear, type Plan, type SessionHandle } from '../executor/plan.js';
import type { LinearAnswer, LinearSolve } from '../executor/types.js';
import { applyDot } from '../solvers/kernels.js';

export interface OuterSettings {
  /** Largest head change between outer iterations (length units) that counts as settled. */
  headTolerance: number;
  maxOuterIterations: number;
  /**
   * Water-table aquifers: largest relative flow residual of the nonlinear equations that counts as settled,
   * ||b(h) - A(h)(h - datum)|| / ||b(h)|| with the conductances at the final heads (the budget cell by cell).
   * Never below the linear solver's tolerance times 10. Default 1e-7.
   */
  flowTolerance?: number;
}

const SWITCHED_OFF_HINT =
  'its only boundaries are drains (or rivers below their bed) that switched off at the heads reached: with nothing else to hold its level the region has no steady state; add a fixed head or a boundary that can supply water, or reduce the pumping there';

export const DEFAULT_OUTER: OuterSettings = { headTolerance: 1e-6, maxOuterIterations: 50, flowTolerance: 1e-7 };

/**
 * Fraction of the summed conductances that may change (sum |C - C_built| / sum C_built) before the solver is set
 * up again on a water-table operator; below it the earlier set-up preconditions the new operator. Measured on the
 * benchmark case (bench/README.md).
 */
export const REBUILD_FRACTION = 0.05;

/** Reduction of the flow residual each inexact inner solve aims for (see solveOuter). */
export const INNER_REDUCTION = 0.01;

/**
 * Inner iterations above which the next inner solve gets a fresh set-up: a fresh multigrid hierarchy reduces the
 * residual by the 1 % of an inexact inner solve in about 3 iterations (measured on the benchmark case).
 */
export const REBUILD_ITERATIONS = 8;

export type OuterStop = 'linear' | 'settled' | 'cycle' | 'iteration-limit';

export interface OuterIteration {
  /** Cells whose switch state changed. */
  stateChanges: number;
  /** Largest head change of this iteration (after damping), length units. */
  maxHeadChange: number;
  /** Inner (linear) iterations of this outer iteration's solve. */
  innerIterations: number;
  /** Relative flow residual of the nonlinear equations at the new heads (0 when every term is linear in h). */
  flowResidual: number;
  /** Dry cells at the new heads (water-table aquifers; 0 otherwise). */
  dryCells: number;
  /** Factor applied to this iteration's step: below 1 damped, 1 none, above 1 extrapolated. */
  damping: number;
  /** Cells whose fall of the water table was limited to half their saturated depth (aquifer.ts, limitFall). */
  limitedCells: number;
  /** True when the solver was set up again for the next iteration. */
  rebuilt: boolean;
}

export interface OuterReport {
  /** Linear solves done (1 for a linear problem). */
  iterations: number;
  stopReason: OuterStop;
  /** Per outer iteration. */
  history: OuterIteration[];
  /** Inner iterations summed over every outer iteration. */
  innerIterations: number;
}

/**
 * Solve `system` with the solver of `session`, iterating on its nonlinear terms and water table. When the system is
 * relinearised its operator (diagonal, and for a water table the bands), its conductances and right-hand side are
 * replaced in place (system.operator, system.conductanceEast/South, system.rhs).
 */
export function* solveOuter(
  system: FlowSystem,
  session: SessionHandle,
  linear: Omit<LinearSolve, 'rhs' | 'x'>,
  settings: OuterSettings = DEFAULT_OUTER,
): Plan<LinearAnswer & { outer: OuterReport }> {
  const { operator, waterTable, datum, active } = system;
  const n = operator.n;
  const nonlinear = system.terms.filter((t) => t.nonlinear);
  if (nonlinear.length === 0 && waterTable === null) {
    const answer = yield* solveLinear(session, { ...linear, rhs: system.rhs, x: new Float64Array(n) });
    return { ...answer, outer: { iterations: 1, stopReason: 'linear', history: [], innerIterations: answer.stats.iterations } };
  }
  const { unknown, east, south } = operator;
  const { nx, ny } = system.grid;
  const flowTolerance = Math.max(settings.flowTolerance ?? 1e-7, 10 * linear.tolerance);
  // The heads the system is linearised about; x starts there (a warm start for every inner solve).
  let head = Float64Array.from(system.startHead);
  let x: Float64Array = new Float64Array(n);
  for (let p = 0; p < n; p++) if (unknown[p]) x[p] = head[p]! - datum;
  let next = new Float64Array(n);
  const work = new Float64Array(n);
  // Faces between two unknowns (the operator's couplings), found once.
  const eastCoupled = new Uint8Array(n);
  const southCoupled = new Uint8Array(n);
  for (let p = 0; p < n; p++) {
    if (!unknown[p]) continue;
    if ((p + 1) % nx !== 0 && unknown[p + 1]) eastCoupled[p] = 1;
    if (p + nx < n && unknown[p + nx]) southCoupled[p] = 1;
  }
  // Conductances the solver was last set up on (water tables): the measure of how far the operator moved.
  const builtEast = waterTable ? Float64Array.from(system.conductanceEast) : null;
  const builtSouth = waterTable ? Float64Array.from(system.conductanceSouth) : null;
  const seen = new Set<string>();
  const history: OuterIteration[] = [];
  let innerTotal = 0;
  let solveSecondsTotal = 0;
  let damping = 1;
  let lastChange = Infinity;
  let lastLimited = 0;
  let lastRatio = 0;
  // Inexact inner solves (Eisenstat & Walker 1996, "Choosing the forcing terms in an inexact Newton method", applied
  // to Picard steps): each inner solve reduces the flow residual of the current linearisation by INNER_REDUCTION, not
  // to the final tolerance, as long as the outer iteration is far from settled; the last ones go to the tolerance.
  let flowResidual = relativeResidual(operator, x, system.rhs, unknown, work);
  for (;;) {
    const innerTolerance = waterTable ? Math.max(linear.tolerance, Math.min(0.1, INNER_REDUCTION * flowResidual)) : linear.tolerance;
    const answer: LinearAnswer = yield* solveLinear(session, { ...linear, tolerance: innerTolerance, rhs: system.rhs, x });
    innerTotal += answer.stats.iterations;
    solveSecondsTotal += answer.stats.solveSeconds;
    headsFromSolution(system, answer.x, next);
    const rawChange = largestChange(next, head, unknown);
    // Damping (water tables): halve when the step grows, recover towards 1 while it shrinks.
    let limited = 0;
    let factor = 1;
    if (waterTable) {
      // While falls are being limited the steps are short by design: that is no sign of oscillation.
      const ratio = rawChange / lastChange;
      if (rawChange > lastChange && lastLimited === 0) damping = Math.max(damping / 2, 1 / 16);
      else damping = Math.min(1, damping * 1.5);
      factor = damping;
      // Steady linear convergence (step ratio rho below 0.9 twice running, nothing limited): extrapolate by
      // 1/(1 - rho), at most 2, the sum of the geometric series of the steps still to come (Aitken's idea).
      if (damping === 1 && lastLimited === 0 && history.length >= 2 && ratio > 0 && ratio < 0.9 && lastRatio > 0 && lastRatio < 0.9) {
        factor = Math.min(2, 1 / (1 - Math.min(ratio, lastRatio)));
      }
      lastRatio = ratio;
      lastChange = rawChange;
      if (factor !== 1) scaleStep(next, head, unknown, factor);
      limited = limitFall(waterTable, head, next, unknown);
      lastLimited = limited;
    }
    const maxHeadChange = waterTable && (factor !== 1 || limited > 0) ? largestChange(next, head, unknown) : rawChange;
    const stepDamping = waterTable ? factor : 1;
    // Swap the head buffers (no allocation per iteration).
    [head, next] = [next, head];
    x = answer.x;
    if (stepDamping !== 1 || limited > 0) unknownsFromHeads(head, unknown, datum, x);

    let stateChanges = 0;
    for (const term of nonlinear) stateChanges += term.updateState(head);
    // A region held only by cells that switched off (drains run dry) has no level left: report it, never solve it.
    if (stateChanges > 0)
      checkRegions(
        system.grid,
        system.active,
        anchorMask(system.terms, head.length),
        system.conductanceEast,
        system.conductanceSouth,
        SWITCHED_OFF_HINT,
      );
    let dryCells = 0;
    if (waterTable) {
      dryCells = updateSaturation(waterTable, head, active);
      waterTableConductances(waterTable, nx, ny, system.dx, system.dy, active, system.conductanceEast, system.conductanceSouth);
      copyCouplings(system.conductanceEast, system.conductanceSouth, eastCoupled, southCoupled, east, south);
    }
    const relinearised = linearise(system, unknown, head);
    operator.diag.set(relinearised.diag);
    system.rhs = relinearised.rhs;
    // The flow residual of the nonlinear equations at the new heads: b(h) - A(h) x.
    flowResidual = relativeResidual(operator, x, system.rhs, unknown, work);

    const key = nonlinear.map((t) => t.stateKey()).join('|');
    let stopReason: OuterStop | null = null;
    // Settled needs an undamped last step: a damped step's head change understates the distance still to go (an
    // extrapolated one overstates it).
    const wellSettled = !waterTable || flowResidual <= flowTolerance;
    if (stateChanges === 0 && maxHeadChange <= settings.headTolerance && wellSettled && stepDamping >= 1 && limited === 0)
      stopReason = 'settled';
    else if (stateChanges > 0 && seen.has(key)) stopReason = 'cycle';
    else if (history.length + 1 >= settings.maxOuterIterations) stopReason = 'iteration-limit';
    seen.add(key);

    let rebuilt = false;
    if (!stopReason) {
      if (waterTable) {
        const ce = system.conductanceEast;
        const cs = system.conductanceSouth;
        const { moved, total } = conductanceShift(ce, cs, builtEast!, builtSouth!);
        // Also when the kept set-up has become a poor preconditioner (local changes near wells move little of the sum).
        rebuilt = moved > REBUILD_FRACTION * total || answer.stats.iterations > REBUILD_ITERATIONS;
        if (rebuilt) {
          builtEast!.set(ce);
          builtSouth!.set(cs);
        }
        yield* setOperator(session, { diag: operator.diag, east, south }, rebuilt);
      } else {
        yield* setDiagonal(session, operator.diag);
      }
    }
    history.push({
      stateChanges,
      maxHeadChange,
      innerIterations: answer.stats.iterations,
      flowResidual: waterTable ? flowResidual : 0,
      dryCells,
      damping: stepDamping,
      limitedCells: limited,
      rebuilt,
    });
    if (stopReason) {
      // The run's statistics count every inner solve (the last one alone often needs no iteration at all); the
      // residual, stop reason and history are the last inner solve's.
      const stats = { ...answer.stats, iterations: innerTotal, solveSeconds: solveSecondsTotal };
      return { x, stats, outer: { iterations: history.length, stopReason, history, innerIterations: innerTotal } };
    }
  }
}

/** ||b - A x|| / ||b|| over the unknown cells (||b - A x|| when b = 0); `work` is scratch. */
function relativeResidual(
  operator: FlowSystem['operator'],
  x: Float64Array,
  b: Float64Array,
  unknown: Uint8Array,
  work: Float64Array,
): number {
  applyDot(operator, x, work);
  let r2 = 0;
  let b2 = 0;
  for (let p = 0; p < work.length; p++) {
    if (!unknown[p]) continue;
    const r = b[p]! - work[p]!;
    r2 += r * r;
    b2 += b[p]! * b[p]!;
  }
  return b2 > 0 ? Math.sqrt(r2 / b2) : Math.sqrt(r2);
}

// The hot loops of the outer iteration live in plain functions: V8 optimises loops inside generators less well.

/** Largest |a - b| over the unknown cells. */
function largestChange(a: Float64Array, b: Float64Array, unknown: Uint8Array): number {
  let largest = 0;
  for (let p = 0; p < a.length; p++) {
    if (!unknown[p]) continue;
    const size = Math.abs(a[p]! - b[p]!);
    if (size > largest) largest = size;
  }
  return largest;
}

/** next = head + factor (next - head) on the unknown cells. */
function scaleStep(next: Float64Array, head: Float64Array, unknown: Uint8Array, factor: number): void {
  for (let p = 0; p < next.length; p++) if (unknown[p]) next[p] = head[p]! + factor * (next[p]! - head[p]!);
}

/** Sum of |C - C_built| and of C_built over both face directions. */
function conductanceShift(ce: Float64Array, cs: Float64Array, be: Float64Array, bs: Float64Array): { moved: number; total: number } {
  let moved = 0;
  let total = 0;
  for (let p = 0; p < ce.length; p++) {
    moved += Math.abs(ce[p]! - be[p]!) + Math.abs(cs[p]! - bs[p]!);
    total += be[p]! + bs[p]!;
  }
  return { moved, total };
}

/** The operator's couplings from the conductances, on the faces between two unknowns. */
function copyCouplings(
  ce: Float64Array,
  cs: Float64Array,
  eastCoupled: Uint8Array,
  southCoupled: Uint8Array,
  east: Float64Array,
  south: Float64Array,
): void {
  for (let p = 0; p < ce.length; p++) {
    if (eastCoupled[p]) east[p] = ce[p]!;
    if (southCoupled[p]) south[p] = cs[p]!;
  }
}

/** x = h - datum on the unknown cells. */
function unknownsFromHeads(head: Float64Array, unknown: Uint8Array, datum: number, x: Float64Array): void {
  for (let p = 0; p < head.length; p++) if (unknown[p]) x[p] = head[p]! - datum;
}
