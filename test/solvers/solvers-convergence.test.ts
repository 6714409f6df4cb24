import { describe, expect, it } from 'vitest';
import { BandedCholesky } from '../../src/solvers/banded.js';
import { createSolver, solverRegistry } from '../../src/solvers/registry.js';
import { estimateJacobiRadius, optimalRelaxation } from '../../src/solvers/spectrum.js';
import { buildSystem, correlatedCase, heterogeneousCase, maxRelativeError, poissonCase } from './fixtures.js';

const methods = Object.keys(solverRegistry);
const stationary = new Set(['jacobi', 'gauss-seidel', 'sor']);

describe('Jacobi spectral radius on the model Poisson problem', () => {
  // Standard texts (e.g. Saad, Iterative Methods for Sparse Linear Systems, 2003, sec. 4.2; Young 1971):
  // for the five-point Laplacian on an n x n grid with Dirichlet edges, rho(Jacobi) = cos(pi/(n+1)).
  it.each([8, 16])('measured from the residual reduction matches cos(pi/(n+1)) for n = %i', (n) => {
    const { op, b } = buildSystem(poissonCase(n));
    const solver = createSolver('jacobi', op);
    const stats = solver.solve(b, new Float64Array(op.n), { tolerance: 1e-10, maxIterations: 100_000 });
    expect(stats.converged).toBe(true);
    expect(stats.spectralRadius).not.toBeNull();
    expect(stats.spectralRadius!).toBeCloseTo(Math.cos(Math.PI / (n + 1)), 3);
  });

  it('Lanczos estimate matches cos(pi/(n+1)) for n = 40', () => {
    const n = 40;
    const { op } = buildSystem(poissonCase(n));
    const est = estimateJacobiRadius(op);
    expect(est.rho).toBeCloseTo(Math.cos(Math.PI / (n + 1)), 5);
  });

  it('Gauss-Seidel radius is the square of the Jacobi radius (consistent ordering; Young 1950)', () => {
    const n = 12;
    const { op, b } = buildSystem(poissonCase(n));
    const stats = createSolver('gauss-seidel', op).solve(b, new Float64Array(op.n), { tolerance: 1e-10, maxIterations: 100_000 });
    expect(stats.spectralRadius!).toBeCloseTo(Math.cos(Math.PI / (n + 1)) ** 2, 3);
  });
});

describe('SOR with the optimal relaxation factor', () => {
  // Young (1950): with w_opt the SOR iteration converges with rate w_opt - 1 ~ 1 - 2 pi/n, i.e. O(n) iterations,
  // against O(n^2) for Jacobi and Gauss-Seidel.
  it('needs about twice the iterations when n doubles (O(n), not O(n^2))', () => {
    const iterations: number[] = [];
    for (const n of [32, 64]) {
      const { op, b } = buildSystem(poissonCase(n));
      const solver = createSolver('sor', op); // automatic w from the estimated Jacobi radius
      const stats = solver.solve(b, new Float64Array(op.n), { tolerance: 1e-8, maxIterations: 100_000 });
      expect(stats.converged).toBe(true);
      iterations.push(stats.iterations);
    }
    const ratio = iterations[1]! / iterations[0]!;
    expect(ratio).toBeGreaterThan(1.5);
    expect(ratio).toBeLessThan(2.6);
  });

  it("automatic relaxation factor agrees with Young's formula for rho = cos(pi/(n+1))", () => {
    const n = 32;
    const { op } = buildSystem(poissonCase(n));
    const solver = createSolver('sor', op);
    const stats = solver.solve(new Float64Array(op.n), new Float64Array(op.n), { tolerance: 1e-8, maxIterations: 10 });
    const expected = optimalRelaxation(Math.cos(Math.PI / (n + 1)));
    const note = stats.notes.find((t) => t.startsWith('relaxation factor'))!;
    expect(Number(/relaxation factor ([0-9.]+)/.exec(note)![1])).toBeCloseTo(expected, 3);
  });
});

