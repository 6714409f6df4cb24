/**
 * pcg-multigrid shared by a thread team (src/solvers/team.ts): the same heads as one thread within the solve
 * tolerance, the analytical answer, the same bytes twice with the same team size, every team size on odd grids, a
 * reused session, and no helper thread left behind. The helpers run the compiled kernels, so the solver modules are
 * imported from dist/ (`npm test` builds first), the test systems from the sources.
 * The team is made to work on every level of these small grids (parallelMinCells), so the block kernels, their
 * halos and their barriers are all exercised, down to blocks of two rows and empty blocks.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { readdirSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { BandedCholesky } from '../../src/solvers/banded.js';
import { GridOperator } from '../../src/solvers/operator.js';
import { createSolver } from '../../dist/src/solvers/registry.js';
import { Team, resolveThreads, AUTO_THREADS_MIN_CELLS } from '../../dist/src/solvers/team.js';
import { InlineSession, prestartTeam } from '../../dist/src/executor/inline.js';
import { startWorkerExecutor } from '../../dist/src/executor/worker.js';
import type { StencilOperator } from '../../src/solvers/types.js';
import { buildSystem, heterogeneousCase, maxRelativeError, stripCase, type TestCase } from './fixtures.js';

const teams: Team[] = [];
afterAll(async () => {
  await Promise.all(teams.map((t) => t.close()));
});

function team(size: number): Team {
  const t = new Team(size);
  teams.push(t);
  return t;
}

/** The operator with its bands copied into shared memory, where the helpers can read them. */
function inShared(op: StencilOperator): GridOperator {
  const f64 = (a: Float64Array) => {
    const c = new Float64Array(new SharedArrayBuffer(8 * a.length));
    c.set(a);
    return c;
  };
  const unknown = new Uint8Array(new SharedArrayBuffer(op.n));
  unknown.set(op.unknown);
  return new GridOperator(op.nx, op.ny, f64(op.diag), f64(op.east), f64(op.south), unknown);
}

/** Solve with `threads` threads (a team on every level of at least 64 cells); returns x and the statistics. */
function solveWith(op: StencilOperator, b: Float64Array, threads: number, tolerance = 1e-10) {
  const config = threads > 1 ? { team: team(threads), parallelMinCells: 64 } : {};
  const solver = createSolver('pcg-multigrid', op, config);
  const x = new Float64Array(op.n);
  const stats = solver.solve(b, x, { tolerance, maxIterations: 500 });
  return { x, stats };
}

function bytes(x: Float64Array): Buffer {
  return Buffer.from(x.buffer, x.byteOffset, x.byteLength);
}

