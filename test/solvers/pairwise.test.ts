/**
 * The pairwise-aggregation multigrid (pcg-pairwise) on rough conductivity: analytical heads, direct references,
 * iteration bounds where fixed 2 x 2 aggregation fails, identity rows, thin grids and extreme K scaling.
 */
import { describe, expect, it } from 'vitest';
import { inlineExecutor } from '../../src/executor/inline.js';
import { BandedCholesky } from '../../src/solvers/banded.js';
import { qualityBelow, pairQuality } from '../../src/solvers/pairwise.js';
import { ROUGH_SHARE, chooseAutoMethod, createSolver } from '../../src/solvers/registry.js';
import { weakBlockShare } from '../../src/solvers/roughness.js';
import type { StencilOperator } from '../../src/solvers/types.js';
import { buildSystem, correlatedCase, denseSolve, maxRelativeError, random, type TestCase } from './fixtures.js';

const TOLERANCE = 1e-10;
/**
 * Layers with K from 1e-6 to 1 in series make a badly conditioned system: a residual of 1e-10 bounds the head error
 * only by 1e-10 ||b|| / lambda_min(A) (Golub & Van Loan 2.6), several micrometres here; these solves go to 1e-12.
 */
const SERIES_TOLERANCE = 1e-12;

function solveWith(method: string, op: StencilOperator, b: Float64Array, tolerance = TOLERANCE) {
  const solver = createSolver(method, op);
  const x = new Float64Array(op.n);
  const stats = solver.solve(b, x, { tolerance, maxIterations: 2000 });
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
  function layered(nx: number, ny: number, seed: number, decades: number): { c: TestCase; heads: Float64Array } {
    const rnd = random(seed);
    const column = Array.from({ length: nx }, () => 10 ** (-decades + decades * rnd()));
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

  // A long line of layers is badly conditioned (lambda_min falls with the square of its length), so the thin grids
  // take three decades of K and 1500 cells, still above the size that is solved directly (1024 cells).
  it.each([
    [60, 40, 6],
    [1500, 1, 3],
  ])('%i x %i cells, K of each column spanning %i decades', (nx, ny, decades) => {
    const { c, heads } = layered(nx, ny, 11, decades);
    const { op, b } = buildSystem(c);
    const { x, stats } = solveWith('pcg-pairwise', op, b, SERIES_TOLERANCE);
    expect(stats.converged).toBe(true);
    expect(stats.notes.join(' ')).toContain('levels of');
    // unknowns are heads here (no datum shift in the test systems); fixed cells are identity rows with x = 0
    let worst = 0;
    for (let p = 0; p < op.n; p++) if (op.unknown[p]) worst = Math.max(worst, Math.abs(x[p]! - heads[p]!));
    expect(worst).toBeLessThan(1e-6);
  });

  it('a column of 1500 cells (1 x N), layers along it, K spanning 3 decades', () => {
    const { c: row, heads } = layered(1500, 1, 12, 3);
    // the same layers turned north-south: fixed heads at the top and bottom cells
    const k = row.k;
    const fixedHead = new Float64Array(1500).fill(NaN);
    fixedHead[0] = 100;
    fixedHead[1499] = 90;
    const c: TestCase = { nx: 1, ny: 1500, dx: 10, dy: 10, k, thickness: 20, anisotropy: 1, fixedHead, source: new Float64Array(1500) };
    const { op, b } = buildSystem(c);
    const { x, stats } = solveWith('pcg-pairwise', op, b, SERIES_TOLERANCE);
    expect(stats.converged).toBe(true);
    let worst = 0;
    for (let p = 1; p < 1499; p++) worst = Math.max(worst, Math.abs(x[p]! - heads[p]!));
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
    // to 1e-12: at 1e-10 the head error bound ||r|| / lambda_min (Golub & Van Loan 2.6) is about 1e-8 here
    const pairwise = solveWith('pcg-pairwise', op, b, 1e-12);
    const multigrid = solveWith('pcg-multigrid', op, b, 1e-12);
    expect(pairwise.stats.converged).toBe(true);
    expect(multigrid.stats.converged).toBe(true);
    expect(maxRelativeError(pairwise.x, ref)).toBeLessThan(1e-8);
    expect(maxRelativeError(multigrid.x, ref)).toBeLessThan(1e-8);
    // hence within 2e-8 of each other
    expect(maxRelativeError(pairwise.x, multigrid.x)).toBeLessThan(2e-8);
    for (let p = 0; p < op.n; p++) if (!op.unknown[p]) expect(pairwise.x[p]).toBe(0);
  });
});

