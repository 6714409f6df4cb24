import { describe, expect, it } from 'vitest';
import { waterBudget } from '../../src/analysis/budget.js';
import { darcyFlux, faceFlows, linearVelocity } from '../../src/analysis/flux.js';
import { assembleSystem } from '../../src/discretisation/assemble.js';
import type { ModelInput } from '../../src/scenario/types.js';
import { cellCentre, type Grid } from '../../src/grid.js';

/** An invented north-up grid (made-up coordinates). */
function makeGrid(nx: number, ny: number, dx: number, dy: number): Grid {
  return { nx, ny, transform: [200000, dx, 0, 600000, 0, -dy], crs: null };
}

/**
 * Conductances as the discretisation contract defines them (harmonic mean of transmissivities,
 * C = dy/dx * 2 Tp Tq / (Tp + Tq) east-west, dx/dy * ... north-south; zero where a cell is inactive).
 */
function conductances(grid: Grid, tx: Float64Array, ty: Float64Array): { east: Float64Array; south: Float64Array } {
  const { nx, ny } = grid;
  const dx = grid.transform[1];
  const dy = -grid.transform[5];
  const east = new Float64Array(nx * ny);
  const south = new Float64Array(nx * ny);
  const harmonic = (a: number, b: number) => (a > 0 && b > 0 ? (2 * a * b) / (a + b) : 0);
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      if (j < nx - 1) east[p] = (dy / dx) * harmonic(tx[p]!, tx[p + 1]!);
      if (i < ny - 1) south[p] = (dx / dy) * harmonic(ty[p]!, ty[p + nx]!);
    }
  }
  return { east, south };
}