describe('pcg-multigrid with a thread team', () => {
  it('gives the 1-thread heads within the solve tolerance on a heterogeneous grid (K contrast 1e6, holes, wells)', () => {
    const system = buildSystem(heterogeneousCase(90, 70, 21));
    const op = inShared(system.op);
    // Reference: banded Cholesky, itself checked against ml-matrix's dense LU in solvers.test.ts.
    const direct = new Float64Array(op.n);
    new BandedCholesky(op).solve(system.b, direct);
    const one = solveWith(op, system.b, 1);
    for (const threads of [2, 3]) {
      const many = solveWith(op, system.b, threads);
      expect(many.stats.stopReason).toBe('converged');
      expect(many.stats.notes.join(' ')).toContain(`threads: ${threads}`);
      // the block smoother is a little weaker at block edges: a few more iterations on this hard case, whose coarse
      // levels here have blocks of a few rows only (the benchmark case keeps its 14 iterations: bench/README.md)
      expect(many.stats.iterations).toBeLessThanOrEqual(Math.ceil(one.stats.iterations * 1.1) + 2);
      expect(many.stats.relativeResidual).toBeLessThanOrEqual(1e-10);
      // cond(A) ~ 1e6 x grid factor: a relative residual of 1e-10 pins the heads to about 1e-7 of their range, as
      // for one thread in solvers.test.ts (measured 2e-7 between 1 and 2 threads here)
      expect(maxRelativeError(many.x, one.x)).toBeLessThan(1e-6);
      expect(maxRelativeError(many.x, direct)).toBeLessThan(1e-6);
    }
  });

  it('reaches the linear head between two fixed-head edges of a uniform aquifer', () => {
    // One-dimensional steady confined flow between two constant heads, no recharge: h varies linearly with distance
    // (Darcy's law with constant transmissivity; Bear 1972, Dynamics of Fluids in Porous Media, ch. 7). With
    // fixed-head cells in the first and last columns the block-centred scheme has this solution exactly at the
    // cell centres: h_j = 100 + (90 - 100) j / (nx - 1).
    const nx = 120;
    const ny = 90;
    const n = nx * ny;
    const c: TestCase = {
      nx,
      ny,
      dx: 25,
      dy: 40,
      k: new Float64Array(n).fill(5),
      thickness: 20,
      anisotropy: 1,
      fixedHead: new Float64Array(n).fill(NaN),
      source: new Float64Array(n),
    };
    for (let i = 0; i < ny; i++) {
      c.fixedHead[i * nx] = 100;
      c.fixedHead[i * nx + nx - 1] = 90;
    }
    const { op, b } = buildSystem(c);
    const shared = inShared(op);
    for (const threads of [2, 3]) {
      const { x, stats } = solveWith(shared, b, threads, 1e-12);
      expect(stats.stopReason).toBe('converged');
      let worst = 0;
      for (let i = 0; i < ny; i++) {
        for (let j = 1; j < nx - 1; j++) worst = Math.max(worst, Math.abs(x[i * nx + j]! - (100 - (10 * j) / (nx - 1))));
      }
      expect(worst).toBeLessThan(1e-8);
    }
  });

  it('gives bit-identical heads in two runs with the same team size, fresh or reused', () => {
    // Common practice for reproducible model runs: same input, same bytes. Sums are added in thread order and the
    // block Gauss–Seidel reads across block edges only values fixed before the sweep, so timing cannot matter.
    const system = buildSystem(heterogeneousCase(80, 66, 6));
    const op = inShared(system.op);
    for (const threads of [2, 3]) {
      const first = solveWith(op, system.b, threads).x;
      const second = solveWith(op, system.b, threads).x;
      expect(bytes(second).equals(bytes(first))).toBe(true);
      const solver = createSolver('pcg-multigrid', op, { team: team(threads), parallelMinCells: 64 });
      const again = new Float64Array(op.n);
      solver.solve(system.b, again, { tolerance: 1e-10, maxIterations: 500 });
      solver.solve(system.b, again.fill(0), { tolerance: 1e-10, maxIterations: 500 });
      expect(bytes(again).equals(bytes(first))).toBe(true);
    }
  });

  it.each([
    [37, 53],
    [1, 500],
    [500, 1],
    [3, 301],
    [301, 3],
  ])('converges with 1, 2 and 3 threads on a %ix%i grid to the banded Cholesky heads', (nx, ny) => {
    // Odd sizes leave half-empty aggregates and blocks of unequal (or no) rows; one-row and one-column grids give
    // every thread but one an empty block, or blocks of one cell width.
    const system = buildSystem(stripCase(nx, ny, 13));
    const op = inShared(system.op);
    const direct = new Float64Array(op.n);
    new BandedCholesky(op).solve(system.b, direct);
    for (const threads of [1, 2, 3]) {
      const { x, stats } = solveWith(op, system.b, threads);
      expect(stats.stopReason).toBe('converged');
      expect(maxRelativeError(x, direct)).toBeLessThan(1e-6);
    }
  });

  it('is not used for an operator outside shared memory (its bands are not copied): one thread, noted', () => {
    const { op, b } = buildSystem(heterogeneousCase(40, 30, 2));
    const { x, stats } = solveWith(op, b, 2);
    expect(stats.notes.join(' ')).toContain('threads: 1 (the operator is not in shared memory)');
    expect(stats.stopReason).toBe('converged');
    expect(x.every(Number.isFinite)).toBe(true);
  });
});

describe('thread team', () => {
  it('a kernel that fails ends the team: the error is raised, later use is refused, the helpers exit', async () => {
    const t = new Team(2);
    expect(() => t.run(999, [1, 1])).toThrow(/unknown kernel/);
    expect(() => t.run(999, [1, 1])).toThrow(/used after close/);
    await t.close();
    for (const w of t.threads) expect(w.threadId).toBe(-1);
  });
});

