import { describe, expect, it } from 'vitest';
import { PiezomapError } from '../src/errors.js';
import { BandedCholesky } from '../src/solvers/banded.js';
import { chooseAutoMethod, createSolver, solverRegistry } from '../src/solvers/registry.js';
import { buildSystem, denseSolve, heterogeneousCase, maxRelativeError } from './solvers-fixtures.js';

const methods = Object.keys(solverRegistry);

describe('BandedCholesky', () => {
  it('matches the ml-matrix dense solve on a heterogeneous grid, in both band orders', () => {
    // Reference: ml-matrix LU solve (general-purpose linear-algebra library).
    for (const [nx, ny] of [
      [9, 14],
      [14, 9],
    ] as const) {
      const { op, b } = buildSystem(heterogeneousCase(nx, ny, 7));
      const ref = denseSolve(op, b);
      const x = new Float64Array(op.n);
      new BandedCholesky(op).solve(b, x);
      expect(maxRelativeError(x, ref)).toBeLessThan(1e-11);
    }
  });
});

describe('createSolver', () => {
  it('refuses an unknown method with a usage error listing the names', () => {
    const { op } = buildSystem(heterogeneousCase(5, 5, 1));
    let caught: unknown;
    try {
      createSolver('magic', op);
    } catch (e) {
      caught = e;
    }
    expect(caught).toBeInstanceOf(PiezomapError);
    expect((caught as PiezomapError).code).toBe('usage');
    expect((caught as PiezomapError).describe()).toContain('pcg-ic0');
  });

  it('resolves auto to a registered method', () => {
    const { op } = buildSystem(heterogeneousCase(5, 5, 1));
    expect(Object.keys(solverRegistry)).toContain(chooseAutoMethod(op));
    expect(createSolver('auto', op).method).toBe(chooseAutoMethod(op));
  });
});

describe.each(methods)('method %s', (method) => {
  it('reaches the direct reference heads on a 24x19 grid with K contrast 1e6, anisotropy 10, holes, 10x25 m cells', () => {
    // Reference: dense LU solve with ml-matrix of the system built from the discretisation spec.
    const { op, b } = buildSystem(heterogeneousCase(24, 19, 3));
    const ref = denseSolve(op, b);
    const solver = createSolver(method, op);
    const x = new Float64Array(op.n);
    const stationary = method === 'jacobi' || method === 'gauss-seidel' || method === 'sor';
    const stats = solver.solve(b, x, { tolerance: 1e-10, maxIterations: stationary ? 3_000_000 : 20_000 });
    expect(stats.stopReason).toBe('converged');
    expect(stats.relativeResidual).toBeLessThanOrEqual(1e-10);
    // relative residual 1e-10 bounds the head error by cond(A) * 1e-10; the ratio to the reference is checked loosely
    expect(maxRelativeError(x, ref)).toBeLessThan(1e-6);
  });
});
