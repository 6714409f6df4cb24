/**
 * Test systems built directly from the discretisation spec (../shared/spec/discretisation.md), independent of
 * src/discretisation: harmonic-mean conductances, anisotropy on the north-south transmissivity, inactive cells
 * and fixed-head cells as identity rows with their couplings moved to the right-hand side.
 */
import { Matrix, solve } from 'ml-matrix';
import { GridOperator } from '../../src/solvers/operator.js';
import { seededUniform } from '../../src/random.js';

export interface TestCase {
  nx: number;
  ny: number;
  dx: number;
  dy: number;
  /** Conductivity per cell; NaN or <= 0 = inactive. */
  k: Float64Array;
  thickness: number;
  /** Ky / Kx */
  anisotropy: number;
  /** Prescribed head per cell, NaN = not fixed. */
  fixedHead: Float64Array;
  /** Source per cell (well rates, recharge volumes), L^3/T. */
  source: Float64Array;
}

export interface TestSystem {
  op: GridOperator;
  b: Float64Array;
}

/** Deterministic uniform numbers in [0, 1). */
export const random = seededUniform;

export function buildSystem(c: TestCase): TestSystem {
  const { nx, ny, dx, dy } = c;
  const n = nx * ny;
  const active = (p: number) => c.k[p]! > 0;
  const fixed = (p: number) => active(p) && !Number.isNaN(c.fixedHead[p]!);
  const unknown = new Uint8Array(n);
  for (let p = 0; p < n; p++) unknown[p] = active(p) && !fixed(p) ? 1 : 0;
  const diag = new Float64Array(n);
  const east = new Float64Array(n);
  const south = new Float64Array(n);
  const b = new Float64Array(n);
  const harmonic = (ratio: number, tp: number, tq: number) => (ratio * 2 * tp * tq) / (tp + tq);
  const couple = (p: number, q: number, conductance: number, band: Float64Array) => {
    if (unknown[p] && unknown[q]) band[p] = conductance;
    if (unknown[p]) diag[p]! += conductance;
    if (unknown[q]) diag[q]! += conductance;
    if (unknown[p] && fixed(q)) b[p]! += conductance * c.fixedHead[q]!;
    if (unknown[q] && fixed(p)) b[q]! += conductance * c.fixedHead[p]!;
  };
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      if (!active(p)) continue;
      const tp = c.k[p]! * c.thickness;
      if (j + 1 < nx && active(p + 1)) couple(p, p + 1, harmonic(dy / dx, tp, c.k[p + 1]! * c.thickness), east);
      if (i + 1 < ny && active(p + nx)) {
        couple(p, p + nx, harmonic(dx / dy, c.anisotropy * tp, c.anisotropy * c.k[p + nx]! * c.thickness), south);
      }
    }
  }
  for (let p = 0; p < n; p++) {
    if (unknown[p]) b[p]! += c.source[p]!;
    else diag[p] = 1;
  }
  return { op: new GridOperator(nx, ny, diag, east, south, unknown), b };
}

/** Dense copy of the operator, for the ml-matrix reference. */
export function denseMatrix(op: GridOperator): Matrix {
  const n = op.n;
  const m = Matrix.zeros(n, n);
  const e = new Float64Array(n);
  const col = new Float64Array(n);
  for (let q = 0; q < n; q++) {
    e.fill(0);
    e[q] = 1;
    op.apply(e, col);
    for (let p = 0; p < n; p++) if (col[p] !== 0) m.set(p, q, col[p]!);
  }
  return m;
}

/** Direct reference solution with ml-matrix (LU), a general-purpose linear-algebra library. */
export function denseSolve(op: GridOperator, b: Float64Array): Float64Array {
  const x = solve(denseMatrix(op), Matrix.columnVector(Array.from(b)));
  return Float64Array.from(x.getColumn(0));
}

/**
 * A hard small case: log-normal K spanning 1e-3..1e3 (contrast 1e6), anisotropy 10, non-square cells,
 * inactive holes, fixed heads on the west and east edges, a few wells.
 */
export function heterogeneousCase(nx: number, ny: number, seed: number): TestCase {
  const rnd = random(seed);
  const n = nx * ny;
  const k = new Float64Array(n);
  const fixedHead = new Float64Array(n).fill(NaN);
  const source = new Float64Array(n);
  // blocky field so that contrasts meet along long interfaces, values 10^-3..10^3
  const block = 3;
  const bx = Math.ceil(nx / block);
  const logs = Array.from({ length: bx * Math.ceil(ny / block) }, () => -3 + 6 * rnd());
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      k[p] = Math.pow(10, logs[Math.floor(i / block) * bx + Math.floor(j / block)]!);
    }
  }
  k[0] = 1e-3;
  k[1] = 1e3;
  // inactive holes: a rectangle and scattered cells (never on the fixed-head columns)
  const hi = Math.floor(ny / 3);
  const hj = Math.floor(nx / 3);
  for (let i = hi; i < hi + Math.max(1, Math.floor(ny / 5)); i++)
    for (let j = hj; j < hj + Math.max(1, Math.floor(nx / 6)); j++) k[i * nx + j] = NaN;
  for (let s = 0; s < n / 20; s++) {
    const j = 1 + Math.floor(rnd() * (nx - 2));
    const i = Math.floor(rnd() * ny);
    k[i * nx + j] = -1;
  }
  for (let i = 0; i < ny; i++) {
    fixedHead[i * nx] = 100;
    fixedHead[i * nx + nx - 1] = 90;
    k[i * nx] = Math.max(k[i * nx]! > 0 ? k[i * nx]! : 1, 1e-3);
    k[i * nx + nx - 1] = Math.max(k[i * nx + nx - 1]! > 0 ? k[i * nx + nx - 1]! : 1, 1e-3);
  }
  for (let w = 0; w < 4; w++) {
    const p = Math.floor(ny / 2 + (w - 2)) * nx + Math.floor(nx / 2) + w;
    if (k[p]! > 0) source[p]! -= 50;
  }
  return { nx, ny, dx: 10, dy: 25, k, thickness: 20, anisotropy: 10, fixedHead, source };
}