describe('thread count', () => {
  it('auto uses one thread below the break-even grid size and the cores (up to 8) above it, whatever the load', () => {
    const cores = Math.min(availableParallelism(), 8);
    expect(resolveThreads('auto', AUTO_THREADS_MIN_CELLS - 1)).toBe(1);
    expect(resolveThreads('auto', AUTO_THREADS_MIN_CELLS)).toBe(cores);
    expect(resolveThreads(undefined, 10_000_000)).toBe(1);
    expect(resolveThreads(3, 10)).toBe(3);
  });
});

/** Threads of this process, from Linux's /proc (a worker thread is one). */
function osThreads(): number {
  return readdirSync('/proc/self/task').length;
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

describe('solver session with threads', () => {
  // 200 x 180 = 36 000 cells: above the size from which the team shares a level (PARALLEL_MIN_CELLS)
  const system = buildSystem(heterogeneousCase(200, 180, 3));
  const op = inShared(system.op);
  const tolerance = 1e-10;
  const solve = (session: InlineSession) => session.solveNow({ rhs: system.b, x: new Float64Array(op.n), tolerance, maxIterations: 500 });

  it('reused through setDiagonal and setOperator gives the answer of a fresh session', async () => {
    const session = new InlineSession(op, { method: 'pcg-multigrid', threads: 2 });
    expect(session.threads).toBe(2);
    const first = solve(session);
    expect(first.stats.notes.join(' ')).toContain('threads: 2');
    // a head-dependent term adds conductance to the diagonal of the unknown cells (set-up again: same bytes as fresh)
    const diag = Float64Array.from(op.diag, (d, p) => (op.unknown[p] ? d + 0.01 * (p % 7) : d));
    session.setDiagonalNow(diag);
    const afterDiagonal = solve(session);
    const freshOp = inShared(new GridOperator(op.nx, op.ny, diag, op.east, op.south, op.unknown));
    const fresh = new InlineSession(freshOp, { method: 'pcg-multigrid', threads: 2 });
    const freshAnswer = solve(fresh);
    expect(bytes(afterDiagonal.x).equals(bytes(freshAnswer.x))).toBe(true);
    // new bands without a rebuild: the older hierarchy preconditions the new operator; same heads within tolerance
    const bands = {
      diag: Float64Array.from(op.diag),
      east: Float64Array.from(op.east, (e) => e * 1.05),
      south: Float64Array.from(op.south),
    };
    for (let p = 0; p < op.n; p++) {
      if (!op.unknown[p]) continue;
      bands.diag[p]! += (0.05 * bands.east[p]!) / 1.05;
      if (p % op.nx > 0) bands.diag[p]! += (0.05 * bands.east[p - 1]!) / 1.05;
    }
    const kept = new InlineSession(inShared(op), { method: 'pcg-multigrid', threads: 2 });
    kept.setOperatorNow(bands, false);
    const keptAnswer = solve(kept);
    const rebuiltOp = inShared(new GridOperator(op.nx, op.ny, bands.diag, bands.east, bands.south, op.unknown));
    const rebuilt = new InlineSession(rebuiltOp, { method: 'pcg-multigrid', threads: 2 });
    const rebuiltAnswer = solve(rebuilt);
    expect(keptAnswer.stats.stopReason).toBe('converged');
    // both within the tolerance on the same operator; the heads agree to what the residual pins (see above)
    expect(keptAnswer.stats.relativeResidual).toBeLessThanOrEqual(tolerance);
    expect(maxRelativeError(keptAnswer.x, rebuiltAnswer.x)).toBeLessThan(1e-6);
    await Promise.all([session.close(), fresh.close(), kept.close(), rebuilt.close()]);
  });

  it('auto launches the helpers while it measures the operator and ends them when it picks pcg-pairwise', async () => {
    // a checkerboard of 5 x 5 blocks with K 1 and 1e-6 (share of weakly tied cells above ROUGH_SHARE, as in
    // pairwise.test.ts): auto takes pcg-pairwise, which runs on one thread; 130 x 130 cells, above the size from which
    // a team is started at all, so the helpers are launched before the pick
    const n = 130;
    const k = new Float64Array(n * n);
    for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) k[i * n + j] = (Math.floor(i / 5) + Math.floor(j / 5)) % 2 === 0 ? 1 : 1e-6;
    const fixedHead = new Float64Array(n * n).fill(NaN);
    for (let i = 0; i < n; i++) {
      fixedHead[i * n] = 10;
      fixedHead[i * n + n - 1] = 0;
    }
    const rough = buildSystem({
      nx: n,
      ny: n,
      dx: 10,
      dy: 10,
      k,
      thickness: 10,
      anisotropy: 1,
      fixedHead,
      source: new Float64Array(n * n),
    });
    const before = osThreads();
    const session = new InlineSession(inShared(rough.op), { method: 'auto', threads: 2 });
    expect(session.method).toBe('pcg-pairwise');
    expect(session.threads).toBe(1);
    const answer = session.solveNow({ rhs: rough.b, x: new Float64Array(rough.op.n), tolerance, maxIterations: 500 });
    expect(answer.stats.stopReason).toBe('converged');
    // the launched helper is gone without the session being closed
    for (let i = 0; i < 100 && osThreads() > before; i++) await sleep(50);
    expect(osThreads()).toBe(before);
    await session.close();
  });

  it('closing the session ends its helper threads', async () => {
    const before = osThreads();
    const session = new InlineSession(op, { method: 'pcg-multigrid', threads: 3 });
    solve(session);
    expect(osThreads()).toBeGreaterThanOrEqual(before + 2);
    await session.close();
    for (let i = 0; i < 100 && osThreads() > before; i++) await sleep(50);
    expect(osThreads()).toBe(before);
  });

  // `piezomap solve` starts the solve worker and its helper threads while it reads and assembles the input
  // (startWorkerExecutor, prepare): a team started ahead must give the very same heads as one started by the session,
  // and one that is not what the session needs must not be left running.
  it('helper threads started ahead serve the session when they fit, and are closed when they do not', async () => {
    const choice = { method: 'pcg-multigrid', threads: 2 } as const;
    const reference = new InlineSession(op, choice);
    const expected = solve(reference);
    await reference.close();
    await sleep(100);
    const before = osThreads();

    const early = prestartTeam(op.n, { method: 'auto', threads: 2 });
    expect(early?.size).toBe(2);
    const session = new InlineSession(op, choice, early);
    expect(session.threads).toBe(2);
    // the early helper is the session's: no second one was started
    expect(osThreads()).toBe(before + 1);
    expect(bytes(solve(session).x).equals(bytes(expected.x))).toBe(true);
    await session.close();

    // three threads started ahead, two wanted: the three are closed and two started
    const other = new InlineSession(op, choice, prestartTeam(op.n, { method: 'auto', threads: 3 }));
    expect(other.threads).toBe(2);
    for (let i = 0; i < 100 && osThreads() > before + 1; i++) await sleep(50);
    expect(osThreads()).toBe(before + 1);
    expect(bytes(solve(other).x).equals(bytes(expected.x))).toBe(true);
    await other.close();

    // a method that shares no work: the early team is closed, the session runs on one thread
    const single = new InlineSession(op, { method: 'pcg-ic0', threads: 2 }, prestartTeam(op.n, { method: 'auto', threads: 2 }));
    expect(single.threads).toBe(1);
    for (let i = 0; i < 100 && osThreads() > before; i++) await sleep(50);
    expect(osThreads()).toBe(before);
    // small grids get no team ahead
    expect(prestartTeam(1000, { method: 'auto', threads: 2 })).toBeNull();
  });

  it('a worker executor started ahead and prepared solves to the same bytes as a session in this thread', async () => {
    const choice = { method: 'auto', threads: 2 } as const;
    const inline = new InlineSession(op, choice);
    const expected = solve(inline);
    await inline.close();
    const executor = startWorkerExecutor();
    executor.prepare?.(op.n, choice);
    const session = await executor.open(op, choice);
    const answer = await session.solve({ rhs: system.b, x: new Float64Array(op.n), tolerance, maxIterations: 500 });
    expect(bytes(answer.x).equals(bytes(expected.x))).toBe(true);
    session.close();
    executor.close();
    // a second session on the same executor starts a thread of its own
    const again = await executor.open(op, choice);
    const second = await again.solve({ rhs: system.b, x: new Float64Array(op.n), tolerance, maxIterations: 500 });
    expect(bytes(second.x).equals(bytes(expected.x))).toBe(true);
    again.close();
  });
});
