/**
 * Head-dependent boundaries (river, drain, linear) and areal leakage (../shared/spec/physics.md) against published
 * solutions, exact discrete solutions derived here, and an independent dense direct solve. Each check names its
 * source.
 */
import { describe, expect, it } from 'vitest';
import { Matrix, solve as denseSolve } from 'ml-matrix';
import { solveModel } from '../../src/pipeline.js';
import { assembleSystem } from '../../src/discretisation/assemble.js';
import type { HeadDependentInput, ModelInput } from '../../src/scenario/types.js';
import { fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';
import { besselK0 } from '../helpers/bessel.js';
import type { Grid } from '../../src/grid.js';
import { PiezomapError } from '../../src/errors.js';

function column(grid: Grid, col: number): Int32Array {
  return Int32Array.from({ length: grid.ny }, (_, i) => i * grid.nx + col);
}

function entry(
  name: string,
  kind: HeadDependentInput['kind'],
  cells: Int32Array,
  head: number,
  conductance: number,
  bottom?: number,
): HeadDependentInput {
  return {
    name,
    kind,
    source: `headDependent(${name})`,
    cells,
    heads: new Float64Array(cells.length).fill(head),
    conductance: new Float64Array(cells.length).fill(conductance),
    bottom: bottom === undefined ? null : new Float64Array(cells.length).fill(bottom),
    reach: null,
    reachNames: [],
  };
}

function term(result: ReturnType<typeof solveModel>, name: string) {
  return result.budget.terms.find((t) => t.term === name)!;
}

describe('Bessel K0 (test helper)', () => {
  it('matches tabulated values (Abramowitz & Stegun 1964, table 9.8, from memory) and the integral K0(x) = ∫0^∞ exp(-x cosh t) dt (A&S 9.6.24)', () => {
    // [x, K0(x), half a unit of the last digit given]: the approximation's own error is below 2e-7 relative.
    const table: Array<[number, number, number]> = [
      [0.1, 2.427069, 5e-8],
      [0.5, 0.9244191, 5e-8],
      [1, 0.4210244, 5e-8],
      [2, 0.1138939, 5e-8],
      [5, 0.0036911, 5e-8],
      [10, 1.778006e-5, 5e-13],
    ];
    for (const [x, k0, rounding] of table) expect(Math.abs(besselK0(x) - k0)).toBeLessThan(rounding + 2e-7 * k0);
    for (const x of [0.03, 0.3, 1.5, 2.5, 4]) {
      // Trapezoid rule on t in [0, 12], h = 1e-3: the integrand is smooth and decays doubly exponentially.
      let sum = 0;
      const h = 1e-3;
      for (let k = 0; k <= 12000; k++) sum += (k === 0 || k === 12000 ? 0.5 : 1) * Math.exp(-x * Math.cosh(k * h));
      expect(Math.abs(besselK0(x) - sum * h) / (sum * h)).toBeLessThan(3e-7);
    }
  });
});

describe('areal leakage', () => {
  /**
   * Exact steady drawdown of the infinite five-point lattice with leakage, a unit sink at the origin, unit
   * conductance between neighbours and leakage conductance lambda per cell: the lattice Green's function
   *   s(i, j) = (1/pi) ∫0^pi cos(i k) z(k)^|j| / sqrt(a^2 - 4) dk,  a = 4 - 2 cos k + lambda,  z = (a - sqrt(a^2 - 4)) / 2,
   * from the double Fourier integral by the residue of the inner one (standard for lattice Green's functions,
   * e.g. Economou 2006, "Green's Functions in Quantum Physics", ch. 5; from memory). Simpson's rule, 4000 panels.
   */
  function latticeDrawdown(i: number, j: number, lambda: number): number {
    const panels = 4000;
    const h = Math.PI / panels;
    let sum = 0;
    for (let k = 0; k <= panels; k++) {
      const kx = k * h;
      const a = 4 - 2 * Math.cos(kx) + lambda;
      const root = Math.sqrt(a * a - 4);
      const z = (a - root) / 2;
      const f = (Math.cos(i * kx) * z ** Math.abs(j)) / root;
      sum += (k === 0 || k === panels ? 1 : k % 2 === 1 ? 4 : 2) * f;
    }
    return (sum * h) / 3 / Math.PI;
  }

  it('gives the Hantush & Jacob (1955) steady drawdown s = Q/(2 pi T) K0(r/B), B = sqrt(T/L), around a well in a leaky aquifer', () => {
    // 161 x 161 cells of 10 m, T = 100 m²/d, L = 0.01 /d: B = 100 m = 10 cells. No fixed head at all: the
    // leakage anchors the level (physics.md). Edges are 80 cells = 8 B away: their image wells add K0(>= 8) <~ 1e-4 of s.
    const half = 80,
      n = 2 * half + 1,
      dx = 10,
      K = 10,
      b = 10,
      L = 0.01,
      Q = 1000,
      Hs = 50;
    const T = K * b;
    const B = Math.sqrt(T / L);
    const grid = testGrid(n, n, dx);
    const model = makeModel(grid, {
      conductivity: new Float64Array(n * n).fill(K),
      thickness: b,
      leakage: { name: 'leakage', sourceHead: Hs, leakance: L },
      wells: [well(grid, 'P', half, half, -Q)],
    });
    const r = solveModel(model);
    expect(r.stats.converged).toBe(true);
    const lambda = (L * dx * dx) / T;
    const points: Array<[number, number]> = [
      [0, 3],
      [0, 5],
      [0, 10],
      [0, 20],
      [0, 40],
      [3, 3],
      [7, 7],
      [20, 20],
      [12, 5],
    ];
    for (const [di, dj] of points) {
      const rCells = Math.hypot(di, dj);
      const s = Hs - r.head[(half + di) * n + half + dj]!;
      // The exact discrete solution (lattice Green's function times Q/T): only the solver tolerance and the no-flow
      // edges separate the solve from it. An edge acts as an image well: at 40 cells east of the well the nearest
      // image is 121 cells away, K0(12.1)/K0(4.0) = 1.8e-4 of s (the largest here); 3e-4 allows for it.
      const exact = (Q / T) * latticeDrawdown(di, dj, lambda);
      expect(Math.abs(s - exact) / exact).toBeLessThan(3e-4);
      // Hantush & Jacob (1955). The lattice differs from the continuum by the five-point stencil's O((dx/r)^2)
      // error near the well (1/(24 pi (r/dx)^2) in units of Q/T for the Laplacian's lattice Green's function,
      // 0.7 % of s at 3 cells) and by the lattice's decay rate acosh(1 + lambda/2) vs sqrt(lambda) (0.3 % of s at
      // 40 cells): 1.5 % covers both, and is checked on the exact discrete solution itself (largest: 0.76 % at 3 cells).
      const hj = (Q / (2 * Math.PI * T)) * besselK0((rCells * dx) / B);
      expect(Math.abs(exact - hj) / hj).toBeLessThan(0.015);
      expect(Math.abs(s - hj) / hj).toBeLessThan(0.015);
    }
    // Steady state: every unit pumped comes through the confining bed (the budget).
    expect(term(r, 'leakage').inflow - term(r, 'leakage').outflow).toBeCloseTo(Q, 6);
  });
});

describe('a river along one edge', () => {
  // 40 x 3 cells of 20 m, T = 200 m²/d; river cells in column 0 with bed conductance C per cell, a fixed head in
  // the last column. No flow north and south, so every row is the same 1-D problem.
  const nx = 40,
    ny = 3,
    dx = 20,
    K = 20,
    b = 10,
    T = K * b,
    C = 50,
    stage = 30;
  const grid = testGrid(nx, ny, dx);
  const run = (eastHead: number, bottom?: number, c = C) =>
    solveModel(
      makeModel(grid, {
        conductivity: new Float64Array(nx * ny).fill(K),
        thickness: b,
        fixedHeads: [fixedColumn(grid, nx - 1, eastHead, 'east')],
        headDependent: [entry('river', 'river', column(grid, 0), stage, c, bottom)],
      }),
    );

  it('passes the flow of a 1-D aquifer lengthened by T/C\' per unit of bank (bed resistance as extra aquifer length, e.g. Bear 1979, "Hydraulics of Groundwater", semipervious boundaries; from memory)', () => {
    // Derivation: per row, the bed passes Q = C (H - h0) and the aquifer between the river cell centre and the
    // fixed cell centre (length Lx = (nx - 1) dx, width dy) passes Q = T dy (h0 - hE) / Lx. Eliminating h0:
    //   Q = T dy (H - hE) / (Lx + T dy / C) = T dy (H - hE) / (Lx + T / C'),  C' = C / dy (conductance per unit bank).
    // The textbook form q = T (H - hE) / (Lx + dL) with the extra length dL = T / C'.
    const hE = 20;
    const r = run(hE);
    const Lx = (nx - 1) * dx;
    const dL = T / (C / dx);
    const q = (T * (stage - hE)) / (Lx + dL);
    expect(r.outer.stopReason).toBe('linear');
    expect(term(r, 'river').inflow).toBeCloseTo(q * ny * dx, 6);
    // The head under the river: H - Q/C per cell.
    const h0 = stage - (q * dx) / C;
    for (let i = 0; i < ny; i++) expect(r.head[i * nx]!).toBeCloseTo(h0, 8);
    expect(Math.abs(r.budget.discrepancyPercent)).toBeLessThan(1e-8);
  });

  it('switches to the constant loss C (H - B) once the head falls below the bed bottom (physics.md), with a linear head beyond it', () => {
    const bottom = 25;
    // High east head: the river stays connected, the same flow as without a bottom.
    const connected = run(24, bottom);
    const Lx = (nx - 1) * dx;
    const q = (T * (stage - 24)) / (Lx + T / (C / dx));
    expect(connected.head[0]! > bottom).toBe(true);
    expect(term(connected, 'river').inflow).toBeCloseTo(q * ny * dx, 6);
    // A weaker bed (C = 5) and a low east head: the loss is capped at C (H - B) = 25 m³/d per cell, and the head
    // under the river is h0 = hE + C (H - B) Lx / (T dy) = 4.875 m, below the bed bottom.
    const weak = 5;
    const rate = weak * (stage - bottom);
    const hE = 0;
    const h0 = hE + (rate * Lx) / (T * dx);
    expect(h0).toBeLessThan(bottom); // the case really is below the bed
    const disconnected = run(hE, bottom, weak);
    expect(disconnected.outer.stopReason).toBe('settled');
    expect(disconnected.outer.iterations).toBeGreaterThan(1);
    expect(term(disconnected, 'river').inflow).toBeCloseTo(rate * ny, 6);
    for (let j = 0; j < nx; j++) expect(disconnected.head[j]!).toBeCloseTo(h0 - ((h0 - hE) * j) / (nx - 1), 7);
    expect(disconnected.warnings.some((w) => /bed bottom and lose water at the fixed rate/.test(w))).toBe(true);
  });
});

describe('drains', () => {
  // 30 x 2 cells of 10 m, T = 50 m²/d, fixed head 20 m in column 0, a drain (level E, conductance C) in the last column.
  const nx = 30,
    ny = 2,
    dx = 10,
    K = 5,
    b = 10,
    T = K * b,
    C = 40;
  const grid = testGrid(nx, ny, dx);
  const run = (level: number, recharge = 0) =>
    solveModel(
      makeModel(grid, {
        conductivity: new Float64Array(nx * ny).fill(K),
        thickness: b,
        recharge,
        fixedHeads: [fixedColumn(grid, 0, 20, 'west')],
        headDependent: [entry('ditch', 'drain', column(grid, nx - 1), level, C)],
      }),
    );

  it('stays on below the regional head and passes the flow of the lengthened aquifer (as for the river above)', () => {
    const r = run(15);
    const q = (T * (20 - 15)) / ((nx - 1) * dx + T / (C / dx));
    expect(term(r, 'ditch').outflow).toBeCloseTo(q * ny * dx, 6);
    expect(term(r, 'ditch').inflow).toBe(0);
    // The budget term equals the per-cell sum C (E - h) over the drain cells (physics.md, budget rule).
    let sum = 0;
    for (let i = 0; i < ny; i++) sum += C * (15 - r.head[i * nx + nx - 1]!);
    expect(-term(r, 'ditch').outflow).toBeCloseTo(sum, 8);
  });

  it('switches off when the head falls below its level: no flow, the head is the fixed head everywhere', () => {
    const r = run(25);
    expect(r.outer.stopReason).toBe('settled');
    expect(term(r, 'ditch').outflow).toBe(0);
    expect(term(r, 'ditch').inflow).toBe(0);
    for (let p = 0; p < nx * ny; p++) expect(r.head[p]!).toBeCloseTo(20, 8);
    expect(r.warnings.some((w) => /2 of 2 cell\(s\) of drain "ditch" are dry/.test(w))).toBe(true);
  });

  it('reports a region held only by drains that all run dry (no steady state), never solving a singular system', () => {
    // No fixed head: the drains are the only anchors; pumping lowers the head below every drain level.
    const model = makeModel(grid, {
      conductivity: new Float64Array(nx * ny).fill(K),
      thickness: b,
      headDependent: [entry('ditch', 'drain', column(grid, nx - 1), 15, C)],
      wells: [well(grid, 'P', 0, 5, -500)],
    });
    let thrown: unknown;
    try {
      solveModel(model);
    } catch (error) {
      thrown = error;
    }
    expect(thrown).toBeInstanceOf(PiezomapError);
    expect((thrown as PiezomapError).code).toBe('input');
    expect((thrown as PiezomapError).message).toMatch(/no fixed head/);
    expect((thrown as PiezomapError).detail.hint).toMatch(/drains .* switched off/);
  });
});

describe('every kind together', () => {
  // 14 x 11 cells, heterogeneous K, a fixed head, a river with a bed bottom (some cells below it), a drain (some
  // cells dry), a linear exchange, leakage, recharge and wells.
  const nx = 14,
    ny = 11,
    dx = 50,
    dy = 40;
  const grid = testGrid(nx, ny, dx, dy);
  const K = new Float64Array(nx * ny);
  for (let p = 0; p < K.length; p++) K[p] = 5 + 20 * (0.5 + 0.5 * Math.sin(p * 1.7));
  K[5 * nx + 7] = NaN;
  const b = 12;
  const river = entry(
    'river',
    'river',
    Int32Array.from({ length: ny }, (_, i) => i * nx + 3),
    0,
    60,
    0,
  );
  for (let k = 0; k < river.cells.length; k++) {
    river.heads[k] = 31 - 0.4 * k;
    river.bottom![k] = 29.5 - 0.4 * k;
  }
  const ditch = entry(
    'ditch',
    'drain',
    Int32Array.from({ length: 8 }, (_, j) => 9 * nx + 4 + j),
    27.5,
    30,
  );
  const far = entry('far-field', 'linear', column(grid, nx - 1), 26, 15);
  const base = (wells: ModelInput['wells']) =>
    makeModel(grid, {
      conductivity: K,
      thickness: b,
      recharge: 0.0004,
      fixedHeads: [fixedColumn(grid, 0, 30, 'west')],
      headDependent: [river, ditch, far],
      leakage: { name: 'upper', sourceHead: 29, leakance: 2e-4 },
      wells,
    });

  it('closes the budget below 0.01 % (physics.md: each term summed cell by cell)', () => {
    const r = solveModel(base([well(grid, 'A', 4, 8, -900), well(grid, 'B', 8, 2, -300)]));
    expect(r.stats.converged).toBe(true);
    expect(r.outer.stopReason).toBe('settled');
    expect(r.budget.terms.map((t) => t.term)).toEqual(['west', 'river', 'ditch', 'far-field', 'upper', 'wells', 'recharge']);
    expect(Math.abs(r.budget.discrepancyPercent)).toBeLessThan(0.01);
    // The case exercises both branches of the river and the drain.
    const riverHeads = Array.from(river.cells, (p) => r.head[p]!);
    expect(riverHeads.some((h, k) => h <= river.bottom![k]!)).toBe(true);
    expect(riverHeads.some((h, k) => h > river.bottom![k]!)).toBe(true);
    const ditchHeads = Array.from(ditch.cells, (p) => r.head[p]!);
    expect(ditchHeads.some((h) => h <= 27.5)).toBe(true);
    expect(ditchHeads.some((h) => h > 27.5)).toBe(true);
  });

  it('agrees with a dense direct solve (ml-matrix) of the spec formulas, switch states iterated independently', () => {
    const wells = [well(grid, 'A', 4, 8, -900), well(grid, 'B', 8, 2, -300)];
    const model = base(wells);
    const r = solveModel(model);
    const reference = denseWithSwitches(model);
    let worst = 0;
    for (let p = 0; p < nx * ny; p++) if (Number.isFinite(reference[p]!)) worst = Math.max(worst, Math.abs(r.head[p]! - reference[p]!));
    expect(worst).toBeLessThan(1e-7);
  });

  it('keeps superposition for linear terms: the drawdowns of two wells add (linear river, linear exchange, leakage)', () => {
    const linearOnly = (wells: ModelInput['wells']) => ({ ...base(wells), headDependent: [{ ...river, bottom: null }, far] });
    const h0 = solveModel(linearOnly([])).head;
    const hA = solveModel(linearOnly([well(grid, 'A', 4, 8, -900)])).head;
    const hB = solveModel(linearOnly([well(grid, 'B', 8, 2, -300)])).head;
    const hAB = solveModel(linearOnly([well(grid, 'A', 4, 8, -900), well(grid, 'B', 8, 2, -300)])).head;
    let worst = 0;
    for (let p = 0; p < nx * ny; p++) {
      if (!Number.isFinite(h0[p]!)) continue;
      worst = Math.max(worst, Math.abs(h0[p]! - hAB[p]! - (h0[p]! - hA[p]! + h0[p]! - hB[p]!)));
    }
    expect(worst).toBeLessThan(1e-8);
  });

  it('refuses a cell both fixed-head and head-dependent, naming both entries', () => {
    const model = { ...base([]), headDependent: [entry('bank', 'linear', Int32Array.of(2 * nx), 30, 5)] };
    expect(() => assembleSystem(model)).toThrowError(/"bank".*"west".*row 2, col 0/);
  });
});

/**
 * An independent reference: the spec's discrete equations assembled densely (harmonic-mean conductances, Dirichlet
 * elimination, each boundary per physics.md), solved with ml-matrix, with the switch states of rivers and drains
 * iterated until they repeat (all cells start connected).
 */
function denseWithSwitches(model: ModelInput): Float64Array {
  const { nx, ny } = model.grid;
  const dx = model.grid.transform[1];
  const dy = -model.grid.transform[5];
  const n = nx * ny;
  const b = model.thickness as number;
  const K = model.conductivity;
  const active = (p: number) => K[p]! > 0 && Number.isFinite(K[p]!);
  const fixed = new Map<number, number>();
  for (const g of model.fixedHeads) g.cells.forEach((p, k) => fixed.set(p, g.heads[k]!));
  const unknowns: number[] = [];
  const index = new Map<number, number>();
  for (let p = 0; p < n; p++)
    if (active(p) && !fixed.has(p)) {
      index.set(p, unknowns.length);
      unknowns.push(p);
    }
  const entries = model.headDependent ?? [];
  const on = entries.map((e) => new Uint8Array(e.cells.length).fill(1));
  const harmonic = (u: number, v: number) => (2 * u * v) / (u + v);
  let head = new Float64Array(n).fill(NaN);
  for (let iteration = 0; iteration < 30; iteration++) {
    const m = unknowns.length;
    const A = Matrix.zeros(m, m);
    const rhs = Matrix.zeros(m, 1);
    unknowns.forEach((p, r) => {
      const i = Math.floor(p / nx),
        j = p % nx;
      const neighbours: Array<[number, number]> = [];
      if (j > 0) neighbours.push([p - 1, (dy / dx) * harmonic(K[p]! * b, K[p - 1]! * b)]);
      if (j < nx - 1) neighbours.push([p + 1, (dy / dx) * harmonic(K[p]! * b, K[p + 1]! * b)]);
      if (i > 0) neighbours.push([p - nx, (dx / dy) * harmonic(K[p]! * b, K[p - nx]! * b)]);
      if (i < ny - 1) neighbours.push([p + nx, (dx / dy) * harmonic(K[p]! * b, K[p + nx]! * b)]);
      let value = (model.recharge as number) * dx * dy;
      for (const w of model.wells) {
        const col = Math.floor((w.x - model.grid.transform[0]) / dx);
        const row = Math.floor((model.grid.transform[3] - w.y) / dy);
        if (row * nx + col === p) value += w.rate;
      }
      for (const [q, c] of neighbours) {
        if (!active(q)) continue;
        A.set(r, r, A.get(r, r) + c);
        if (fixed.has(q)) value += c * fixed.get(q)!;
        else A.set(r, index.get(q)!, -c);
      }
      if (model.leakage) {
        const c = (model.leakage.leakance as number) * dx * dy;
        A.set(r, r, A.get(r, r) + c);
        value += c * (model.leakage.sourceHead as number);
      }
      entries.forEach((e, g) => {
        const k = e.cells.indexOf(p);
        if (k < 0) return;
        const c = e.conductance[k]!;
        if (on[g]![k]) {
          A.set(r, r, A.get(r, r) + c);
          value += c * e.heads[k]!;
        } else if (e.kind === 'river') {
          value += c * (e.heads[k]! - e.bottom![k]!);
        }
      });
      rhs.set(r, 0, value);
    });
    const x = denseSolve(A, rhs);
    head = new Float64Array(n).fill(NaN);
    for (const [p, h] of fixed) head[p] = h;
    unknowns.forEach((p, r) => (head[p] = x.get(r, 0)));
    let changes = 0;
    entries.forEach((e, g) => {
      const floor = e.kind === 'drain' ? e.heads : e.kind === 'river' && e.bottom ? e.bottom : null;
      if (!floor) return;
      e.cells.forEach((p, k) => {
        const s = head[p]! > floor[k]! ? 1 : 0;
        if (s !== on[g]![k]) changes++;
        on[g]![k] = s;
      });
    });
    if (changes === 0) return head;
  }
  throw new Error('dense reference: switch states did not settle');
}
