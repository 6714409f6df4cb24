import { BandedCholesky } from './banded.js';
import { applyDot } from './kernels.js';
import { K_CYCLE_THRESHOLD, krylovTwoSteps } from './kcycle.js';
import { PARALLEL_MIN_CELLS, sharedAlloc, type Team } from './team.js';
import { fineLevelRows, type FineRows, OP, type TeamArray } from './teamKernels.js';
import type { StencilOperator, VariablePreconditioner } from './types.js';

/** Coarsening stops once a level has at most this many cells; that level is solved directly. */
const COARSEST_CELLS = 1024;

/**
 * Coefficient storage of the levels: single precision as a rule (they only shape the preconditioner; the outer CG
 * works with the exact double-precision operator), double precision when the operator's range is too wide for it.
 */
export type Coefficients = Float32Array | Float64Array;
type CoefficientArray = Float32ArrayConstructor | Float64ArrayConstructor;

/** Where the levels' arrays are allocated: ordinary memory, or shared memory when a thread team works on them. */
interface Alloc {
  f64(n: number): Float64Array;
  f32(n: number): Float32Array;
}
const ordinaryAlloc: Alloc = { f64: (n) => new Float64Array(n), f32: (n) => new Float32Array(n) };

function coefficients(alloc: Alloc, precision: CoefficientArray, n: number): Coefficients {
  return precision === Float64Array ? alloc.f64(n) : alloc.f32(n);
}

/** A copy of `from` in the given precision. */
function coefficientsFrom(alloc: Alloc, precision: CoefficientArray, from: Float64Array): Coefficients {
  const c = coefficients(alloc, precision, from.length);
  c.set(from);
  return c;
}

/** Smallest positive normal single-precision number, 2^-126 (IEEE 754 binary32). */
const FLOAT32_MIN_NORMAL = 2 ** -126;
/**
 * Widest ratio of the largest to the smallest diagonal of the unknown rows that single-precision levels carry once
 * the operator is scaled so that its largest diagonal lies in [1, 2): the smallest diagonal then stays a normal
 * number (>= 2^-126) with 2^6 to spare for rounding, and the coarse sums (at most 4 per level, over fewer than 64
 * levels) stay far below the maximum, 2^128.
 */
const FLOAT32_DIAGONAL_SPREAD = 2 ** 120;

/**
 * The power of two that brings the operator's largest unknown-row diagonal into [1, 2), and the storage its
 * levels need. Multiplying by a power of two is exact in binary floating point (IEEE 754), so the scaled
 * preconditioner is the same one, divided by the factor; without it, conductances above about 8e37 or below about
 * 1e-38 (K = 3.4e38 m/d, or a thickness of 1e-40 m) would overflow to infinity or flush to zero in single precision.
 */
export function operatorScale(op: StencilOperator): { scale: number; precision: CoefficientArray } {
  const { n, diag, unknown } = op;
  let largest = 0;
  let smallest = Infinity;
  for (let p = 0; p < n; p++) {
    if (!unknown[p]) continue;
    const d = diag[p]!;
    if (d > largest) largest = d;
    if (d < smallest) smallest = d;
  }
  if (!(largest > 0) || !Number.isFinite(largest)) return { scale: 1, precision: Float32Array };
  const exponent = Math.floor(Math.log2(largest));
  // 2 ** k is exact for every integer k in the double range; split it so that neither half under- or overflows.
  const half = Math.trunc(-exponent / 2);
  const scale = 2 ** half * 2 ** (-exponent - half);
  const precision = largest / smallest > FLOAT32_DIAGONAL_SPREAD || !(smallest * scale >= FLOAT32_MIN_NORMAL) ? Float64Array : Float32Array;
  return { scale, precision };
}

/**
 * One level of the hierarchy: a five-point operator on a grid plus the workspaces its cycle needs.
 * Coefficients in single precision as a rule (see Coefficients), vectors in double precision.
 */
interface Level {
  readonly nx: number;
  readonly ny: number;
  readonly n: number;
  readonly diag: Coefficients;
  readonly east: Coefficients;
  readonly south: Coefficients;
  readonly invDiag: Coefficients;
  /** Right-hand side of this level (restricted residual of the finer one); unused on level 0. */
  readonly rhs: Float64Array;
  /** K-cycle vectors (unused on level 0). */
  readonly v1: Float64Array;
  readonly w1: Float64Array;
  readonly r2: Float64Array;
  readonly v2: Float64Array;
  readonly w2: Float64Array;
}