describe('darcyFlux', () => {
  it("equals Darcy's law q = -K grad h for a uniform gradient (Darcy 1856), with anisotropy Ky = a Kx", () => {
    const grid = makeGrid(14, 9, 25, 40);
    const K = 3; // m/d
    const b = 12; // m
    const anisotropy = 0.4;
    const gx = 0.002; // head falls eastwards
    const gy = -0.001; // head rises northwards, so flow runs south
    const n = grid.nx * grid.ny;
    const head = new Float64Array(n);
    for (let i = 0; i < grid.ny; i++) {
      for (let j = 0; j < grid.nx; j++) {
        const c = cellCentre(grid, i, j);
        head[i * grid.nx + j] = 80 - gx * (c.x - 200000) - gy * (c.y - 600000);
      }
    }
    const tx = new Float64Array(n).fill(K * b);
    const ty = new Float64Array(n).fill(anisotropy * K * b);
    const { east, south } = conductances(grid, tx, ty);
    const flux = darcyFlux({ grid, head, eastConductance: east, southConductance: south, thickness: b });
    for (let i = 1; i < grid.ny - 1; i++) {
      for (let j = 1; j < grid.nx - 1; j++) {
        const p = i * grid.nx + j;
        expect(flux.qx[p]).toBeCloseTo(K * gx, 12); // q = -K dh/dx, dh/dx = -gx
        expect(flux.qy[p]).toBeCloseTo(anisotropy * K * gy, 12); // north-positive: gy < 0 gives southward flow
        expect(flux.magnitude[p]).toBeCloseTo(Math.hypot(K * gx, anisotropy * K * gy), 12);
      }
    }
    // Against a closed raster edge the cell-centre value is the mean of the open face and the no-flow face.
    expect(flux.qx[3 * grid.nx]).toBeCloseTo((K * gx) / 2, 12);
    expect(flux.qy[3]).toBeCloseTo((anisotropy * K * gy) / 2, 12);
  });

  it('matches the series (harmonic) conductivity of two zones, q = dh / (L1/K1 + L2/K2) (Freeze & Cherry 1979, layered formations; from memory)', () => {
    // 1-D flow through two zones in series between the centres of the first and last column.
    const nx = 20;
    const grid = makeGrid(nx, 1, 10, 10);
    const b = 5;
    const K1 = 8;
    const K2 = 0.5;
    const t = new Float64Array(nx);
    for (let j = 0; j < nx; j++) t[j] = (j < 10 ? K1 : K2) * b;
    const { east, south } = conductances(grid, t, t);
    // Heads of the steady discrete solution: the same flow Q through every face, h_{j+1} = h_j - Q / C_j.
    const h0 = 30;
    const h1 = 20;
    let resistance = 0;
    for (let j = 0; j < nx - 1; j++) resistance += 1 / east[j]!;
    const Q = (h0 - h1) / resistance;
    const head = new Float64Array(nx);
    head[0] = h0;
    for (let j = 0; j < nx - 1; j++) head[j + 1] = head[j]! - Q / east[j]!;
    expect(head[nx - 1]).toBeCloseTo(h1, 10);
    const flux = darcyFlux({ grid, head, eastConductance: east, southConductance: south, thickness: b });
    // Centre of column 0 to the zone interface: 9.5 cells; interface to the centre of column 19: 9.5 cells.
    const L1 = 9.5 * 10;
    const L2 = 9.5 * 10;
    const expected = (h0 - h1) / (L1 / K1 + L2 / K2);
    for (let j = 1; j < nx - 1; j++) expect(flux.qx[j]).toBeCloseTo(expected, 10);
    for (let j = 0; j < nx; j++) expect(flux.qy[j]).toBe(0);
  });

  it('uses each cell thickness as the face height', () => {
    const grid = makeGrid(5, 1, 10, 10);
    const head = Float64Array.from([10, 9, 8, 7, 6]);
    const east = Float64Array.from([4, 4, 4, 4, 0]);
    const south = new Float64Array(5);
    const thickness = Float64Array.from([2, 4, 8, 4, 2]);
    const flux = darcyFlux({ grid, head, eastConductance: east, southConductance: south, thickness });
    // Q = 4 * 1 = 4 m3/d through every interior face; q = Q / (b * dy).
    expect(Array.from(flux.qx.subarray(1, 4))).toEqual([4 / 40, 4 / 80, 4 / 40]);
  });

  it('gives NaN on inactive cells and keeps their NaN head out of active neighbours', () => {
    const grid = makeGrid(3, 3, 1, 1);
    const head = Float64Array.from([3, 2, 1, 3, NaN, 1, 3, 2, 1]);
    const east = Float64Array.from([1, 1, 0, 0, 0, 0, 1, 1, 0]);
    const south = Float64Array.from([1, 0, 1, 1, 0, 1, 0, 0, 0]);
    const flux = darcyFlux({ grid, head, eastConductance: east, southConductance: south, thickness: 1 });
    expect(flux.qx[4]).toBeNaN();
    for (const p of [0, 1, 2, 3, 5, 6, 7, 8]) expect(Number.isFinite(flux.qx[p]!)).toBe(true);
    expect(flux.qx[1]).toBeCloseTo(1, 12);
    expect(flux.qx[3]).toBe(0); // both east-west faces of cell 3 are closed
  });

  it('flips signs for a grid whose rows run north (positive pixel height)', () => {
    const grid: Grid = { nx: 1, ny: 3, transform: [0, 1, 0, 0, 0, 1], crs: null };
    const head = Float64Array.from([3, 2, 1]); // head falls with the row index, i.e. northwards here
    const south = Float64Array.from([1, 1, 0]);
    const flux = darcyFlux({ grid, head, eastConductance: new Float64Array(3), southConductance: south, thickness: 1 });
    expect(flux.qy[1]).toBeCloseTo(1, 12);
  });
});

describe('faceFlows', () => {
  it('sums to the cell balance terms of the discretisation contract (net outflow = sum C (h_p - h_q))', () => {
    const grid = makeGrid(6, 5, 1, 1);
    const n = 30;
    let seed = 7;
    const random = () => {
      seed = (seed * 16807) % 2147483647;
      return seed / 2147483647;
    };
    const head = new Float64Array(n).map(() => 10 * random());
    const east = new Float64Array(n).map((_, p) => ((p + 1) % 6 === 0 ? 0 : random()));
    const south = new Float64Array(n).map((_, p) => (p >= 24 ? 0 : random()));
    const flows = faceFlows(grid, head, east, south);
    for (let i = 0; i < 5; i++) {
      for (let j = 0; j < 6; j++) {
        const p = i * 6 + j;
        let direct = 0;
        if (j < 5) direct += east[p]! * (head[p]! - head[p + 1]!);
        if (j > 0) direct += east[p - 1]! * (head[p]! - head[p - 1]!);
        if (i < 4) direct += south[p]! * (head[p]! - head[p + 6]!);
        if (i > 0) direct += south[p - 6]! * (head[p]! - head[p - 6]!);
        const net = flows.east[p]! - (j > 0 ? flows.east[p - 1]! : 0) + flows.south[p]! - (i > 0 ? flows.south[p - 6]! : 0);
        expect(net).toBeCloseTo(direct, 12);
      }
    }
  });
});

