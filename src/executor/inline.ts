/** The executor that solves in the calling thread; also synchronously, for library callers that want no promise. */
import { chooseAutoMethod, createSolver, methodUsesThreads } from '../solvers/registry.js';
import { GridOperator } from '../solvers/operator.js';
import { PARALLEL_MIN_CELLS, resolveThreads, Team } from '../solvers/team.js';
import type { Solver, SolverConfig, StencilOperator } from '../solvers/types.js';
import { shared, sharedFloat64Array } from './shared.js';
import type { Executor, LinearAnswer, LinearSolve, OperatorBands, SolverChoice, SolverSession } from './types.js';

const now = () => performance.now() / 1000;

/**
 * Set up a solver for `operator`: `auto` picks a method from the operator (unless the caller has just done so and
 * passes the pick as `method`); returns the set-up time.
 */
export function setUpSolver(
  operator: StencilOperator,
  choice: SolverChoice,
  team: Team | null = null,
  method = choice.method === 'auto' ? chooseAutoMethod(operator) : choice.method,
): { solver: Solver; setupSeconds: number } {
  const t0 = now();
  const config: SolverConfig = choice.relaxation === undefined ? {} : { relaxation: choice.relaxation };
  if (team) config.team = team;
  const solver = createSolver(method, operator, config);
  return { solver, setupSeconds: now() - t0 };
}

/**
 * The thread team a session on `operator` uses and the method: the team is started once when the choice asks for more
 * than one thread on a grid this size and the method shares its work (pcg-multigrid), kept across set-ups and solves,
 * closed with the session. For `auto` the helpers are launched before the method is picked, so that they start while
 * thread 0 measures the operator (weakBlockShare, one pass over the bands); when the pick does not use them
 * (pcg-pairwise), they are ended again without having run a kernel.
 */
function startTeam(operator: StencilOperator, choice: SolverChoice, early: Team | null): { team: Team | null; method: string } {
  // below PARALLEL_MIN_CELLS no level would be shared: no helper threads at all
  const mayShare = (choice.method === 'auto' || methodUsesThreads(choice.method)) && operator.n >= PARALLEL_MIN_CELLS;
  const threads = mayShare ? resolveThreads(choice.threads, operator.n) : 1;
  // helpers started ahead (prestartTeam) serve when they are as many as wanted; otherwise they are ended
  let team: Team | null;
  if (early && early.size === threads) team = early;
  else {
    void early?.close();
    team = Team.start(threads);
  }
  const method = choice.method === 'auto' ? chooseAutoMethod(operator) : choice.method;
  if (team && !methodUsesThreads(method)) {
    void team.close();
    return { team: null, method };
  }
  return { team, method };
}

/**
 * The team a session on a grid of `cells` cells with this choice will most likely want, started before its operator
 * exists (so before `auto` can choose: a method that shares no work closes it again). Null for one thread.
 */
export function prestartTeam(cells: number, choice: SolverChoice): Team | null {
  if (choice.method !== 'auto' && !methodUsesThreads(choice.method)) return null;
  if (cells < PARALLEL_MIN_CELLS) return null;
  // Only launched: thread 0 compiles its kernels at the first kernel, after the assembly. Compiling them here too
  // (while the main thread assembles, on the same cores) measured no faster in alternated whole 1024² runs: the
  // assembly took 0.35–0.56 s instead of 0.27–0.38 s, for a solve stage 0.05–0.1 s shorter.
  return Team.start(resolveThreads(choice.threads, cells));
}

/** The operator with its bands in shared memory (copied there once when they are not), for a thread team. */
function sharedOperator(op: StencilOperator): StencilOperator {
  const [diag, east, south, unknown] = [shared(op.diag), shared(op.east), shared(op.south), shared(op.unknown)];
  if (diag === op.diag && east === op.east && south === op.south) return op;
  return new GridOperator(op.nx, op.ny, diag, east, south, unknown);
}