/** A coarse level with its K-cycle workspaces. */
function makeLevel(alloc: Alloc, nx: number, ny: number, diag: Coefficients, east: Coefficients, south: Coefficients): Level {
  const n = nx * ny;
  const invDiag = diag instanceof Float64Array ? alloc.f64(n) : alloc.f32(n);
  for (let p = 0; p < n; p++) invDiag[p] = 1 / diag[p]!;
  const v = () => alloc.f64(n);
  return { nx, ny, n, diag, east, south, invDiag, rhs: v(), v1: v(), w1: v(), r2: v(), v2: v(), w2: v() };
}

/**
 * Galerkin coarse operator P^T A P for aggregates of 2x2 cells with piecewise-constant interpolation:
 * the coarse grid is again a five-point operator whose couplings are the sums of the fine conductances
 * crossing between aggregates. Its diagonal is built as (sum of the children's "excess" — the part of the
 * diagonal not coupled to unknown neighbours, i.e. fixed-head conductances) + (sum of the coarse couplings),
 * which equals sum(diag) - 2 sum(internal couplings) without the cancellation that formula suffers where an
 * aggregate is strongly coupled inside and weakly outside. Only unknown children belong to an aggregate; an
 * aggregate without unknowns is an identity row.
 */
function coarsen(
  alloc: Alloc,
  fine: Level,
  unknown: Uint8Array,
  excess: Float64Array,
): { level: Level; unknown: Uint8Array; excess: Float64Array } {
  const { nx, ny, east, south } = fine;
  const cx = (nx + 1) >> 1;
  const cy = (ny + 1) >> 1;
  const cn = cx * cy;
  const ce = new Float64Array(cn);
  const cs = new Float64Array(cn);
  const cExcess = new Float64Array(cn);
  const cu = new Uint8Array(cn);
  for (let i = 0; i < ny; i++) {
    const crow = (i >> 1) * cx;
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      const c = crow + (j >> 1);
      if (unknown[p]) {
        cExcess[c]! += excess[p]!;
        cu[c] = 1;
      }
      if (j & 1) ce[c]! += east[p]!; // crosses into the next aggregate (zero on the last column)
      if (i & 1) cs[c]! += south[p]!;
    }
  }
  const precision = fine.diag instanceof Float64Array ? Float64Array : Float32Array;
  return { level: coarseLevel(alloc, cx, cy, ce, cs, cExcess, cu, precision), unknown: cu, excess: cExcess };
}

/** Coarse level from summed couplings and excess: diagonal = excess + couplings (identity row without unknowns). */
function coarseLevel(
  alloc: Alloc,
  cx: number,
  cy: number,
  ce: Float64Array,
  cs: Float64Array,
  cExcess: Float64Array,
  cu: Uint8Array,
  precision: CoefficientArray,
): Level {
  const cn = cx * cy;
  const cd = coefficients(alloc, precision, cn);
  for (let c = 0; c < cn; c++) {
    if (!cu[c]) {
      cd[c] = 1;
      continue;
    }
    let d = cExcess[c]! + ce[c]! + cs[c]!;
    if (c % cx !== 0) d += ce[c - 1]!;
    if (c >= cx) d += cs[c - cx]!;
    cd[c] = d;
  }
  return makeLevel(alloc, cx, cy, cd, coefficientsFrom(alloc, precision, ce), coefficientsFrom(alloc, precision, cs));
}

/**
 * Level 0 and the first coarsening in one pass over the fine grid: copies of the bands (times `scale`, see
 * operatorScale; identity rows stay 1) and the inverse diagonal in the levels' precision, and the first coarse
 * level built from the exact double-precision operator. The "excess" of a fine cell is its diagonal minus its
 * couplings to unknown neighbours (its fixed-head conductances).
 */
