/**
 * The end-to-end solve (assemble -> solve -> budget) against analytical solutions and an independent
 * dense direct solve. Each check names its source.
 */
import { describe, expect, it } from 'vitest';
import { Matrix, solve as denseSolve } from 'ml-matrix';
import { solveModel } from '../../src/pipeline.js';
import { assembleSystem } from '../../src/discretisation/assemble.js';
import { fixedCells, fixedColumn, makeModel, seededRandom, testGrid, well } from '../helpers/model.js';

describe('solveModel on analytical cases', () => {
  it('gives a linear head and Darcy flux between two fixed-head columns (Darcy 1856)', () => {
    const nx = 41,
      ny = 3,
      dx = 25,
      K = 12,
      b = 15;
    const grid = testGrid(nx, ny, dx);
    const model = makeModel(grid, {
      conductivity: new Float64Array(nx * ny).fill(K),
      thickness: b,
      fixedHeads: [fixedColumn(grid, 0, 100, 'west'), fixedColumn(grid, nx - 1, 90, 'east')],
    });
    const r = solveModel(model);
    expect(r.stats.converged).toBe(true);
    for (let i = 0; i < ny; i++) {
      for (let j = 0; j < nx; j++) {
        const expected = 100 - (10 * j) / (nx - 1);
        expect(Math.abs(r.head[i * nx + j]! - expected)).toBeLessThan(1e-8);
      }
    }
    // Q = K b (dh/L) W, with L the distance between the fixed cell centres and W the section width.
    const q = K * b * (10 / ((nx - 1) * dx)) * (ny * dx);
    const west = r.budget.terms.find((t) => t.term === 'west')!;
    const east = r.budget.terms.find((t) => t.term === 'east')!;
    expect(west.inflow).toBeCloseTo(q, 6);
    expect(east.outflow).toBeCloseTo(q, 6);
    expect(Math.abs(r.budget.discrepancyPercent)).toBeLessThan(1e-6);
  });

  it('gives the harmonic-mean effective conductivity for layers in series (standard hydrogeology texts, e.g. Freeze & Cherry 1979, sec. 2.4)', () => {
    // Three layers across the flow direction: 10 cells of K=1, 10 of K=50, 10 of K=4 (plus fixed end cells).
    const nx = 32,
      ny = 2,
      dx = 10,
      b = 20;
    const grid = testGrid(nx, ny, dx);
    const K = new Float64Array(nx * ny);
    const layerK = (j: number) => (j <= 10 ? 1 : j <= 20 ? 50 : 4);
    for (let i = 0; i < ny; i++) for (let j = 0; j < nx; j++) K[i * nx + j] = layerK(j);
    const model = makeModel(grid, {
      conductivity: K,
      thickness: b,
      fixedHeads: [fixedColumn(grid, 0, 50, 'west'), fixedColumn(grid, nx - 1, 40, 'east')],
    });
    const r = solveModel(model);
    // Between the fixed cell centres each cell contributes its length; the end cells contribute half.
    let resistance = 0;
    for (let j = 0; j < nx; j++) resistance += (j === 0 || j === nx - 1 ? dx / 2 : dx) / layerK(j);
    const length = (nx - 1) * dx;
    const kEffective = length / resistance;
    const q = kEffective * b * (10 / length) * (ny * dx);
    expect(r.budget.terms.find((t) => t.term === 'west')!.inflow).toBeCloseTo(q, 6);
  });

  it('matches the Thiem (1906) equation around a pumping well, and the well cell matches Thiem at Peaceman (1978) r0 = 0.208 dx', () => {
    const half = 60,
      nx = 2 * half + 1,
      dx = 10,
      K = 10,
      b = 10,
      Q = 1000,
      H0 = 50;
    const T = K * b;
    const grid = testGrid(nx, nx, dx);
    const R = half * dx; // radius beyond which heads are fixed at the Thiem values
    const thiem = (r: number) => H0 - (Q / (2 * Math.PI * T)) * Math.log(R / r);
    const fixed: Array<[number, number]> = [];
    for (let i = 0; i < nx; i++) {
      for (let j = 0; j < nx; j++) {
        const r = Math.hypot(i - half, j - half) * dx;
        if (r >= R - dx) fixed.push([i * nx + j, thiem(r)]);
      }
    }
    const model = makeModel(grid, {
      conductivity: new Float64Array(nx * nx).fill(K),
      thickness: b,
      fixedHeads: [fixedCells('ring', fixed)],
      wells: [well(grid, 'W', half, half, -Q)],
    });
    const r = solveModel(model);
    expect(r.stats.converged).toBe(true);
    // Away from the well (3 to 40 cells) the drawdown agrees with Thiem to about 1 %.
    for (const k of [3, 5, 10, 20, 40]) {
      const h = r.head[half * nx + half + k]!;
      const sNumeric = H0 - h;
      const sThiem = H0 - thiem(k * dx);
      expect(Math.abs(sNumeric - sThiem) / sThiem).toBeLessThan(0.01);
    }
    // Well block: Peaceman's equivalent radius for square cells, r0 = 0.208 dx (Peaceman 1978).
    const sCell = H0 - r.head[half * nx + half]!;
    const sPeaceman = H0 - thiem(0.208 * dx);
    expect(Math.abs(sCell - sPeaceman) / sPeaceman).toBeLessThan(0.01);
    expect(Math.abs(r.budget.discrepancyPercent)).toBeLessThan(0.01);
  });
});