/**
 * Solve one right-hand side with a set-up solver, keeping the residual history: into a copy of `request.x`, or with
 * `inPlace` into `request.x` itself (a caller that made it for this solve).
 */
export function runSolver(solver: Solver, request: LinearSolve, inPlace = false): LinearAnswer {
  const x = inPlace ? request.x : Float64Array.from(request.x);
  const stats = solver.solve(request.rhs, x, {
    tolerance: request.tolerance,
    maxIterations: request.maxIterations,
    keepHistory: true,
    ...(request.onProgress ? { onProgress: request.onProgress } : {}),
  });
  return { x, stats };
}

export class InlineSession implements SolverSession {
  private solver: Solver;
  private operator: StencilOperator;
  private readonly team: Team | null;
  setupSeconds: number;

  /** `early`: helper threads started ahead (prestartTeam), used when they are the ones needed, else closed. */
  constructor(
    operator: StencilOperator,
    private readonly choice: SolverChoice,
    early: Team | null = null,
  ) {
    const t0 = now();
    const { team, method } = startTeam(operator, choice, early);
    this.team = team;
    this.operator = this.team ? sharedOperator(operator) : operator;
    ({ solver: this.solver } = setUpSolver(this.operator, choice, this.team, method));
    // the helper threads' start counts as set-up
    this.setupSeconds = now() - t0;
  }

  /** Threads the session's solver shares its work with (1 without a team). */
  get threads(): number {
    return this.team?.size ?? 1;
  }

  get method(): string {
    return this.solver.method;
  }

  /** See runSolver: `inPlace` solves into `request.x` itself. */
  solveNow(request: LinearSolve, inPlace = false): LinearAnswer {
    return runSolver(this.solver, request, inPlace);
  }

  setDiagonalNow(diag: Float64Array): void {
    const op = this.operator;
    // a copy of its own, in shared memory so that a thread team can read it
    const own = sharedFloat64Array(diag.length);
    own.set(diag);
    this.operator = new GridOperator(op.nx, op.ny, own, op.east, op.south, op.unknown);
    ({ solver: this.solver, setupSeconds: this.setupSeconds } = setUpSolver(this.operator, this.choice, this.team));
  }

  /** See SolverSession.setOperator. Returns true when the solver was set up again. */
  setOperatorNow(bands: OperatorBands, rebuild: boolean): boolean {
    // A session on the caller's operator (inline) is handed its own bands: nothing to copy then.
    const op = this.operator;
    if (bands.diag !== op.diag) op.diag.set(bands.diag);
    if (bands.east !== op.east) op.east.set(bands.east);
    if (bands.south !== op.south) op.south.set(bands.south);
    // Only the conjugate-gradient methods keep an older preconditioner: they apply the operator itself each step.
    if (rebuild || !this.solver.method.startsWith('pcg')) {
      ({ solver: this.solver, setupSeconds: this.setupSeconds } = setUpSolver(this.operator, this.choice, this.team));
      return true;
    }
    return false;
  }

  setOperator(bands: OperatorBands, rebuild: boolean): Promise<void> {
    this.setOperatorNow(bands, rebuild);
    return Promise.resolve();
  }

  solve(request: LinearSolve): Promise<LinearAnswer> {
    return Promise.resolve(this.solveNow(request));
  }

  setDiagonal(diag: Float64Array): Promise<void> {
    this.setDiagonalNow(diag);
    return Promise.resolve();
  }

  /** Ends the session's helper threads (if any); the promise resolves when they have exited. */
  close(): Promise<void> {
    return this.team ? this.team.close() : Promise.resolve();
  }
}

export const inlineExecutor: Executor & { openNow(operator: StencilOperator, choice: SolverChoice): InlineSession } = {
  openNow: (operator, choice) => new InlineSession(operator, choice),
  open: (operator, choice) => Promise.resolve(new InlineSession(operator, choice)),
};
