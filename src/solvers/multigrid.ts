import { BandedCholesky } from './banded.js';
import { applyDot, dot, gaussSeidelSweep, type Bands } from './kernels.js';
import type { VariablePreconditioner } from './pcg.js';
import type { StencilOperator } from './types.js';

/** Coarsening stops once a level has at most this many cells; that level is solved directly. */
const COARSEST_CELLS = 1024;
/** K-cycle: skip the second inner Krylov step when the first reduced the coarse residual below this fraction. */
const K_CYCLE_THRESHOLD = 0.25;

/** One level of the hierarchy: a five-point operator on a grid plus the workspaces its cycle needs. */
interface Level extends Bands {
  readonly nx: number;
  readonly ny: number;
  readonly n: number;
  readonly diag: Float64Array;
  readonly east: Float64Array;
  readonly south: Float64Array;
  readonly invDiag: Float64Array;
  /** Residual after pre-smoothing. */
  readonly res: Float64Array;
  /** Right-hand side of this level (restricted residual of the finer one); unused on level 0. */
  readonly rhs: Float64Array;
  /** K-cycle vectors (unused on level 0). */
  readonly v1: Float64Array;
  readonly w1: Float64Array;
  readonly r2: Float64Array;
  readonly v2: Float64Array;
  readonly w2: Float64Array;
}

function makeLevel(nx: number, ny: number, diag: Float64Array, east: Float64Array, south: Float64Array, fine: boolean): Level {
  const n = nx * ny;
  const invDiag = new Float64Array(n);
  for (let p = 0; p < n; p++) invDiag[p] = 1 / diag[p]!;
  const empty = new Float64Array(0);
  return {
    nx,
    ny,
    n,
    diag,
    east,
    south,
    invDiag,
    res: new Float64Array(n),
    rhs: fine ? empty : new Float64Array(n),
    v1: fine ? empty : new Float64Array(n),
    w1: fine ? empty : new Float64Array(n),
    r2: fine ? empty : new Float64Array(n),
    v2: fine ? empty : new Float64Array(n),
    w2: fine ? empty : new Float64Array(n),
  };
}

/**
 * Galerkin coarse operator P^T A P for aggregates of 2x2 cells with piecewise-constant interpolation:
 * the coarse grid is again a five-point operator whose couplings are the sums of the fine conductances
 * crossing between aggregates, and whose diagonal is the sum of the children's diagonals minus twice their
 * internal couplings (so every fixed-head and no-flow condition of the fine grid carries over exactly).
 * Only unknown children belong to an aggregate; an aggregate without unknowns is an identity row.
 */
function coarsen(fine: Level, unknown: Uint8Array): { level: Level; unknown: Uint8Array } {
  const { nx, ny, diag, east, south } = fine;
  const cx = (nx + 1) >> 1;
  const cy = (ny + 1) >> 1;
  const cn = cx * cy;
  const cd = new Float64Array(cn);
  const ce = new Float64Array(cn);
  const cs = new Float64Array(cn);
  const cu = new Uint8Array(cn);
  for (let i = 0; i < ny; i++) {
    const ci = i >> 1;
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      const c = ci * cx + (j >> 1);
      if (unknown[p]) {
        cd[c] += diag[p]!;
        cu[c] = 1;
      }
      const e = east[p]!;
      if (e !== 0) {
        if (j & 1) ce[c] += e; // crosses into the next aggregate
        else cd[c] -= 2 * e; // internal to the aggregate
      }
      const s = south[p]!;
      if (s !== 0) {
        if (i & 1) cs[c] += s;
        else cd[c] -= 2 * s;
      }
    }
  }
  for (let c = 0; c < cn; c++) if (!cu[c]) cd[c] = 1;
  return { level: makeLevel(cx, cy, cd, ce, cs, false), unknown: cu };
}

/**
 * Aggregation multigrid preconditioner on the raster: 2x2 cell aggregates, Galerkin coarse operators (five-point
 * at every level), forward Gauss–Seidel pre-smoothing and backward Gauss–Seidel post-smoothing, a banded
 * Cholesky solve on the coarsest level, and the K-cycle — two flexible-CG steps on each coarse level,
 * preconditioned by the next cycle (Notay & Vassilevski 2008, "Recursive Krylov-based multigrid cycles";
 * Notay 2010, "An aggregation-based algebraic multigrid method"). The K-cycle makes the preconditioner
 * vary slightly between applications, so the outer CG uses the flexible beta.
 */
export class AggregationMultigrid implements VariablePreconditioner {
  readonly name = 'aggregation multigrid K-cycle';
  readonly variable = true;
  readonly levels: Level[];
  private readonly direct: BandedCholesky;

  constructor(op: StencilOperator) {
    const levels: Level[] = [makeLevel(op.nx, op.ny, op.diag, op.east, op.south, true)];
    let unknown = op.unknown;
    while (levels[levels.length - 1]!.n > COARSEST_CELLS) {
      const finer = levels[levels.length - 1]!;
      if (finer.nx === 1 && finer.ny === 1) break;
      const next = coarsen(finer, unknown);
      levels.push(next.level);
      unknown = next.unknown;
    }
    this.levels = levels;
    this.direct = new BandedCholesky(levels[levels.length - 1]!);
  }