function finestLevels(
  alloc: Alloc,
  team: Team | null,
  op: StencilOperator,
  scale: number,
  precision: CoefficientArray,
): { fine: Level; coarse: { level: Level; unknown: Uint8Array; excess: Float64Array } | null } {
  const { nx, ny, n, diag, east, south, unknown } = op;
  const d32 = coefficients(alloc, precision, n);
  const e32 = coefficients(alloc, precision, n);
  const s32 = coefficients(alloc, precision, n);
  const inv = coefficients(alloc, precision, n);
  const cx = (nx + 1) >> 1;
  const cy = (ny + 1) >> 1;
  const cn = cx * cy;
  const build = n > COARSEST_CELLS && !(nx === 1 && ny === 1);
  // shared with a team, whose threads fill them
  const ce = alloc.f64(build ? cn : 0);
  const cs = alloc.f64(build ? cn : 0);
  const cExcess = alloc.f64(build ? cn : 0);
  const cu = team ? sharedAlloc.u8(build ? cn : 0) : new Uint8Array(build ? cn : 0);
  const rows: FineRows = { nx, ny, diag, east, south, unknown, d32, e32, s32, inv, ce, cs, cExcess, cu };
  if (team) {
    // each thread its block of rows: a coarse row gets its sums from one block only, in the same order as here
    const id = (a: TeamArray | Uint8Array) => team.id(a);
    team.run(
      OP.fineLevel,
      [
        nx,
        ny,
        id(diag),
        id(east),
        id(south),
        id(unknown),
        id(d32),
        id(e32),
        id(s32),
        id(inv),
        build ? id(ce) : -1,
        build ? id(cs) : -1,
        build ? id(cExcess) : -1,
        build ? id(cu) : -1,
      ],
      [scale],
    );
  } else fineLevelRows(rows, scale, build, 0, ny);
  const empty = new Float64Array(0);
  const fine: Level = {
    nx,
    ny,
    n,
    diag: d32,
    east: e32,
    south: s32,
    invDiag: inv,
    rhs: empty,
    v1: empty,
    w1: empty,
    r2: empty,
    v2: empty,
    w2: empty,
  };
  if (!build) return { fine, coarse: null };
  return { fine, coarse: { level: coarseLevel(alloc, cx, cy, ce, cs, cExcess, cu, precision), unknown: cu, excess: cExcess } };
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
  /** The levels hold `scale` times the operator (a power of two); apply() multiplies the result back by it. */
  private readonly scale: number;
  /** Double-precision levels, for an operator whose range single precision cannot carry (see operatorScale). */
  readonly doublePrecision: boolean;

  /** The thread team sharing the cycle's work on big levels, or null (one thread). */
  private readonly team: Team | null;
  /** Per level: the team's ids of its arrays, or null where thread 0 runs the level alone. */
  private readonly shares: Array<LevelShare | null>;

  /**
   * With a `team` the levels live in shared memory, and every level of at least `parallelMinCells` cells is worked on
   * by the whole team (block-hybrid Gauss–Seidel: see ./teamKernels.ts); smaller levels by thread 0 alone.
   */
  constructor(op: StencilOperator, team: Team | null = null, parallelMinCells = PARALLEL_MIN_CELLS) {
    const { scale, precision } = operatorScale(op);
    this.scale = scale;
    this.doublePrecision = precision === Float64Array;
    this.team = team;
    const alloc = team ? sharedAlloc : ordinaryAlloc;
    const first = finestLevels(alloc, team, op, scale, precision);
    const levels: Level[] = [first.fine];
    if (first.coarse) {
      levels.push(first.coarse.level);
      let { unknown, excess } = first.coarse;
      for (;;) {
        const finer = levels[levels.length - 1]!;
        if (finer.n <= COARSEST_CELLS || (finer.nx === 1 && finer.ny === 1)) break;
        const next = coarsen(alloc, finer, unknown, excess);
        levels.push(next.level);
        unknown = next.unknown;
        excess = next.excess;
      }
    }
    this.levels = levels;
    this.direct = new BandedCholesky(levels.length === 1 ? op : levels[levels.length - 1]!);
    // the coarsest level is solved directly, by thread 0
    this.shares = levels.map((L, l) => (team && l < levels.length - 1 && L.n >= parallelMinCells ? shareLevel(team, L) : null));
  }

  /** Threads working on each level (for the notes): the team's size on shared levels, 1 on the others. */
  threadsPerLevel(): number[] {
    return this.shares.map((s) => (s && this.team ? this.team.size : 1));
  }

  /** Notes for the solve statistics. */
  describe(): string {
    const precision = this.doublePrecision ? ' (double-precision levels: the conductances span too wide a range for single)' : '';
    return `${this.levels.length} levels: ${this.levels.map((l) => `${l.nx}x${l.ny}`).join(', ')}${precision}`;
  }

  apply(r: Float64Array, z: Float64Array): void {
    if (this.levels.length === 1) {
      this.direct.solve(r, z);
      return;
    }
    if (this.shares[0]) {
      // the scaling is done by each thread on its block right after its last sweep
      this.cycle(0, r, z, this.scale, -1);
      return;
    }
    this.cycle(0, r, z);
    // (scale A)^-1 = A^-1 * scale
    const scale = this.scale;
    if (scale !== 1) for (let p = 0; p < z.length; p++) z[p]! *= scale;
  }

  /**
   * z = M^{-1} r, and with a team on the finest level also the sums z·r and z·q, left in the team's partial sums 0
   * and 1 (`team.sum(k)`). Returns false, computing no sums, where the finest level is not shared.
   */
  applyWithDots(r: Float64Array, z: Float64Array, q: Float64Array): boolean {
    if (!this.shares[0] || !this.team || this.levels.length === 1) {
      this.apply(r, z);
      return false;
    }
    this.cycle(0, r, z, this.scale, this.team.id(q));
    return true;
  }

  /**
   * x ~= A_l^{-1} b on level l (x is overwritten). On a shared level, the last sweep scales x by `scale` and, with
   * `dotWith` >= 0 (a team id), leaves x·b and x·(that array) in the team's partial sums.
   */
  private cycle(l: number, b: Float64Array, x: Float64Array, scale = 1, dotWith = -1): void {
    const levels = this.levels;
    const L = levels[l]!;
    if (l === levels.length - 1) {
      this.direct.solve(b, x);
      return;
    }
    const C = levels[l + 1]!;
    const share = this.shares[l];
    if (share && this.team) {
      const team = this.team;
      const grid = [L.nx, L.ny, share.diag, share.east, share.south, share.invDiag];
      team.run(OP.smoothRestrict, [...grid, team.id(b), team.id(x), team.id(C.rhs)]);
      if (l + 1 === levels.length - 1) this.direct.solve(C.rhs, C.v1);
      else this.krylovCorrection(l + 1);
      team.run(OP.prolongSmooth, [...grid, team.id(C.v1), team.id(b), team.id(x), share.halo, dotWith], [scale]);
      return;
    }
    smoothAndRestrict(L, b, x, C.rhs);
    // coarse correction into C.v1
    if (l + 1 === levels.length - 1) {
      this.direct.solve(C.rhs, C.v1);
    } else {
      this.krylovCorrection(l + 1);
    }
    prolongAndSmooth(L, C.v1, b, x);
  }

  /** Two flexible-CG steps on level c for A_c e = C.rhs, preconditioned by the cycle on c; e lands in C.v1. */
  private krylovCorrection(c: number): void {
    if (this.shares[c]) {
      this.teamKrylovCorrection(c);
      return;
    }
    const C = this.levels[c]!;
    krylovTwoSteps(
      C,
      (x, out) => applyDot(C, x, out),
      (b, x) => this.cycle(c, b, x),
    );
  }

  /** krylovCorrection with every vector operation shared by the team (same steps, sums added in thread order). */
  private teamKrylovCorrection(c: number): void {
    const team = this.team!;
    const C = this.levels[c]!;
    const share = this.shares[c]!;
    const { rhs, v1, v2 } = C;
    const { nx, ny } = C;
    const [iRhs, iV1, iW1, iR2, iV2, iW2] = [team.id(rhs), team.id(v1), team.id(C.w1), team.id(C.r2), team.id(v2), team.id(C.w2)];
    const none = -1;
    this.cycle(c, rhs, v1);
    // w1 = A v1 and r2 = rhs - step1 w1 in one kernel (the threads add up the sums between the two themselves)
    team.run(OP.krylovFirst, [nx, ny, share.diag, share.east, share.south, iV1, iW1, iRhs, iR2]);
    const rho1 = team.sum(0);
    const step1 = team.sum(1) / rho1;
    const rr2 = team.sum(2);
    const rr = team.sum(3);
    if (!(rho1 > 0) || rr2 <= K_CYCLE_THRESHOLD * K_CYCLE_THRESHOLD * rr) {
      team.run(OP.combine, [nx, ny, iV1, none], [rho1 > 0 ? step1 : 0]);
      return;
    }
    this.cycle(c, C.r2, v2);
    // w2 = A v2 and the combination of v1 and v2 in one kernel
    team.run(OP.krylovSecond, [nx, ny, share.diag, share.east, share.south, iV2, iW2, iW1, iR2, iV1], [rho1, step1]);
  }
}