/** An independent assembly straight from the spec's formulas, solved densely with ml-matrix. */
function denseReference(
  nx: number,
  ny: number,
  dx: number,
  dy: number,
  K: Float64Array,
  b: Float64Array,
  a: number,
  fixed: Map<number, number>,
  source: Float64Array,
): Float64Array {
  const active = (p: number) => K[p]! > 0 && b[p]! > 0 && Number.isFinite(K[p]!);
  const unknowns: number[] = [];
  const index = new Map<number, number>();
  for (let p = 0; p < nx * ny; p++)
    if (active(p) && !fixed.has(p)) {
      index.set(p, unknowns.length);
      unknowns.push(p);
    }
  const m = unknowns.length;
  const A = Matrix.zeros(m, m);
  const rhs = Matrix.zeros(m, 1);
  const harmonic = (u: number, v: number) => (2 * u * v) / (u + v);
  unknowns.forEach((p, r) => {
    const i = Math.floor(p / nx),
      j = p % nx;
    const neighbours: Array<[number, number]> = [];
    if (j > 0) neighbours.push([p - 1, (dy / dx) * harmonic(K[p]! * b[p]!, K[p - 1]! * b[p - 1]!)]);
    if (j < nx - 1) neighbours.push([p + 1, (dy / dx) * harmonic(K[p]! * b[p]!, K[p + 1]! * b[p + 1]!)]);
    if (i > 0) neighbours.push([p - nx, (dx / dy) * harmonic(a * K[p]! * b[p]!, a * K[p - nx]! * b[p - nx]!)]);
    if (i < ny - 1) neighbours.push([p + nx, (dx / dy) * harmonic(a * K[p]! * b[p]!, a * K[p + nx]! * b[p + nx]!)]);
    let rhsValue = source[p]!;
    for (const [q, c] of neighbours) {
      if (!active(q)) continue;
      A.set(r, r, A.get(r, r) + c);
      if (fixed.has(q)) rhsValue += c * fixed.get(q)!;
      else A.set(r, index.get(q)!, -c);
    }
    rhs.set(r, 0, rhsValue);
  });
  const x = denseSolve(A, rhs);
  const head = new Float64Array(nx * ny).fill(NaN);
  unknowns.forEach((p, r) => (head[p] = x.get(r, 0)));
  for (const [p, h] of fixed) if (active(p)) head[p] = h;
  return head;
}