  /** Notes for the solve statistics. */
  describe(): string {
    return `${this.levels.length} levels: ${this.levels.map((l) => `${l.nx}x${l.ny}`).join(', ')}`;
  }

  apply(r: Float64Array, z: Float64Array): void {
    if (this.levels.length === 1) {
      this.direct.solve(r, z);
      return;
    }
    this.cycle(0, r, z);
  }

  /** x ~= A_l^{-1} b on level l (x is overwritten). */
  private cycle(l: number, b: Float64Array, x: Float64Array): void {
    const levels = this.levels;
    const L = levels[l]!;
    if (l === levels.length - 1) {
      this.direct.solve(b, x);
      return;
    }
    const C = levels[l + 1]!;
    forwardFromZero(L, b, x);
    upperResidual(L, x, L.res);
    restrict(L, L.res, C);
    // coarse correction into C.v1
    if (l + 1 === levels.length - 1) {
      this.direct.solve(C.rhs, C.v1);
    } else {
      this.krylovCorrection(l + 1);
    }
    prolongAdd(L, C.v1, x);
    gaussSeidelSweep(L, L.invDiag, b, x, true, 1);
  }

  /** Two flexible-CG steps on level c for A_c e = C.rhs, preconditioned by the cycle on c; e lands in C.v1. */
  private krylovCorrection(c: number): void {
    const C = this.levels[c]!;
    const { rhs, v1, w1, r2, v2, w2 } = C;
    this.cycle(c, rhs, v1);
    const rho1 = applyDot(C, v1, w1);
    const alpha1 = dot(v1, rhs);
    const step1 = alpha1 / rho1;
    const n = C.n;
    let rr2 = 0;
    let rr = 0;
    for (let i = 0; i < n; i++) {
      const v = rhs[i]! - step1 * w1[i]!;
      r2[i] = v;
      rr2 += v * v;
      rr += rhs[i]! * rhs[i]!;
    }
    if (!(rho1 > 0) || rr2 <= K_CYCLE_THRESHOLD * K_CYCLE_THRESHOLD * rr) {
      const s = rho1 > 0 ? step1 : 0;
      for (let i = 0; i < n; i++) v1[i] = s * v1[i]!;
      return;
    }
    this.cycle(c, r2, v2);
    const beta = applyDot(C, v2, w2);
    const gamma = dot(v2, w1);
    const alpha2 = dot(v2, r2);
    const rho2 = beta - (gamma * gamma) / rho1;
    if (!(rho2 > 0)) {
      for (let i = 0; i < n; i++) v1[i] = step1 * v1[i]!;
      return;
    }
    const a1 = step1 - (gamma * alpha2) / (rho1 * rho2);
    const a2 = alpha2 / rho2;
    for (let i = 0; i < n; i++) v1[i] = a1 * v1[i]! + a2 * v2[i]!;
  }
}

/** Forward Gauss–Seidel from a zero start: solves (D + L) x = b. */
function forwardFromZero(a: Level, b: Float64Array, x: Float64Array): void {
  const { nx, n, east, south, invDiag } = a;
  x[0] = b[0]! * invDiag[0]!;
  const firstEnd = Math.min(nx, n);
  for (let p = 1; p < firstEnd; p++) x[p] = (b[p]! + east[p - 1]! * x[p - 1]!) * invDiag[p]!;
  for (let p = nx; p < n; p++) {
    x[p] = (b[p]! + east[p - 1]! * x[p - 1]! + south[p - nx]! * x[p - nx]!) * invDiag[p]!;
  }
}

/** After a forward sweep from zero, b - A x = -U x: r_p = east_p x_{p+1} + south_p x_{p+nx}. */
function upperResidual(a: Level, x: Float64Array, r: Float64Array): void {
  const { nx, n, east, south } = a;
  const lastStart = Math.max(n - nx, 0);
  for (let p = 0; p < lastStart; p++) r[p] = east[p]! * x[p + 1]! + south[p]! * x[p + nx]!;
  for (let p = lastStart; p < n - 1; p++) r[p] = east[p]! * x[p + 1]!;
  r[n - 1] = 0;
}

/** Coarse right-hand side: sum of the fine residual over each aggregate (P^T r). */
function restrict(fine: Level, r: Float64Array, coarse: Level): void {
  const { nx, ny } = fine;
  const cx = coarse.nx;
  const out = coarse.rhs;
  out.fill(0);
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    const crow = (i >> 1) * cx;
    for (let j = 0; j < nx; j++) out[crow + (j >> 1)] += r[row + j]!;
  }
}

/** x += P e: every fine cell gets its aggregate's correction (identity rows are reset by the post-smoother). */
function prolongAdd(fine: Level, e: Float64Array, x: Float64Array): void {
  const { nx, ny } = fine;
  const cx = (nx + 1) >> 1;
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    const crow = (i >> 1) * cx;
    for (let j = 0; j < nx; j++) x[row + j] += e[crow + (j >> 1)]!;
  }
}
