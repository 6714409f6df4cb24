import { PiezomapError } from '../errors.js';
import { AggregationMultigrid } from './multigrid.js';
import { PcgSolver } from './pcg.js';
import { IncompleteCholeskyPreconditioner, JacobiPreconditioner, SsorPreconditioner } from './preconditioners.js';
import { StationarySolver } from './stationary.js';
import { warmUpKernels } from './warmup.js';
import { inSharedMemory, PARALLEL_MIN_CELLS, type Team } from './team.js';

/** Grids with more cells than this get a kernel warm-up before the multigrid setup (see warmup.ts). */
const WARM_UP_ABOVE = 100_000;
import type { Preconditioner, Solver, SolverConfig, SolverFactory, StencilOperator } from './types.js';

/**
 * The team a set-up shares its work with: the configured one, when it has more than one thread, the grid is big enough
 * for it, and the operator's bands are in shared memory (the helpers cannot read others; they are not copied).
 * Returns it (its arrays reset for the new set-up) with the note on threads for the statistics.
 */
function teamFor(op: StencilOperator, config: SolverConfig): { team: Team | null; note: string } {
  const team = config.team ?? null;
  if (!team || (team.size < 2 && config.parallelMinCells === undefined)) return { team: null, note: 'threads: 1' };
  if (op.n < (config.parallelMinCells ?? PARALLEL_MIN_CELLS)) return { team: null, note: 'threads: 1 (grid too small to share)' };
  if (!inSharedMemory(op.diag) || !inSharedMemory(op.east) || !inSharedMemory(op.south) || !inSharedMemory(op.unknown)) {
    return { team: null, note: 'threads: 1 (the operator is not in shared memory)' };
  }
  team.resetArrays();
  return { team, note: `threads: ${team.size}` };
}

/** Wraps a preconditioner constructor as a PCG factory that times the setup. */
function pcgFactory(method: string, build: ((op: StencilOperator, config: SolverConfig) => Preconditioner) | null): SolverFactory {
  return (op, config) => {
    const t0 = performance.now();
    const preconditioner = build ? build(op, config) : null;
    return new PcgSolver(method, op, preconditioner, (performance.now() - t0) / 1000);
  };
}

export interface SolverEntry {
  factory: SolverFactory;
  description: string;
  /**
   * Workspace bytes per grid cell (vectors, preconditioner, hierarchy), for the memory budget checked before a run
   * (src/memory.ts). Counted from the allocations in the solver's source; optional (a default is used).
   */
  bytesPerCell?: number;
  /** True when the method shares its work with a thread team given in its config (SolverConfig.team). */
  threads?: boolean;
}

/** Every solver method by the name users give in `solver.method`. */
export const solverRegistry: Record<string, SolverEntry> = {
  jacobi: {
    factory: (op) => new StationarySolver('jacobi', op, 'jacobi', undefined),
    description: 'Jacobi iteration (classical; slow on large grids, reports its spectral radius)',
    bytesPerCell: 48, // inverse diagonal, residual, next iterate, spectral-radius estimate
  },
  'gauss-seidel': {
    factory: (op) => new StationarySolver('gauss-seidel', op, 'gauss-seidel', undefined),
    description: 'Gauss-Seidel iteration, lexicographic order (classical; reports its spectral radius)',
    bytesPerCell: 48, // as Jacobi
  },
  sor: {
    factory: (op, config) => new StationarySolver('sor', op, 'sor', config.relaxation),
    description:
      'successive over-relaxation, red-black order; relaxation factor given or optimal from the estimated Jacobi spectral radius (Young 1950)',
    bytesPerCell: 48, // as Jacobi
  },
  cg: {
    factory: pcgFactory('cg', null),
    description: 'conjugate gradient without preconditioner',
    bytesPerCell: 32, // r, p, q
  },
  'pcg-jacobi': {
    factory: pcgFactory('pcg-jacobi', (op) => new JacobiPreconditioner(op)),
    description: 'conjugate gradient with diagonal (Jacobi) preconditioner',
    bytesPerCell: 48, // r, z, p, q, inverse diagonal
  },
  'pcg-ssor': {
    factory: pcgFactory('pcg-ssor', (op, config) => new SsorPreconditioner(op, config.relaxation ?? 1)),
    description: 'conjugate gradient with symmetric Gauss-Seidel (SSOR) preconditioner',
    bytesPerCell: 56, // r, z, p, q, inverse diagonal, sweep vector
  },
  'pcg-ic0': {
    factory: pcgFactory('pcg-ic0', (op) => new IncompleteCholeskyPreconditioner(op)),
    description: 'conjugate gradient with incomplete Cholesky IC(0) preconditioner',
    bytesPerCell: 56, // r, z, p, q, inverse pivots, sweep vector
  },
  'pcg-multigrid': {
    factory: (op, config) => {
      const t0 = performance.now();
      const { team, note } = teamFor(op, config);
      // with a team every pass over a big level runs in the team's kernels, which each thread compiled as it started
      // (warmUpAlone in ./teamKernels.ts); thread 0's own code runs on small levels only
      if (op.n > WARM_UP_ABOVE && !team) warmUpKernels((small) => solverRegistry['pcg-multigrid']!.factory(small, {}));
      const mg = new AggregationMultigrid(op, team, config.parallelMinCells);
      const notes = [`multigrid ${mg.describe()}`, team ? `${note}; threads per level: ${mg.threadsPerLevel().join(', ')}` : note];
      return new PcgSolver('pcg-multigrid', op, mg, (performance.now() - t0) / 1000, notes, team);
    },
    description: 'conjugate gradient preconditioned by aggregation multigrid (K-cycle); fast on large grids',
    threads: true,
    // r, z, p, q, fine-level smoother data, coarse levels (about a third of the fine grid in total, each with bands
    // and K-cycle vectors); with threads also the copies of b and x in shared memory (16)
    bytesPerCell: 144,
  },
};

