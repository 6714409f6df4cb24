import { BandedCholesky } from './banded.js';
import { type Coefficients, type CsrMatrix, csrApplyDot, csrGaussSeidel, csrSmoothRestrict, sortRows } from './csr.js';
import { krylovTwoSteps } from './kcycle.js';
import { DenseCholesky } from './denseCholesky.js';
import { backwardSweepRow, operatorScale } from './multigrid.js';
import { NO_AGGREGATE, type SetupMatrix, galerkin, matrixRows, pairMatrix, pairPairs, pairStencil } from './pairwise.js';
import type { StencilOperator, VariablePreconditioner } from './types.js';

/** Grids of at most this many cells are solved directly (banded Cholesky), as the 2 x 2 multigrid does. */
const DIRECT_CELLS = 1024;
/** Coarsening stops once a level has at most this many rows; that level is solved by dense Cholesky. */
const COARSEST_ROWS = 400;
/** ... or once two passes of pairing no longer shrink a level (of at most DENSE_ROWS) below this fraction of its rows. */
const STALLED = 0.85;
/** Largest coarsest level factored densely (n^3 / 6 multiply-adds: 0.6e9, and 8 n^2 bytes: 18 MB); a larger one is only smoothed (SweepSolve). */
const DENSE_ROWS = 1500;

/** The five-point fine level: the operator's bands times `scale` in the levels' precision (its aggregate map is maps[0]). */
interface FineLevel {
  readonly nx: number;
  readonly ny: number;
  readonly diag: Coefficients;
  readonly east: Coefficients;
  readonly south: Coefficients;
  readonly invDiag: Coefficients;
}

/**
 * A coarse level: a sparse matrix, and the vectors its cycle needs. Vectors that the finer level reads or sums
 * into through its aggregate map have one more slot at the end, for the finer cells outside every aggregate: it
 * collects their (unused) residual and always holds a zero correction, so the transfer loops need no branch.
 */
interface CoarseLevel {
  readonly matrix: CsrMatrix;
  readonly invDiag: Coefficients;
  readonly rhsSlots: Float64Array;
  readonly rhs: Float64Array;
  readonly v1Slots: Float64Array;
  readonly v1: Float64Array;
  readonly w1: Float64Array;
  readonly r2: Float64Array;
  readonly v2: Float64Array;
  readonly w2: Float64Array;
  /** Per row, where its entries right of the diagonal start (rows sorted by column). */
  readonly upper: Int32Array;
}

function coarseLevel(a: SetupMatrix, precision: Float32ArrayConstructor | Float64ArrayConstructor): CoarseLevel {
  const n = a.n;
  const diag = new precision(a.diag);
  const invDiag = new precision(n);
  for (let i = 0; i < n; i++) invDiag[i] = 1 / a.diag[i]!;
  const upper = sortRows(a.rowStart, a.col, a.coupling);
  const matrix: CsrMatrix = {
    n,
    rowStart: a.rowStart,
    col: a.col,
    coupling: new precision(a.coupling),
    diag,
    excess: new precision(a.excess),
  };
  const rhsSlots = new Float64Array(n + 1);
  const v1Slots = new Float64Array(n + 1);
  const v = () => new Float64Array(n);
  return {
    matrix,
    invDiag,
    rhsSlots,
    rhs: rhsSlots.subarray(0, n),
    v1Slots,
    v1: v1Slots.subarray(0, n),
    w1: v(),
    r2: v(),
    v2: v(),
    w2: v(),
    upper,
  };
}

/** Replaces NO_AGGREGATE in a map by the coarse level's spare slot `slot`. */
function toSlots(agg: Int32Array, slot: number): Int32Array {
  for (let i = 0; i < agg.length; i++) if (agg[i]! < 0) agg[i] = slot;
  return agg;
}

/** map[i] <- second[map[i]] (pairs of pairs), keeping NO_AGGREGATE. */
function compose(map: Int32Array, second: Int32Array): void {
  for (let i = 0; i < map.length; i++) {
    const a = map[i]!;
    map[i] = a >= 0 ? second[a]! : NO_AGGREGATE;
  }
}

/** Stand-in for a coarsest solve where the dense factor would be too large: symmetric Gauss–Seidel sweeps from zero. */
class SweepSolve {
  static readonly SWEEPS = 4;
  constructor(private readonly level: CoarseLevel) {}

  solve(b: Float64Array, x: Float64Array): void {
    const { matrix, invDiag } = this.level;
    x.fill(0);
    for (let s = 0; s < SweepSolve.SWEEPS; s++) {
      csrGaussSeidel(matrix, invDiag, b, x, false);
      csrGaussSeidel(matrix, invDiag, b, x, true);
    }
  }
}