/** The team's ids of a level's arrays, and the halo rows its prolongation–smoothing kernel needs. */
interface LevelShare {
  diag: number;
  east: number;
  south: number;
  invDiag: number;
  halo: number;
}

function shareLevel(team: Team, L: Level): LevelShare {
  return {
    diag: team.id(L.diag),
    east: team.id(L.east),
    south: team.id(L.south),
    invDiag: team.id(L.invDiag),
    // two rows per thread: the rows just north and south of its block, prolonged, as they were before the sweep
    halo: team.id(sharedAlloc.f64(2 * team.size * L.nx)),
  };
}

/**
 * Pre-smoothing fused with the restriction: one forward Gauss–Seidel sweep from a zero start, (D + L) x = b,
 * row by row; one row behind, the residual b - A x = -U x of the finished row (east and south neighbours are
 * final by then) is summed straight into the coarse right-hand side, so no residual vector is stored.
 */
function smoothAndRestrict(a: Level, b: Float64Array, x: Float64Array, coarseRhs: Float64Array): void {
  const { nx, ny, east, south, invDiag } = a;
  const cx = (nx + 1) >> 1;
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
    // residual of row i - 1: its east neighbours and south neighbours (row i) are final
    const prev = row - nx;
    const crow = ((i - 1) >> 1) * cx;
    for (let j = 0; j < nx; j++) {
      const p = prev + j;
      coarseRhs[crow + (j >> 1)]! += east[p]! * x[p + 1]! + south[p]! * x[p + nx]!;
    }
  }
  // last row: only east neighbours
  const last = (ny - 1) * nx;
  const crow = ((ny - 1) >> 1) * cx;
  for (let j = 0; j < nx - 1; j++) {
    const p = last + j;
    coarseRhs[crow + (j >> 1)]! += east[p]! * x[p + 1]!;
  }
}