/** K = 1 in 5 x 5 blocks of a checkerboard whose other blocks have K = 1e-6: high-K lenses meeting at corners only. */
function blockBoard(n: number, block: number): Float64Array {
  const k = new Float64Array(n * n);
  for (let i = 0; i < n; i++)
    for (let j = 0; j < n; j++) k[i * n + j] = (Math.floor(i / block) + Math.floor(j / block)) % 2 === 0 ? 1 : 1e-6;
  return k;
}

/** K = 1e-6 everywhere but a meandering channel two cells wide with K = 1 from the west edge to the east edge. */
function channel(n: number): Float64Array {
  const k = new Float64Array(n * n).fill(1e-6);
  for (let j = 0; j < n; j++) {
    const i = Math.round(n / 2 + (n / 4) * Math.sin((2 * Math.PI * j) / n));
    k[i * n + j] = 1;
    k[(i + 1) * n + j] = 1;
  }
  return k;
}

describe('pcg-pairwise where fixed 2 x 2 aggregates fail', () => {
  // The bound: a multigrid method's iteration count should not depend on the coefficients' jumps when its coarse
  // spaces follow them (common practice for algebraic multigrid; e.g. Napov & Notay 2012 report near-constant counts
  // on discontinuous coefficients). 20 iterations to 1e-10 is 1.4 times the 14 of the smooth benchmark case.
  // pcg-multigrid's 2 x 2 blocks straddle the jumps and need 130-360 iterations on these grids: if that method
  // improves, the second expectation of each case says so and the case should be reconsidered.
  const BOUND = 20;
  it.each([
    ['a checkerboard of 5 x 5 blocks, K 1 and 1e-6', () => blockBoard(128, 5)],
    ['a checkerboard of 6 x 6 blocks, K 1 and 1e-6', () => blockBoard(128, 6)],
    ['a channel of K 1 through K 1e-6', () => channel(128)],
    ['white-noise ln K, sigma 3', () => roughK(128 * 128, 3, 3)],
  ])('%s (128 x 128)', (_name, field) => {
    const { op, b } = buildSystem(westEast(128, 128, field()));
    const pairwise = solveWith('pcg-pairwise', op, b);
    expect(pairwise.stats.converged).toBe(true);
    expect(pairwise.stats.iterations).toBeLessThanOrEqual(BOUND);
    const multigrid = solveWith('pcg-multigrid', op, b);
    expect(multigrid.stats.iterations).toBeGreaterThan(BOUND);
  });
});

describe('pcg-pairwise on any scale of K', () => {
  it('gives the same heads for K times 1e-45 and times 3e38 as for K itself', () => {
    // The heads do not depend on a common factor of K (Darcy's law is linear in K; with fixed heads and no sources
    // the factor cancels). A power of two scales the levels (operatorScale); 1e-45 and 3e38 are not powers of two.
    const c = roughCase(50, 40, 8, 3);
    for (let p = 0; p < c.source.length; p++) c.source[p] = 0;
    const reference = solveWith('pcg-pairwise', buildSystem(c).op, buildSystem(c).b);
    expect(reference.stats.converged).toBe(true);
    for (const factor of [1e-45, 3e38]) {
      const scaled: TestCase = { ...c, k: c.k.map((v) => v * factor) };
      const { op, b } = buildSystem(scaled);
      const { x, stats } = solveWith('pcg-pairwise', op, b);
      expect(stats.converged).toBe(true);
      expect(stats.notes.join(' ')).toContain('levels of');
      expect(maxRelativeError(x, reference.x)).toBeLessThan(1e-8);
    }
  });
});

describe('pcg-pairwise with double-precision levels', () => {
  it('takes double precision when the conductances span more than single precision carries, and agrees with the banded solve', () => {
    // K of 1e-20 in the west half and 1e20 in the east half: diagonals 40 decades apart (2^120 is about 1.3e36).
    // Reference: banded Cholesky (Golub & Van Loan 4.3.5), checked against ml-matrix in solvers.test.ts.
    const nx = 48;
    const ny = 40;
    const k = roughK(nx * ny, 6, 1);
    for (let p = 0; p < k.length; p++) k[p]! *= p % nx < nx / 2 ? 1e-20 : 1e20;
    const { op, b } = buildSystem(westEast(nx, ny, k));
    const ref = new Float64Array(op.n);
    new BandedCholesky(op).solve(b, ref);
    const { x, stats } = solveWith('pcg-pairwise', op, b, 1e-12);
    expect(stats.converged).toBe(true);
    expect(stats.notes.join(' ')).toContain('double-precision levels');
    expect(maxRelativeError(x, ref)).toBeLessThan(1e-8);
  });
});