describe('stationary diagnostics', () => {
  it('Jacobi stops early as too-slow with a predicted iteration count when the cap cannot be reached', () => {
    const { op, b } = buildSystem(poissonCase(60));
    const stats = createSolver('jacobi', op).solve(b, new Float64Array(op.n), { tolerance: 1e-10, maxIterations: 2000 });
    expect(stats.stopReason).toBe('too-slow');
    expect(stats.iterations).toBeLessThan(500);
    expect(stats.notes.join(' ')).toMatch(/about \d+ iterations/);
    // rho = cos(pi/61) ~ 0.99867 needs ~ ln(1e-10)/ln(rho) ~ 17,000 iterations (common practice estimate)
    const predicted = Number(/about (\d+) iterations/.exec(stats.notes.join(' '))![1]);
    expect(predicted).toBeGreaterThan(2000);
  });

  it('SOR with w outside (0,2) is refused; w = 1.999 on a tiny cap reports the slow rate', () => {
    const { op, b } = buildSystem(poissonCase(10));
    expect(() => createSolver('sor', op, { relaxation: 2.5 })).toThrow(/relaxation/);
    const stats = createSolver('sor', op, { relaxation: 1.999 }).solve(b, new Float64Array(op.n), { tolerance: 1e-10, maxIterations: 500 });
    expect(['too-slow', 'iteration-limit']).toContain(stats.stopReason);
    expect(stats.spectralRadius!).toBeGreaterThan(0.99);
  });
});

describe.each(methods)('method %s on known answers', (method) => {
  // Known-answer checks in the style of Krylov.jl/IterativeSolvers.jl test suites (common practice).
  const { op, b } = buildSystem(heterogeneousCase(16, 14, 11));
  const exact = new Float64Array(op.n);
  new BandedCholesky(op).solve(b, exact);

  it('starting from the exact solution stops within one iteration', () => {
    const x = exact.slice();
    const stats = createSolver(method, op).solve(b, x, { tolerance: 1e-8, maxIterations: 1000 });
    expect(stats.converged).toBe(true);
    expect(stats.iterations).toBeLessThanOrEqual(1);
    expect(maxRelativeError(x, exact)).toBeLessThan(1e-8);
  });

  it('a zero right-hand side gives zero', () => {
    const x = new Float64Array(op.n).fill(3);
    const stats = createSolver(method, op).solve(new Float64Array(op.n), x, { tolerance: 1e-8, maxIterations: 1000 });
    expect(stats.converged).toBe(true);
    expect(x.every((v) => v === 0)).toBe(true);
  });

  it('keeps the residual history when asked, starting at the initial relative residual', () => {
    const x = new Float64Array(op.n);
    const stats = createSolver(method, op).solve(b, x, {
      tolerance: 1e-6,
      maxIterations: stationary.has(method) ? 1_000_000 : 10_000,
      keepHistory: true,
    });
    expect(stats.history.length).toBe(stats.iterations + 1);
    expect(stats.history[0]).toBeCloseTo(1, 12); // x0 = 0: r0 = b
    expect(stats.history[stats.history.length - 1]!).toBeLessThanOrEqual(1e-6);
  });

  it('allocates no typed array during a solve after warm-up', () => {
    const solver = createSolver(method, op);
    const options = { tolerance: 1e-8, maxIterations: stationary.has(method) ? 1_000_000 : 10_000 };
    solver.solve(b, new Float64Array(op.n), options);
    const x = new Float64Array(op.n);
    let created = 0;
    const original = globalThis.Float64Array;
    const Spy = new Proxy(original, {
      construct(target, args) {
        created++;
        return Reflect.construct(target, args);
      },
    });
    globalThis.Float64Array = Spy;
    try {
      const stats = solver.solve(b, x, options);
      expect(stats.converged).toBe(true);
    } finally {
      globalThis.Float64Array = original;
    }
    expect(created).toBe(0);
  });
});

describe('pcg-multigrid', () => {
  it('iteration count barely grows from 64^2 to 256^2 on a correlated field with K contrast 1e6, anisotropy 10 and holes', () => {
    // Expected of a multigrid method (Trottenberg, Oosterlee & Schüller, Multigrid, 2001): grid-independent convergence.
    const counts: number[] = [];
    for (const size of [64, 128, 256]) {
      const { op, b } = buildSystem(correlatedCase(size, size, 5));
      const stats = createSolver('pcg-multigrid', op).solve(b, new Float64Array(op.n), { tolerance: 1e-10, maxIterations: 500 });
      expect(stats.converged).toBe(true);
      counts.push(stats.iterations);
    }
    // measured 13, 16, 17 iterations: allow a few more, far below single-level growth (IC(0): 109, 391, 1812)
    expect(counts[2]!).toBeLessThanOrEqual(counts[0]! + 6);
    expect(counts[2]!).toBeLessThan(30);
  });
});