/**
 * The method `auto` stands for, chosen from the operator alone.
 * Rule: multigrid-preconditioned CG for every grid. Its iteration count stays nearly constant as the grid
 * grows (measured 14 iterations to 1e-10 at 512^2, 1024^2 and 2048^2 on the benchmark case with K spanning
 * several orders of magnitude, holes and a ragged border), where single-level preconditioners (IC(0), SSOR,
 * Jacobi) need iterations growing with the grid side; on grids of at most 1024 cells the hierarchy has one
 * level and the method is a direct banded Cholesky solve.
 */
export function chooseAutoMethod(_op: StencilOperator): string {
  return 'pcg-multigrid';
}

/** True when `method` (a registered name, not `auto`) shares its work with a thread team. */
export function methodUsesThreads(method: string): boolean {
  return Object.hasOwn(solverRegistry, method) && solverRegistry[method]!.threads === true;
}

/** Used for the memory budget of a method whose entry gives no estimate. */
const DEFAULT_BYTES_PER_CELL = 128;

/** Workspace bytes per cell of a method; `auto` counts as the largest entry, as it may pick any. */
export function solverBytesPerCell(method: string): number {
  if (method === 'auto') {
    let most = 0;
    for (const entry of Object.values(solverRegistry)) most = Math.max(most, entry.bytesPerCell ?? DEFAULT_BYTES_PER_CELL);
    return most;
  }
  const entry = Object.hasOwn(solverRegistry, method) ? solverRegistry[method] : undefined;
  return entry?.bytesPerCell ?? DEFAULT_BYTES_PER_CELL;
}

/** The method with the smallest workspace (for suggestions when memory is short). */
export function leanestMethod(): { method: string; bytesPerCell: number } {
  let best = { method: 'cg', bytesPerCell: Infinity };
  for (const [method, entry] of Object.entries(solverRegistry)) {
    const bytes = entry.bytesPerCell ?? DEFAULT_BYTES_PER_CELL;
    if (bytes < best.bytesPerCell) best = { method, bytesPerCell: bytes };
  }
  return best;
}

/** All names accepted by createSolver, `auto` included. */
export function solverMethodNames(): string[] {
  return ['auto', ...Object.keys(solverRegistry)];
}

/** Builds the solver named `method` for `op` (setup work happens here); `auto` resolves via chooseAutoMethod. */
export function createSolver(method: string, op: StencilOperator, config: SolverConfig = {}): Solver {
  const name = method === 'auto' ? chooseAutoMethod(op) : method;
  const entry = Object.hasOwn(solverRegistry, name) ? solverRegistry[name] : undefined;
  if (!entry) {
    throw new PiezomapError('usage', `unknown solver method "${method}"`, {
      key: 'solver.method',
      hint: `use one of: ${solverMethodNames().join(', ')}`,
    });
  }
  return entry.factory(op, config);
}
