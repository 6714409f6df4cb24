import { PiezomapError } from '../errors.js';
import { AggregationMultigrid } from './multigrid.js';
import { PairwiseMultigrid } from './pairwiseMultigrid.js';
import { PcgSolver } from './pcg.js';
import { weakBlockShare } from './roughness.js';
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
  'pcg-pairwise': {
    factory: (op) => {
      const t0 = performance.now();
      const mg = new PairwiseMultigrid(op);
      return new PcgSolver('pcg-pairwise', op, mg, (performance.now() - t0) / 1000, [`pairwise multigrid ${mg.describe()}`]);
    },
    description:
      'conjugate gradient preconditioned by aggregation multigrid whose aggregates follow strong conductances (pairwise aggregation, K-cycle); for conductivity that jumps by orders of magnitude between cells',
    // r, z, p, q (32); fine-level bands and inverse diagonal in single precision (16) and its aggregate map (4);
    // coarse levels of about half the fine rows in all, each row with 6 K-cycle vectors, its couplings and maps
    // (measured 110 bytes per cell kept at 1024^2, rough or smooth); with the set-up's temporary pair matrices the
    // resident memory grew by 199 bytes per cell over set-up and solve (1024^2, rough; pcg-multigrid: 88)
    bytesPerCell: 200,
  },
};

/**
 * Share of cells weakly tied to their 2 x 2 block (weakBlockShare, ./roughness.ts) from which `auto` takes the
 * pairwise-aggregation multigrid instead of the 2 x 2 one.
 */
export const ROUGH_SHARE = 0.02;

/**
 * The method `auto` stands for, chosen from the operator alone.
 * Rule: multigrid-preconditioned CG for every grid; the aggregates follow the conductances (`pcg-pairwise`) when
 * at least ROUGH_SHARE of the cells are weakly tied to their 2 x 2 block (weakBlockShare: both conductances inside
 * the block below a tenth of the cell's strongest), otherwise fixed 2 x 2 aggregates (`pcg-multigrid`), which cost
 * a third as much per iteration and almost nothing to set up. Measured on the benchmark case at 512^2 (CPU seconds of
 * set-up + solve to 1e-10, best of 3, load average 5; bench/README.md, "Rough conductivity"): the smooth field
 * (ln K sigma 2, correlated over 8 cells) has a share of 0.1 %: pcg-multigrid 14 iterations, 0.2 s, pcg-pairwise 16,
 * 0.77 s. White-noise ln K with sigma 1 / 1.5 / 2 / 2.5 / 3 has shares 0.15 / 1.1 / 3.0 / 5.2 / 7.2 %, where
 * pcg-multigrid needs 19 / 27 / 40 / 60 / 97 iterations (0.32 / 0.37 / 0.54 / 0.78 / 1.30 s) and pcg-pairwise
 * 17 / 17 / 17 / 18 / 19 (0.98 / 0.93 / 0.72 / 0.79 / 0.73 s). At 2 % pcg-multigrid is past twice its smooth-case
 * iterations and its time is within 1.3 times pcg-pairwise's; a checkerboard of 5 x 5 blocks of K 1 and 1e-6 (share
 * 2.3 %, test/solvers/pairwise.test.ts) needs 200 iterations with 2 x 2 blocks and 14 with pairs. Both counts stay
 * nearly constant as the grid grows (14 and 19 at 1024^2). A narrow channel of high K touches too few cells to pass
 * the threshold (0.4 % for a channel two cells wide across 128^2); pcg-pairwise must then be asked for. On grids of
 * at most 1024 cells both methods are a direct banded Cholesky solve. The share costs one pass over the bands
 * (about 5 ms at 512^2).
 */
export function chooseAutoMethod(op: StencilOperator): string {
  return weakBlockShare(op) >= ROUGH_SHARE ? 'pcg-pairwise' : 'pcg-multigrid';
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