describe('linearVelocity', () => {
  const grid = makeGrid(3, 1, 1, 1);
  const flux = {
    qx: Float64Array.from([0.3, 0.6, NaN]),
    qy: Float64Array.from([0, 0.2, NaN]),
    magnitude: Float64Array.from([0.3, Math.hypot(0.6, 0.2), NaN]),
  };

  it('divides the Darcy flux by the effective porosity, v = q / n_e (Freeze & Cherry 1979; from memory)', () => {
    const v = linearVelocity(grid, flux, 0.25);
    expect(v.vx[0]).toBeCloseTo(1.2, 12);
    expect(v.vy[1]).toBeCloseTo(0.8, 12);
    expect(v.speed[2]).toBeNaN();
    const perCell = linearVelocity(grid, flux, Float64Array.from([0.1, NaN, 0.3]));
    expect(perCell.vx[0]).toBeCloseTo(3, 12);
    expect(perCell.vx[1]).toBeNaN();
  });

  it('rejects a porosity outside (0, 1] with an input error naming the key', () => {
    expect(() => linearVelocity(grid, flux, 0)).toThrowError(
      expect.objectContaining({ code: 'input', detail: expect.objectContaining({ key: 'porosity' }) }),
    );
    expect(() => linearVelocity(grid, flux, 25)).toThrow(/porosity must lie in \(0, 1\]/);
    expect(() => linearVelocity(grid, flux, Float64Array.from([0.2, 1.5, 0.2]))).toThrow(/row 0, column 1/);
  });
});

describe('darcyFlux with the assembled system', () => {
  it('carries the same flow as the water budget of the fixed-head boundaries', () => {
    // Layers parallel to the flow (K by row) between a fixed head of 100 on the west column and 90 on the east
    // column: the linear head along each row is the exact steady solution (no cross flow), Q_row = K b dy dh / L.
    const nx = 16;
    const ny = 4;
    const grid = makeGrid(nx, ny, 50, 20);
    const conductivity = new Float64Array(nx * ny);
    const head = new Float64Array(nx * ny);
    const kByRow = [2, 5, 0.5, 9];
    const west: number[] = [];
    const east: number[] = [];
    for (let i = 0; i < ny; i++) {
      for (let j = 0; j < nx; j++) {
        conductivity[i * nx + j] = kByRow[i]!;
        head[i * nx + j] = 100 - (10 * j) / (nx - 1);
      }
      west.push(i * nx);
      east.push(i * nx + nx - 1);
    }
    const model: ModelInput = {
      title: 'invented layered strip',
      units: { length: 'm', time: 'd' },
      scenarioPath: '<inline>',
      grid,
      conductivity,
      thickness: 8,
      anisotropy: 1,
      fixedHeads: [
        { name: 'west', source: 'fixedHeads[0]', cells: Int32Array.from(west), heads: new Float64Array(ny).fill(100) },
        { name: 'east', source: 'fixedHeads[1]', cells: Int32Array.from(east), heads: new Float64Array(ny).fill(90) },
      ],
      recharge: 0,
      wells: [],
      observations: [],
      solver: { method: 'auto', tolerance: 1e-10, maxIterations: 100 },
      inputFiles: [],
      warnings: [],
    };
    const system = assembleSystem(model);
    const budget = waterBudget(system, head);
    const westTerm = budget.terms.find((t) => t.term === 'west')!;
    const flux = darcyFlux({
      grid,
      head,
      eastConductance: system.conductanceEast,
      southConductance: system.conductanceSouth,
      thickness: 8,
    });
    const darcy = kByRow.reduce((sum, k) => sum + k * 8 * 20 * (10 / ((nx - 1) * 50)), 0);
    expect(westTerm.inflow).toBeCloseTo(darcy, 9);
    for (let j = 1; j < nx - 1; j++) {
      let through = 0;
      for (let i = 0; i < ny; i++) through += flux.qx[i * nx + j]! * 8 * 20; // q * face area
      expect(through).toBeCloseTo(westTerm.inflow, 9);
    }
  });
});