/**
 * Prolongation fused with post-smoothing: x += P e row by row just ahead of one backward Gauss–Seidel sweep
 * (bottom row first), so each row is touched while it is in cache. Identity rows come out exact (x = b / 1).
 */
function prolongAndSmooth(a: Level, e: Float64Array, b: Float64Array, x: Float64Array): void {
  const { nx, ny, east, south, invDiag } = a;
  const cx = (nx + 1) >> 1;
  prolongRow(nx, cx, ny - 1, e, x);
  for (let i = ny - 1; i >= 0; i--) {
    if (i > 0) prolongRow(nx, cx, i - 1, e, x);
    backwardSweepRow(i, nx, ny, east, south, invDiag, b, x);
  }
}

/**
 * Row i of a backward Gauss–Seidel sweep on a five-point level (right to left): each cell from b and its neighbours
 * as they are now (the row below already swept, the row above not yet). Shared by both multigrids' post-smoothing.
 */
export function backwardSweepRow(
  i: number,
  nx: number,
  ny: number,
  east: Coefficients,
  south: Coefficients,
  invDiag: Coefficients,
  b: Float64Array,
  x: Float64Array,
): void {
  const n = nx * ny;
  const row = i * nx;
  if (i > 0 && i < ny - 1) {
    for (let p = row + nx - 1; p >= row; p--) {
      x[p] = (b[p]! + east[p - 1]! * x[p - 1]! + east[p]! * x[p + 1]! + south[p - nx]! * x[p - nx]! + south[p]! * x[p + nx]!) * invDiag[p]!;
    }
  } else {
    for (let p = row + nx - 1; p >= row; p--) {
      let s = b[p]!;
      if (p > 0) s += east[p - 1]! * x[p - 1]!;
      if (p + 1 < n) s += east[p]! * x[p + 1]!;
      if (p >= nx) s += south[p - nx]! * x[p - nx]!;
      if (p + nx < n) s += south[p]! * x[p + nx]!;
      x[p] = s * invDiag[p]!;
    }
  }
}

/** x += P e on row i: every cell gets its aggregate's correction. */
function prolongRow(nx: number, cx: number, i: number, e: Float64Array, x: Float64Array): void {
  const row = i * nx;
  const crow = (i >> 1) * cx;
  for (let j = 0; j < nx; j++) x[row + j]! += e[crow + (j >> 1)]!;
}
