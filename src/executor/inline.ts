/** The executor that solves in the calling thread; also synchronously, for library callers that want no promise. */
import { chooseAutoMethod, createSolver } from '../solvers/registry.js';
import { GridOperator } from '../solvers/operator.js';
import type { Solver, StencilOperator } from '../solvers/types.js';
import type { Executor, LinearAnswer, LinearSolve, OperatorBands, SolverChoice, SolverSession } from './types.js';

const now = () => performance.now() / 1000;

/** Set up a solver for `operator`: `auto` picks a method from the operator; returns the set-up time. */
export function setUpSolver(operator: StencilOperator, choice: SolverChoice): { solver: Solver; setupSeconds: number } {
  const method = choice.method === 'auto' ? chooseAutoMethod(operator) : choice.method;
  const t0 = now();
  const solver = createSolver(method, operator, choice.relaxation === undefined ? {} : { relaxation: choice.relaxation });
  return { solver, setupSeconds: now() - t0 };
}

/** Solve one right-hand side with a set-up solver, keeping the residual history. */
export function runSolver(solver: Solver, request: LinearSolve): LinearAnswer {
  const x = Float64Array.from(request.x);
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
  setupSeconds: number;

  constructor(
    private operator: StencilOperator,
    private readonly choice: SolverChoice,
  ) {
    ({ solver: this.solver, setupSeconds: this.setupSeconds } = setUpSolver(operator, choice));
  }

  get method(): string {
    return this.solver.method;
  }

  solveNow(request: LinearSolve): LinearAnswer {
    return runSolver(this.solver, request);
  }

  setDiagonalNow(diag: Float64Array): void {
    const op = this.operator;
    this.operator = new GridOperator(op.nx, op.ny, Float64Array.from(diag), op.east, op.south, op.unknown);
    ({ solver: this.solver, setupSeconds: this.setupSeconds } = setUpSolver(this.operator, this.choice));
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
      ({ solver: this.solver, setupSeconds: this.setupSeconds } = setUpSolver(this.operator, this.choice));
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

  close(): void {}
}

export const inlineExecutor: Executor & { openNow(operator: StencilOperator, choice: SolverChoice): InlineSession } = {
  openNow: (operator, choice) => new InlineSession(operator, choice),
  open: (operator, choice) => Promise.resolve(new InlineSession(operator, choice)),
};