/**
 * Aggregation multigrid preconditioner whose aggregates follow the conductances: two passes of pairwise
 * aggregation per level (./pairwise.ts; Notay 2010, Napov & Notay 2012), piecewise-constant interpolation,
 * Galerkin coarse operators in sparse rows (./csr.ts), forward Gauss–Seidel pre-smoothing and backward
 * post-smoothing, the K-cycle (Notay & Vassilevski 2008: two flexible-CG steps on each coarse level) and a dense
 * Cholesky solve on the coarsest level. Where the conductivity changes by orders of magnitude from cell to cell,
 * fixed 2 x 2 blocks join cells that hardly exchange water and their common correction is poor; pairs are formed
 * only across strong conductances. The levels hold a power-of-two multiple of the operator in single precision
 * when its range allows (operatorScale, shared with ./multigrid.ts).
 */
export class PairwiseMultigrid implements VariablePreconditioner {
  readonly name = 'pairwise-aggregation multigrid K-cycle';
  readonly variable = true;
  private readonly fine: FineLevel;
  /** Fine cell -> level-1 row; then level l row -> level l + 1 row (spare slot for rows outside any aggregate). */
  private readonly maps: Int32Array[] = [];
  private readonly coarse: CoarseLevel[] = [];
  private readonly coarsest: DenseCholesky | SweepSolve | null = null;
  private readonly direct: BandedCholesky | null = null;
  private readonly scale: number;
  /**
   * Whether coarse level c may take the K-cycle's second step: only where the finer level has at least twice its
   * rows, so that visiting it twice per visit of the finer level keeps the work per cycle bounded by a geometric
   * sum; a level that pairing shrank less gets one step (a V-cycle there).
   */
  private readonly twoSteps: Uint8Array;
  readonly doublePrecision: boolean;

  constructor(op: StencilOperator) {
    const { scale, precision } = operatorScale(op);
    this.scale = scale;
    this.doublePrecision = precision === Float64Array;
    const { nx, ny, n } = op;
    const diag = new precision(n);
    const east = new precision(n);
    const south = new precision(n);
    const invDiag = new precision(n);
    for (let p = 0; p < n; p++) {
      // couplings are zero on identity rows, so only an unknown row's diagonal is scaled
      const d = op.unknown[p] ? op.diag[p]! * scale : op.diag[p]!;
      diag[p] = d;
      east[p] = op.east[p]! * scale;
      south[p] = op.south[p]! * scale;
      invDiag[p] = 1 / d;
    }
    this.fine = { nx, ny, diag, east, south, invDiag };
    if (n <= DIRECT_CELLS) {
      this.twoSteps = new Uint8Array(0);
      this.direct = new BandedCholesky(op);
      return;
    }
    const agg = new Int32Array(n);
    const firstPass = pairStencil(op, scale, agg);
    let next = new Int32Array(firstPass.pairs.n);
    let a = galerkin(firstPass.pairs, next, pairPairs(firstPass.base, firstPass.members, firstPass.pairs, next));
    compose(agg, next);
    const matrices: SetupMatrix[] = [a];
    const maps: Int32Array[] = [agg];
    while (a.n > COARSEST_ROWS) {
      const map = new Int32Array(a.n);
      const members = pairMatrix(a, map);
      const b = galerkin(a, map, members.first.length);
      next = new Int32Array(b.n);
      const c = galerkin(b, next, pairPairs(matrixRows(a), members, b, next));
      // no progress at all, or slow progress once the level is small enough for the dense solve
      if (c.n === a.n || (c.n > STALLED * a.n && a.n <= DENSE_ROWS)) break;
      compose(map, next);
      maps.push(map);
      matrices.push(c);
      a = c;
    }
    for (let l = 0; l < maps.length; l++) this.maps.push(toSlots(maps[l]!, matrices[l]!.n));
    for (const m of matrices) this.coarse.push(coarseLevel(m, precision));
    this.twoSteps = new Uint8Array(matrices.length);
    for (let c = 0; c < matrices.length; c++) this.twoSteps[c] = (c === 0 ? n : matrices[c - 1]!.n) >= 2 * matrices[c]!.n ? 1 : 0;
    // factored from the double-precision set-up matrix (see csrApplyDot on single-precision diagonals); a level that
    // pairing could not shrink below DENSE_ROWS gets symmetric Gauss–Seidel sweeps instead, so memory stays bounded
    const last = matrices[matrices.length - 1]!;
    this.coarsest = last.n <= DENSE_ROWS ? new DenseCholesky(last) : new SweepSolve(this.coarse[this.coarse.length - 1]!);
  }