/**
 * A spatially correlated field: log10 K = z clipped to [-3, 3] (contrast up to 1e6), z Gaussian-filtered white
 * noise with correlation length `sigma` cells scaled to standard deviation 1.5; inactive holes where a second
 * field is high; fixed heads on the west and east columns; anisotropy 10 and 10 x 25 m cells.
 */
export function correlatedCase(nx: number, ny: number, seed: number, sigma = 4): TestCase {
  const z = smoothNoise(nx, ny, sigma, seed);
  const holes = smoothNoise(nx, ny, sigma, seed + 1);
  const n = nx * ny;
  const k = new Float64Array(n);
  const fixedHead = new Float64Array(n).fill(NaN);
  const source = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    k[p] = Math.pow(10, Math.min(3, Math.max(-3, 1.5 * z[p]!)));
    if (holes[p]! > 1.8 && p % nx > 1 && p % nx < nx - 2) k[p] = NaN;
  }
  for (let i = 0; i < ny; i++) {
    fixedHead[i * nx] = 100;
    fixedHead[i * nx + nx - 1] = 90;
  }
  const p = Math.floor(ny / 2) * nx + Math.floor(nx / 2);
  if (k[p]! > 0) source[p] = -500;
  return { nx, ny, dx: 10, dy: 25, k, thickness: 20, anisotropy: 10, fixedHead, source };
}

/** Gaussian white noise filtered by a Gaussian of `sigma` cells (edges clamped), scaled to unit variance. */
function smoothNoise(nx: number, ny: number, sigma: number, seed: number): Float64Array {
  const rnd = random(seed);
  const n = nx * ny;
  const a = new Float64Array(n);
  for (let p = 0; p < n; p++) a[p] = Math.sqrt(-2 * Math.log(1 - rnd())) * Math.cos(2 * Math.PI * rnd());
  const r = Math.ceil(3 * sigma);
  const w = Array.from({ length: 2 * r + 1 }, (_, k) => Math.exp(-((k - r) ** 2) / (2 * sigma * sigma)));
  const t = new Float64Array(n);
  for (let i = 0; i < ny; i++)
    for (let j = 0; j < nx; j++) {
      let s = 0;
      for (let k = -r; k <= r; k++) s += w[k + r]! * a[i * nx + Math.min(nx - 1, Math.max(0, j + k))]!;
      t[i * nx + j] = s;
    }
  for (let i = 0; i < ny; i++)
    for (let j = 0; j < nx; j++) {
      let s = 0;
      for (let k = -r; k <= r; k++) s += w[k + r]! * t[Math.min(ny - 1, Math.max(0, i + k)) * nx + j]!;
      a[i * nx + j] = s;
    }
  let mean = 0;
  for (let p = 0; p < n; p++) mean += a[p]!;
  mean /= n;
  let v = 0;
  for (let p = 0; p < n; p++) v += (a[p]! - mean) ** 2;
  const sd = Math.sqrt(v / n);
  for (let p = 0; p < n; p++) a[p] = (a[p]! - mean) / sd;
  return a;
}

/**
 * Any shape, thin strips included: K = 10^u, u uniform in [-1, 1] per cell (contrast up to 1e2), no holes,
 * fixed heads 100 and 90 m at the two ends of the longer side, one well in the middle.
 */
export function stripCase(nx: number, ny: number, seed: number): TestCase {
  const rnd = random(seed);
  const n = nx * ny;
  const k = new Float64Array(n);
  for (let p = 0; p < n; p++) k[p] = Math.pow(10, -1 + 2 * rnd());
  const fixedHead = new Float64Array(n).fill(NaN);
  const source = new Float64Array(n);
  if (nx >= ny) {
    for (let i = 0; i < ny; i++) {
      fixedHead[i * nx] = 100;
      fixedHead[i * nx + nx - 1] = 90;
    }
  } else {
    for (let j = 0; j < nx; j++) {
      fixedHead[j] = 100;
      fixedHead[(ny - 1) * nx + j] = 90;
    }
  }
  source[Math.floor(ny / 2) * nx + Math.floor(nx / 2)] = -5;
  return { nx, ny, dx: 10, dy: 25, k, thickness: 20, anisotropy: 10, fixedHead, source };
}

/** Model Poisson problem: n x n unknowns with zero Dirichlet edges (a ring of fixed cells), unit conductances. */
export function poissonCase(n: number): TestCase {
  const nx = n + 2;
  const k = new Float64Array(nx * nx).fill(1);
  const fixedHead = new Float64Array(nx * nx).fill(NaN);
  const source = new Float64Array(nx * nx);
  for (let i = 0; i < nx; i++) {
    for (let j = 0; j < nx; j++) {
      if (i === 0 || j === 0 || i === nx - 1 || j === nx - 1) fixedHead[i * nx + j] = 0;
      else source[i * nx + j] = 1;
    }
  }
  return { nx, ny: nx, dx: 1, dy: 1, k, thickness: 1, anisotropy: 1, fixedHead, source };
}

export function maxRelativeError(x: Float64Array, ref: Float64Array): number {
  let scale = 0;
  for (let i = 0; i < ref.length; i++) scale = Math.max(scale, Math.abs(ref[i]!));
  let err = 0;
  for (let i = 0; i < ref.length; i++) err = Math.max(err, Math.abs(x[i]! - ref[i]!));
  return err / scale;
}
