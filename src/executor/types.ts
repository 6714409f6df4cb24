/**
 * Where linear solves run. A solve plan (./plan.ts) asks for solver sessions and solves; an executor answers:
 * inline, in the calling thread (./inline.ts), or in a worker thread (./worker.ts) so that the main thread stays
 * free to answer SIGINT/SIGTERM at once. Both run the same solver code on the same numbers, so their results are
 * bit-for-bit the same.
 *
 * A session is one solver set up on one operator (factorisation, multigrid hierarchy, workspaces): it lives as long
 * as the plan needs it, so that several right-hand sides (pumping variants) and the inner solves of an outer
 * iteration share the set-up. Outer iterations that change the operator's diagonal (head-dependent terms)
 * replace it in the session, which sets the solver up again.
 */
import type { SolveStats, StencilOperator } from '../solvers/types.js';

/** The solver a session sets up: a registered method name or 'auto', and its relaxation factor when given. */
export interface SolverChoice {
  method: string;
  relaxation?: number;
  /**
   * Threads the solve may use (pcg-multigrid shares its work; other methods run on one): a whole number >= 1, or
   * 'auto' (all cores up to a cap, one thread on small grids: see resolveThreads in ../solvers/team.ts). Default 1.
   */
  threads?: number | 'auto';
}

export interface LinearSolve {
  rhs: Float64Array;
  /** Start vector (full grid); the answer's x is a new array. */
  x: Float64Array;
  tolerance: number;
  maxIterations: number;
  /** Called every few iterations; returning false stops the solve (reason "interrupted"). */
  onProgress?: (iteration: number, relativeResidual: number) => boolean | void;
}

/** The changing bands of a five-point operator (the unknown cells stay the same). */
export interface OperatorBands {
  diag: Float64Array;
  east: Float64Array;
  south: Float64Array;
}

export interface LinearAnswer {
  x: Float64Array;
  stats: SolveStats;
}

export interface SolverSession {
  /** The method set up (auto resolved). */
  readonly method: string;
  /** Seconds the set-up took (the latest, after a diagonal change). */
  readonly setupSeconds: number;
  solve(request: LinearSolve): Promise<LinearAnswer>;
  /** Replace the operator's diagonal and set the solver up again. */
  setDiagonal(diag: Float64Array): Promise<void>;
  /**
   * Replace the operator's bands in place (a water-table aquifer's conductances). With `rebuild` the solver is set
   * up again; without it a Krylov method keeps its preconditioner (built on the earlier bands) and iterates on the new
   * operator, which pays while the operator changes little; other methods are always set up again.
   */
  setOperator(bands: OperatorBands, rebuild: boolean): Promise<void>;
  close(): void;
}

export interface Executor {
  /** Set a solver up on `operator`. The executor may copy the operator; the caller keeps its own. */
  open(operator: StencilOperator, choice: SolverChoice): Promise<SolverSession>;
  /**
   * A hint, given before the assembly, that a session on a grid of `cells` cells with this choice will be opened
   * next: an executor may start the threads it will need meanwhile (the solve worker's helper threads). Optional;
   * it changes when threads start, never what a session computes.
   */
  prepare?(cells: number, choice: SolverChoice): void;
}
