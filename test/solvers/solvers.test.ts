import { describe, expect, it } from 'vitest';
import { PiezomapError } from '../../src/errors.js';
import { BandedCholesky } from '../../src/solvers/banded.js';
import { chooseAutoMethod, createSolver, solverRegistry } from '../../src/solvers/registry.js';
import { EigenvalueDecomposition } from 'ml-matrix';
import { buildSystem, denseMatrix, denseSolve, stripCase, heterogeneousCase, maxRelativeError } from './fixtures.js';

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

const small = buildSystem(heterogeneousCase(24, 19, 3));
const smallReference = denseSolve(small.op, small.b);
// ||x - x*||_2 <= ||A^{-1}||_2 ||b - A x||_2 = ||r||_2 / lambda_min(A) for SPD A (standard perturbation bound,
// Golub & Van Loan 2.6); lambda_min from ml-matrix's symmetric eigendecomposition.
const smallLambdaMin = Math.min(...new EigenvalueDecomposition(denseMatrix(small.op), { assumeSymmetric: true }).realEigenvalues);

describe.each(methods)('method %s', (method) => {
  it('reaches the direct reference heads on a 24x19 grid with K contrast 1e6, anisotropy 10, holes, 10x25 m cells', () => {
    // Reference: dense LU solve with ml-matrix of the system built from the discretisation spec.
    const { op, b } = small;
    const ref = smallReference;
    const solver = createSolver(method, op);
    const x = new Float64Array(op.n);
    const stationary = method === 'jacobi' || method === 'gauss-seidel' || method === 'sor';
    const stats = solver.solve(b, x, { tolerance: 1e-10, maxIterations: stationary ? 3_000_000 : 20_000 });
    expect(stats.stopReason).toBe('converged');
    expect(stats.relativeResidual).toBeLessThanOrEqual(1e-10);
    let err = 0;
    for (let i = 0; i < op.n; i++) err += (x[i]! - ref[i]!) ** 2;
    const bound = (stats.relativeResidual * Math.hypot(...b)) / smallLambdaMin;
    expect(Math.sqrt(err)).toBeLessThanOrEqual(1.01 * bound + 1e-9);
    expect(maxRelativeError(x, ref)).toBeLessThan(1e-5);
  });
});

describe.each(methods.filter((m) => m.startsWith('pcg') || m === 'cg'))('method %s on a multilevel grid', (method) => {
  it('reaches the banded Cholesky heads on a 70x52 grid with K contrast 1e6, anisotropy 10 and holes', () => {
    // Reference: banded Cholesky, itself checked against ml-matrix above. 3640 cells: multigrid has 3 levels.
    const { op, b } = buildSystem(heterogeneousCase(70, 52, 9));
    const ref = new Float64Array(op.n);
    new BandedCholesky(op).solve(b, ref);
    const x = new Float64Array(op.n);
    const stats = createSolver(method, op).solve(b, x, { tolerance: 1e-11, maxIterations: 50_000 });
    expect(stats.stopReason).toBe('converged');
    // measured errors 2e-8 .. 9e-8 of the head range; cond(A) ~ 1e6 x grid factor limits what 1e-11 buys
    expect(maxRelativeError(x, ref)).toBeLessThan(1e-6);
  });
});

describe('stopping rules', () => {
  const { op, b } = buildSystem(heterogeneousCase(40, 30, 4));

  it('stops with reason time-limit when the time budget is spent', () => {
    const stats = createSolver('pcg-jacobi', op).solve(b, new Float64Array(op.n), {
      tolerance: 1e-14,
      maxIterations: 100_000,
      timeLimitSeconds: 0,
    });
    expect(stats.stopReason).toBe('time-limit');
    expect(stats.converged).toBe(false);
  });

  it('stops with reason interrupted when the progress callback returns false', () => {
    let calls = 0;
    const stats = createSolver('cg', op).solve(b, new Float64Array(op.n), {
      tolerance: 1e-14,
      maxIterations: 100_000,
      onProgress: () => {
        calls++;
        return false;
      },
    });
    expect(stats.stopReason).toBe('interrupted');
    expect(calls).toBe(1);
  });

  it('stops with reason iteration-limit and reports the true residual', () => {
    const x = new Float64Array(op.n);
    const stats = createSolver('pcg-ssor', op).solve(b, x, { tolerance: 1e-14, maxIterations: 3 });
    expect(stats.stopReason).toBe('iteration-limit');
    expect(stats.iterations).toBe(3);
    const r = new Float64Array(op.n);
    op.apply(x, r);
    let rr = 0;
    for (let i = 0; i < op.n; i++) rr += (b[i]! - r[i]!) ** 2;
    expect(stats.relativeResidual).toBeCloseTo(Math.sqrt(rr) / Math.hypot(...b), 12);
    expect(stats.criterion).toContain('1e-14');
  });

  it('refuses an operator with a non-positive diagonal, naming the cell', () => {
    const bad = buildSystem(heterogeneousCase(6, 5, 2)).op;
    bad.diag[7] = 0;
    expect(() => createSolver('pcg-ic0', bad)).toThrow(/row 1, col 1/);
  });
});

describe('determinism', () => {
  it('pcg-multigrid gives bit-identical heads for identical inputs, with fresh and with reused solvers', () => {
    // Common practice for reproducible model runs: same input, same bytes.
    const { op, b } = buildSystem(heterogeneousCase(90, 70, 21));
    const first = new Float64Array(op.n);
    const solver = createSolver('pcg-multigrid', op);
    solver.solve(b, first, { tolerance: 1e-10, maxIterations: 500 });
    const again = new Float64Array(op.n);
    solver.solve(b, again, { tolerance: 1e-10, maxIterations: 500 });
    const fresh = new Float64Array(op.n);
    createSolver('pcg-multigrid', op).solve(b, fresh, { tolerance: 1e-10, maxIterations: 500 });
    expect(Buffer.from(again.buffer).equals(Buffer.from(first.buffer))).toBe(true);
    expect(Buffer.from(fresh.buffer).equals(Buffer.from(first.buffer))).toBe(true);
  });
});

describe('grid shapes', () => {
  it.each([
    [1, 2500],
    [2500, 1],
    [3, 1700],
    [1700, 3],
    [45, 61],
  ])('pcg-multigrid and pcg-ic0 reach the banded Cholesky heads on a %ix%i grid', (nx, ny) => {
    // Reference: banded Cholesky (validated against ml-matrix above); odd sizes exercise the last aggregates.
    const { op, b } = buildSystem(stripCase(nx, ny, 13));
    const ref = new Float64Array(op.n);
    new BandedCholesky(op).solve(b, ref);
    for (const method of ['pcg-multigrid', 'pcg-ic0']) {
      const x = new Float64Array(op.n);
      const stats = createSolver(method, op).solve(b, x, { tolerance: 1e-10, maxIterations: 20_000 });
      expect(stats.stopReason).toBe('converged');
      expect(maxRelativeError(x, ref)).toBeLessThan(1e-6);
    }
  });
});
