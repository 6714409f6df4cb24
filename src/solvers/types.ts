import type { Team } from './team.js';

/**
 * The seams of the solver suite: operator, preconditioner, workspace-owning solver, statistics.
 * A solver is set up once per operator (factorisations, multigrid hierarchy, workspaces) and may then
 * solve several right-hand sides (e.g. pumping variants that change only wells or recharge).
 */

/** A symmetric positive definite linear operator on vectors of length `n`. */
export interface LinearOperator {
  readonly n: number;
  /** out = A x. Must not allocate. */
  apply(x: Float64Array, out: Float64Array): void;
  /** Writes the diagonal of A into out. */
  diagonal(out: Float64Array): void;
}

/**
 * The five-point operator on the full raster grid (see ./operator.ts).
 * Unknown cells (active and not fixed-head) carry the conductance stencil; every other cell is an
 * identity row with zero couplings, so vectors are always full-grid (nx*ny) and the right-hand side
 * and solution are zero there.
 *   (A x)_p = diag_p x_p - east_p x_{p+1} - east_{p-1} x_{p-1} - south_p x_{p+nx} - south_{p-nx} x_{p-nx}
 * `east[p]` couples p and p+1 (zero on the last column), `south[p]` couples p and p+nx (zero on the last row).
 */
export interface StencilOperator extends LinearOperator {
  readonly nx: number;
  readonly ny: number;
  readonly diag: Float64Array;
  readonly east: Float64Array;
  readonly south: Float64Array;
  /** 1 where the cell is an unknown of the system, 0 for identity rows. */
  readonly unknown: Uint8Array;
}

/** z = M^{-1} r for a symmetric positive definite approximation M of A. */
export interface Preconditioner {
  readonly name: string;
  apply(r: Float64Array, z: Float64Array): void;
}

/** A preconditioner that may vary between applications (e.g. a multigrid K-cycle with inner Krylov steps). */
export interface VariablePreconditioner extends Preconditioner {
  /** True when M^{-1} is not a fixed linear map: CG then uses the flexible (Polak–Ribière) beta. */
  readonly variable: boolean;
}

/** Why an iteration stopped. */
export type StopReason = 'converged' | 'iteration-limit' | 'time-limit' | 'breakdown' | 'diverging' | 'too-slow' | 'interrupted';

export interface SolveOptions {
  /** Stop when ||b - A x|| <= absoluteTolerance + tolerance * ||b|| (2-norms). */
  tolerance: number;
  absoluteTolerance?: number;
  maxIterations: number;
  /** Keep the relative residual after every iteration. */
  keepHistory?: boolean;
  timeLimitSeconds?: number;
  /** Called every few iterations; returning false stops with reason 'interrupted'. */
  onProgress?: (iteration: number, relativeResidual: number) => boolean | void;
}

export interface SolveStats {
  method: string;
  stopReason: StopReason;
  converged: boolean;
  iterations: number;
  /** ||b - A x|| / ||b|| at the end (computed from the true residual). */
  relativeResidual: number;
  /** The stopping rule applied, recorded as text. */
  criterion: string;
  setupSeconds: number;
  solveSeconds: number;
  /** Average residual reduction per iteration, (r_k/r_0)^(1/k). */
  convergenceFactor: number | null;
  /** Spectral radius estimate of the iteration matrix, for stationary methods. */
  spectralRadius: number | null;
  /** Relative residual per iteration (index 0 = start) when keepHistory was set. */
  history: number[];
  /** Human-readable remarks (e.g. chosen relaxation factor, predicted iteration count). */
  notes: string[];
}

export interface Solver {
  readonly method: string;
  /** Solve A x = b in place; x holds the start vector on entry. Allocates nothing per iteration. */
  solve(b: Float64Array, x: Float64Array, options: SolveOptions): SolveStats;
}

/** Builds a solver for an operator: all setup work (factorisation, hierarchy, workspaces) happens here. */
export type SolverFactory = (op: StencilOperator, config: SolverConfig) => Solver;

export interface SolverConfig {
  /** Relaxation factor for SOR-type methods; undefined = choose automatically. */
  relaxation?: number;
  /**
   * A thread team to share the work (used by pcg-multigrid; the other methods run on one thread). The caller owns
   * it: it is reused by every set-up it is given to and closed by the caller (./team.ts).
   */
  team?: Team | null;
  /** Fewest cells of a level the team works on (default PARALLEL_MIN_CELLS; tests lower it to reach small grids). */
  parallelMinCells?: number;
}