describe('pair and aggregate quality', () => {
  const rows = (d: number[], e: number[], c: (i: number, k: number) => number) => ({
    diag: (i: number) => d[i]!,
    excess: (i: number) => e[i]!,
    coupling: c,
  });

  it('the exact test of a pair agrees with the closed form', () => {
    const rnd = random(4);
    for (let t = 0; t < 200; t++) {
      const c = 10 ** (-3 + 3 * rnd());
      const d = [c + 10 ** (-3 + 4 * rnd()), c + 10 ** (-3 + 4 * rnd())];
      const e = [rnd() < 0.5 ? 0 : (d[0]! - c) * rnd(), rnd() < 0.5 ? 0 : (d[1]! - c) * rnd()];
      const mu = pairQuality(d[0]!, d[1]!, e[0]!, e[1]!, c);
      const base = rows(d, e, () => c);
      expect(qualityBelow(base, [0, 1], mu * 1.001)).toBe(true);
      expect(qualityBelow(base, [0, 1], mu * 0.999)).toBe(false);
    }
  });

  it('a 2 x 2 block of the five-point Laplacian has quality 2, a row of four 4 / (2 - sqrt 2)', () => {
    // Inside couplings of the block form the cycle graph C4, whose Laplacian eigenvalues are 2 - 2 cos(2 pi k / 4) =
    // 0, 2, 2, 4; a row of four is the path graph P4 with eigenvalues 2 - 2 cos(pi k / 4) (Chung, Spectral Graph
    // Theory, 1997, section 1.2). With diagonal 4 and no excess, mu = 4 / (least non-zero eigenvalue).
    const block = rows([4, 4, 4, 4], [0, 0, 0, 0], (i, k) => ((i ^ k) === 1 || (i ^ k) === 2 ? 1 : 0));
    expect(qualityBelow(block, [0, 1, 2, 3], 2.001)).toBe(true);
    expect(qualityBelow(block, [0, 1, 2, 3], 1.999)).toBe(false);
    const line = rows([4, 4, 4, 4], [0, 0, 0, 0], (i, k) => (Math.abs(i - k) === 1 ? 1 : 0));
    const mu = 4 / (2 - Math.SQRT2);
    expect(qualityBelow(line, [0, 1, 2, 3], mu * 1.001)).toBe(true);
    expect(qualityBelow(line, [0, 1, 2, 3], mu * 0.999)).toBe(false);
  });
});

describe('auto on rough conductivity', () => {
  it('takes pcg-pairwise on white-noise ln K and on a block checkerboard, pcg-multigrid on a smooth correlated field', () => {
    // The rule and its threshold: src/solvers/registry.ts (chooseAutoMethod); measured shares in bench/README.md.
    const rough = buildSystem(roughCase(128, 128, 2, 3)).op;
    const smooth = buildSystem(correlatedCase(128, 128, 2)).op;
    expect(weakBlockShare(rough)).toBeGreaterThan(ROUGH_SHARE);
    expect(chooseAutoMethod(rough)).toBe('pcg-pairwise');
    expect(weakBlockShare(smooth)).toBeLessThan(ROUGH_SHARE);
    expect(chooseAutoMethod(smooth)).toBe('pcg-multigrid');
    // the checkerboard of 5 x 5 blocks above, where 2 x 2 aggregates need more than 20 iterations
    expect(chooseAutoMethod(buildSystem(westEast(128, 128, blockBoard(128, 5))).op)).toBe('pcg-pairwise');
  });
});

describe('pcg-pairwise in a solver session', () => {
  it('keeps its hierarchy as preconditioner of changed conductances, and rebuilds it on request', () => {
    // As a water-table outer iteration does (src/discretisation/outerLoop.ts): the bands change in place; the answer
    // is checked against the banded Cholesky solve of the changed system (Golub & Van Loan 4.3.5).
    const c = roughCase(60, 50, 9, 3);
    const { op } = buildSystem(c);
    const session = inlineExecutor.openNow(op, { method: 'pcg-pairwise' });
    expect(session.method).toBe('pcg-pairwise');
    const changed = buildSystem({ ...c, k: c.k.map((v, p) => (p % 7 === 0 ? v * 3 : v)) });
    const bands = { diag: changed.op.diag, east: changed.op.east, south: changed.op.south };
    for (const rebuild of [false, true]) {
      expect(session.setOperatorNow(bands, rebuild)).toBe(rebuild);
      const ref = new Float64Array(op.n);
      new BandedCholesky(changed.op).solve(changed.b, ref);
      const answer = session.solveNow({ rhs: changed.b, x: new Float64Array(op.n), tolerance: 1e-12, maxIterations: 200 });
      expect(answer.stats.converged).toBe(true);
      expect(maxRelativeError(answer.x, ref)).toBeLessThan(1e-8);
    }
  });
});