  /** Notes for the solve statistics. */
  describe(): string {
    const precision = this.doublePrecision ? ' (double-precision levels: the conductances span too wide a range for single)' : '';
    if (this.direct) return `1 level: direct banded Cholesky`;
    const rows = [this.fine.nx * this.fine.ny, ...this.coarse.map((c) => c.matrix.n)];
    return `${rows.length} levels of ${rows.join(', ')} rows${precision}`;
  }

  apply(r: Float64Array, z: Float64Array): void {
    if (this.direct) {
      this.direct.solve(r, z);
      return;
    }
    const first = this.coarse[0]!;
    const map = this.maps[0]!;
    smoothAndRestrict(this.fine, map, r, z, first.rhsSlots);
    this.correct(0);
    prolongAndSmooth(this.fine, map, first.v1Slots, r, z);
    const scale = this.scale;
    if (scale !== 1) for (let p = 0; p < z.length; p++) z[p]! *= scale;
  }

  /** Coarse correction on coarse level c for its rhs, into its v1. */
  private correct(c: number): void {
    const C = this.coarse[c]!;
    if (c === this.coarse.length - 1) this.coarsest!.solve(C.rhs, C.v1);
    else this.krylovCorrection(c);
  }

  /** x ~= A_c^{-1} b on coarse level c (not the coarsest); x is overwritten. */
  private cycle(c: number, b: Float64Array, x: Float64Array): void {
    const L = this.coarse[c]!;
    const C = this.coarse[c + 1]!;
    const map = this.maps[c + 1]!;
    const { matrix, invDiag, upper } = L;
    csrSmoothRestrict(matrix, upper, invDiag, b, x, map, C.rhsSlots);
    this.correct(c + 1);
    const e = C.v1Slots;
    for (let i = 0; i < x.length; i++) x[i]! += e[map[i]!]!;
    csrGaussSeidel(matrix, invDiag, b, x, true);
  }

  /** Two flexible-CG steps on coarse level c for A_c e = C.rhs, preconditioned by the cycle on c; e lands in C.v1. */
  private krylovCorrection(c: number): void {
    const C = this.coarse[c]!;
    const matrix = C.matrix;
    krylovTwoSteps(
      C,
      (x, out) => csrApplyDot(matrix, x, out),
      (b, x) => this.cycle(c, b, x),
      Boolean(this.twoSteps[c]),
    );
  }
}

/**
 * Pre-smoothing fused with the restriction on the five-point fine level: one forward Gauss–Seidel sweep from a zero
 * start, (D + L) x = b, row by row; one row behind, the residual b - A x = -U x of the finished row is summed into
 * the coarse right-hand side of each cell's aggregate (as in ./multigrid.ts, with an aggregate map instead of 2 x 2).
 */
function smoothAndRestrict(a: FineLevel, map: Int32Array, b: Float64Array, x: Float64Array, coarseRhs: Float64Array): void {
  const { nx, ny, east, south, invDiag } = a;
  coarseRhs.fill(0);
  x[0] = b[0]! * invDiag[0]!;
  for (let p = 1; p < nx; p++) x[p] = (b[p]! + east[p - 1]! * x[p - 1]!) * invDiag[p]!;
  for (let i = 1; i < ny; i++) {
    const row = i * nx;
    const end = row + nx;
    // west neighbour of the first column is read through east[row - 1], which is zero (last column)
    for (let p = row; p < end; p++) {
      x[p] = (b[p]! + east[p - 1]! * x[p - 1]! + south[p - nx]! * x[p - nx]!) * invDiag[p]!;
    }
    for (let p = row - nx; p < row; p++) coarseRhs[map[p]!]! += east[p]! * x[p + 1]! + south[p]! * x[p + nx]!;
  }
  const last = (ny - 1) * nx;
  for (let p = last; p < last + nx - 1; p++) coarseRhs[map[p]!]! += east[p]! * x[p + 1]!;
}

/** Prolongation fused with one backward Gauss–Seidel sweep (bottom row first), a row ahead of the sweep. */
function prolongAndSmooth(a: FineLevel, map: Int32Array, e: Float64Array, b: Float64Array, x: Float64Array): void {
  const { nx, ny, east, south, invDiag } = a;
  const prolongRow = (i: number) => {
    const row = i * nx;
    for (let p = row; p < row + nx; p++) x[p]! += e[map[p]!]!;
  };
  prolongRow(ny - 1);
  for (let i = ny - 1; i >= 0; i--) {
    if (i > 0) prolongRow(i - 1);
    backwardSweepRow(i, nx, ny, east, south, invDiag, b, x);
  }
}
