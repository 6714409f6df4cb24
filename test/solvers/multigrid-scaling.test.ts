/**
 * The multigrid preconditioner keeps its smoothing and coarse levels in single precision. Conductances far from 1
 * (a uniform K of 3.4e38 or 1e-60, or K spanning 75 orders of magnitude) must neither overflow nor flush to zero
 * there: the solve under `auto` must give the heads it gives for the same field at ordinary magnitudes.
 *
 * Reference: Darcy's law. With only fixed heads and sources that scale with T (Q -> F·Q), multiplying every
 * transmissivity by F leaves the heads unchanged, since the cell balance sum_q C_pq (h_q - h_p) + Q_p = 0 is
 * divided through by F (../shared/spec/discretisation.md). So heads for F·K and F·Q must equal those for K and Q.
 */
import { describe, expect, it } from 'vitest';
import { solveModel } from '../../src/pipeline.js';
import { BandedCholesky } from '../../src/solvers/banded.js';
import { createSolver } from '../../src/solvers/registry.js';
import { AggregationMultigrid } from '../../src/solvers/multigrid.js';
import { fixedColumn, makeModel, seededRandom, testGrid, well } from '../helpers/model.js';
import { buildSystem, maxRelativeError } from './fixtures.js';

/** 72 x 60 cells (three multigrid levels), lognormal-like K around 1, fixed heads west and east, one well. */
function scaledModel(factor: number) {
  const grid = testGrid(72, 60, 50);
  const random = seededRandom(11);
  const k = new Float64Array(grid.nx * grid.ny);
  for (let p = 0; p < k.length; p++) k[p] = factor * Math.exp(2 * (random() - 0.5));
  return makeModel(grid, {
    conductivity: k,
    fixedHeads: [fixedColumn(grid, 0, 100, 'west'), fixedColumn(grid, grid.nx - 1, 95, 'east')],
    wells: [well(grid, 'W1', 30, 36, -0.5 * factor)],
    solver: { method: 'auto', tolerance: 1e-10, maxIterations: 2000 },
  });
}

describe('AggregationMultigrid at extreme magnitudes', () => {
  const reference = solveModel(scaledModel(1));

  it.each([
    ['3.4e38 (near the single-precision maximum)', 3.4e38],
    ['1e30', 1e30],
    ['1e-45 (below the single-precision minimum)', 1e-45],
    ['1e-60', 1e-60],
  ])('solves a uniform K factor of %s under auto with the heads of factor 1', (_label, factor) => {
    const result = solveModel(scaledModel(factor));
    expect(result.stats.stopReason).toBe('converged');
    expect(result.stats.method).toBe('pcg-multigrid');
    // Same heads to the solver tolerance (heads near 100, so an absolute 1e-6 is a relative 1e-8).
    let worst = 0;
    for (let p = 0; p < reference.head.length; p++) worst = Math.max(worst, Math.abs(result.head[p]! - reference.head[p]!));
    expect(worst).toBeLessThan(1e-6);
    // And about as fast: the scaled preconditioner is the same one.
    expect(result.stats.iterations).toBeLessThanOrEqual(reference.stats.iterations + 2);
  });

  it('solves a K field spanning 75 orders of magnitude (wider than single precision carries) to the banded Cholesky heads', () => {
    // Reference: banded Cholesky in double precision (checked against ml-matrix in solvers.test.ts).
    const nx = 70;
    const ny = 50;
    const random = seededRandom(5);
    const k = new Float64Array(nx * ny);
    for (let p = 0; p < k.length; p++) k[p] = Math.pow(10, -45 + 75 * ((p % nx) / (nx - 1))) * (0.5 + random());
    const fixedHead = new Float64Array(nx * ny).fill(Number.NaN);
    for (let i = 0; i < ny; i++) {
      fixedHead[i * nx] = 10;
      fixedHead[i * nx + nx - 1] = 0;
    }
    const source = new Float64Array(nx * ny);
    const { op, b } = buildSystem({ nx, ny, dx: 10, dy: 10, k, thickness: 1, anisotropy: 1, fixedHead, source });
    const ref = new Float64Array(op.n);
    new BandedCholesky(op).solve(b, ref);
    const x = new Float64Array(op.n);
    const stats = createSolver('pcg-multigrid', op).solve(b, x, { tolerance: 1e-12, maxIterations: 5000 });
    expect(stats.stopReason).toBe('converged');
    expect(maxRelativeError(x, ref)).toBeLessThan(1e-6);
  });

  it('applies the same preconditioner, up to the factor, to an operator scaled by a power of two', () => {
    // Scaling by 2^k is exact in binary floating point (IEEE 754), so M(2^k A)^{-1} r = 2^-k M(A)^{-1} r exactly.
    const nx = 40;
    const ny = 36;
    const k = new Float64Array(nx * ny);
    const random = seededRandom(3);
    for (let p = 0; p < k.length; p++) k[p] = 1 + random();
    const fixedHead = new Float64Array(nx * ny).fill(Number.NaN);
    for (let i = 0; i < ny; i++) fixedHead[i * nx] = 1;
    const base = buildSystem({ nx, ny, dx: 1, dy: 1, k, thickness: 1, anisotropy: 1, fixedHead, source: new Float64Array(nx * ny) });
    const big = buildSystem({
      nx,
      ny,
      dx: 1,
      dy: 1,
      k: k.map((v) => v * 2 ** 100),
      thickness: 1,
      anisotropy: 1,
      fixedHead,
      source: new Float64Array(nx * ny),
    });
    const r = new Float64Array(nx * ny).map(() => random() - 0.5);
    const z1 = new Float64Array(r.length);
    const z2 = new Float64Array(r.length);
    new AggregationMultigrid(base.op).apply(r, z1);
    new AggregationMultigrid(big.op).apply(r, z2);
    for (let p = 0; p < r.length; p++) expect(z2[p]! * 2 ** 100).toBe(z1[p]!);
  });
});