describe('solveModel against a dense direct solve (ml-matrix, general-purpose linear algebra)', () => {
  it('agrees to 1e-8 relative on a heterogeneous, anisotropic grid with inactive holes and non-square cells', () => {
    const nx = 17,
      ny = 13,
      dx = 40,
      dy = 25,
      a = 0.3;
    const grid = testGrid(nx, ny, dx, dy);
    const rand = seededRandom(7);
    const K = new Float64Array(nx * ny);
    const b = new Float64Array(nx * ny);
    for (let p = 0; p < nx * ny; p++) {
      K[p] = Math.exp(Math.log(1e-3) + rand() * Math.log(1e6)); // contrasts up to 1e6
      b[p] = 5 + 30 * rand();
    }
    // Inactive holes: a block and scattered cells (NaN and <= 0 both mean inactive).
    for (let i = 4; i < 7; i++) for (let j = 6; j < 10; j++) K[i * nx + j] = NaN;
    K[2 * nx + 3] = 0;
    K[9 * nx + 12] = -1;
    const west = fixedColumn(grid, 0, (i) => 120 - i * 0.5, 'west');
    const lake = fixedCells('lake', [
      [10 * nx + 8, 95],
      [10 * nx + 9, 95.5],
    ]);
    const wells = [well(grid, 'P1', 3, 12, -300), well(grid, 'P2', 8, 4, -150), well(grid, 'P3', 8, 4, -50), well(grid, 'I1', 11, 14, 80)];
    const recharge = new Float64Array(nx * ny).fill(0.0005);
    const model = makeModel(grid, { conductivity: K, thickness: b, anisotropy: a, fixedHeads: [west, lake], wells, recharge });
    const r = solveModel(model, { tolerance: 1e-13 });
    expect(r.stats.converged).toBe(true);

    const fixedMap = new Map<number, number>();
    for (const f of [west, lake]) f.cells.forEach((p, k) => fixedMap.set(p, f.heads[k]!));
    const source = new Float64Array(nx * ny);
    for (let p = 0; p < nx * ny; p++) source[p] = 0.0005 * dx * dy;
    for (const w of wells) {
      const col = Math.floor((w.x - 500000) / dx),
        row = Math.floor((4100000 - w.y) / dy);
      source[row * nx + col]! += w.rate;
    }
    const reference = denseReference(nx, ny, dx, dy, K, b, a, fixedMap, source);
    let maxRel = 0;
    for (let p = 0; p < nx * ny; p++) {
      if (Number.isNaN(reference[p]!)) {
        expect(Number.isNaN(r.head[p]!)).toBe(true);
        continue;
      }
      maxRel = Math.max(maxRel, Math.abs(r.head[p]! - reference[p]!) / Math.abs(reference[p]!));
    }
    expect(maxRel).toBeLessThan(1e-8);
    expect(Math.abs(r.budget.discrepancyPercent)).toBeLessThan(0.01);
  });
});

describe('assembleSystem checks', () => {
  const grid = testGrid(6, 4, 10);
  const K = () => new Float64Array(24).fill(5);

  it('refuses a connected region with no fixed head, naming its cells and coordinates', () => {
    const k = K();
    for (let i = 0; i < 4; i++) k[i * 6 + 3] = NaN; // a wall splits the grid in two
    const model = makeModel(grid, { conductivity: k, fixedHeads: [fixedColumn(grid, 0, 10, 'west')] });
    expect(() => assembleSystem(model)).toThrowError(/no fixed head.*\n.*rows 0-3, cols 4-5 \(x 500045 to 500055/s);
  });

  it('refuses a well outside the grid, in an inactive cell or in a fixed-head cell, naming the well', () => {
    const base = { conductivity: K(), fixedHeads: [fixedColumn(grid, 0, 10, 'west')] };
    expect(() =>
      assembleSystem(makeModel(grid, { ...base, wells: [{ id: 'FAR', x: 0, y: 0, rate: -1, source: 'wells[0]' }] })),
    ).toThrowError(/well "FAR".*outside the grid/);
    const k = K();
    k[1 * 6 + 4] = NaN;
    expect(() => assembleSystem(makeModel(grid, { ...base, conductivity: k, wells: [well(grid, 'DRY', 1, 4, -1)] }))).toThrowError(
      /well "DRY".*inactive cell \(row 1, col 4\)/,
    );
    expect(() => assembleSystem(makeModel(grid, { ...base, wells: [well(grid, 'EDGE', 2, 0, -1)] }))).toThrowError(
      /well "EDGE".*fixed-head cell of "west"/,
    );
  });

  it('counts fixed-head data on inactive cells and ignores it; later entries win where they overlap', () => {
    const k = K();
    k[0] = NaN;
    const model = makeModel(grid, { conductivity: k, fixedHeads: [fixedColumn(grid, 0, 10, 'west'), fixedCells('spot', [[6, 12]])] });
    const system = assembleSystem(model);
    expect(system.counts.fixedOnInactive).toEqual([1, 0]);
    expect(system.fixedHead[6]).toBe(12);
    expect(system.groups[system.fixedGroup[6]!]).toBe('spot');
    expect(system.counts.fixed).toBe(3);
  });
});
