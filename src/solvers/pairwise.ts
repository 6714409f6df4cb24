/**
 * Set-up of the pairwise-aggregation hierarchy: which cells form an aggregate, and the Galerkin coarse operators.
 *
 * Pairwise aggregation (Notay 2010, "An aggregation-based algebraic multigrid method", ETNA 37; Napov & Notay 2012,
 * "An algebraic multigrid method with guaranteed convergence rate", SIAM J. Sci. Comput. 34): each unknown in turn
 * (in the order of the rows) is paired with the unpaired neighbour that gives the pair the best quality, if that
 * quality is below a threshold; otherwise it stays alone. Two passes (pairs of pairs) give aggregates of up to four
 * cells. Unlike fixed 2 x 2 blocks of the raster, a pair is only formed across a strong conductance relative to the
 * cells' other conductances, so cells that a thin low-conductivity wall separates never share a correction.
 *
 * The quality of a pair {i, j} is the constant of the two-grid bound for that aggregate with a diagonal smoother
 * (Napov & Notay 2012, section 3): with d the diagonals, c = -a_ij the coupling and e the "excess" of each row (its
 * diagonal minus all its couplings, i.e. its conductance to fixed heads; >= 0 for the operators here), the local
 * matrix [[e_i + c, -c], [-c, e_j + c]] against diag(d_i, d_j) gives (our derivation of their 2 x 2 case)
 *     mu({i, j}) = H(d_i, d_j) / (c + H(e_i, e_j)),   H(x, y) = x y / (x + y),
 * which is 1 for a pair that nothing else couples to, 2 on the constant-coefficient five-point Laplacian, and
 * large when c is small beside the cells' other conductances. Rows whose diagonal outweighs their couplings
 * DOMINANT times are left out of every aggregate (Notay 2010, section 3: the smoother alone solves them well);
 * identity rows are such rows.
 *
 * Every array here is Float64 and lives only during the set-up; the hierarchy keeps its own copies (./pairwiseMultigrid.ts).
 */
import type { StencilOperator } from './types.js';

/** A pair is formed only when its quality mu is below this. */
export const PAIR_QUALITY = 4;
/** An aggregate of pairs is formed only when its quality (aggregateQualityBelow) is below this. */
export const AGGREGATE_QUALITY = 4;
/** Rows with diagonal >= DOMINANT x (sum of couplings) stay out of the aggregates. */
const DOMINANT = 5;
/** Not aggregated (in the set-up maps; the hierarchy maps it to a dummy coarse slot). */
export const NO_AGGREGATE = -1;
const UNPAIRED = -2;

/** A symmetric M-matrix in double precision during the set-up, with each row's excess (diagonal minus couplings). */
export interface SetupMatrix {
  n: number;
  rowStart: Int32Array;
  col: Int32Array;
  coupling: Float64Array;
  diag: Float64Array;
  excess: Float64Array;
}

function half(x: number, y: number): number {
  const s = x + y;
  return s > 0 ? (x * y) / s : 0;
}

/** Quality of the pair {i, j} (see the module comment); Infinity without a coupling. */
export function pairQuality(di: number, dj: number, ei: number, ej: number, c: number): number {
  const denominator = c + half(ei, ej);
  return denominator > 0 ? half(di, dj) / denominator : Infinity;
}

/**
 * First pass on the fine five-point operator (times `scale`, a power of two): pairs of raster cells, and the
 * Galerkin operator of the pairs. `agg[p]` receives the pair of cell p or NO_AGGREGATE.
 */
export function pairStencil(op: StencilOperator, scale: number, agg: Int32Array): { pairs: SetupMatrix; members: Members; base: BaseRows } {
  const { nx, ny, n, diag, east, south, unknown } = op;
  const excess = new Float64Array(n);
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      if (!unknown[p]) {
        agg[p] = NO_AGGREGATE;
        continue;
      }
      let s = east[p]! + south[p]!;
      if (j > 0) s += east[p - 1]!;
      if (i > 0) s += south[p - nx]!;
      const d = diag[p]!;
      excess[p] = Math.max(0, d - s) * scale;
      agg[p] = d >= DOMINANT * s ? NO_AGGREGATE : UNPAIRED;
    }
  }
  // members of each pair: first[I] (the lower cell), second[I] (or -1)
  const first = new Int32Array(n);
  const second = new Int32Array(n);
  let nc = 0;
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      if (agg[p] !== UNPAIRED) continue;
      const dp = diag[p]! * scale;
      const ep = excess[p]!;
      let best = -1;
      let bestMu = PAIR_QUALITY;
      // the four neighbours; a coupling is zero across the raster's edges and towards identity rows
      if (j > 0 && agg[p - 1] === UNPAIRED) {
        const mu = pairQuality(dp, diag[p - 1]! * scale, ep, excess[p - 1]!, east[p - 1]! * scale);
        if (mu < bestMu) {
          bestMu = mu;
          best = p - 1;
        }
      }
      if (j + 1 < nx && agg[p + 1] === UNPAIRED) {
        const mu = pairQuality(dp, diag[p + 1]! * scale, ep, excess[p + 1]!, east[p]! * scale);
        if (mu < bestMu) {
          bestMu = mu;
          best = p + 1;
        }
      }
      if (i > 0 && agg[p - nx] === UNPAIRED) {
        const mu = pairQuality(dp, diag[p - nx]! * scale, ep, excess[p - nx]!, south[p - nx]! * scale);
        if (mu < bestMu) {
          bestMu = mu;
          best = p - nx;
        }
      }
      if (i + 1 < ny && agg[p + nx] === UNPAIRED) {
        const mu = pairQuality(dp, diag[p + nx]! * scale, ep, excess[p + nx]!, south[p]! * scale);
        if (mu < bestMu) {
          bestMu = mu;
          best = p + nx;
        }
      }
      agg[p] = nc;
      first[nc] = p;
      second[nc] = best;
      if (best >= 0) agg[best] = nc;
      nc++;
    }
  }
  // Galerkin operator of the pairs: couplings between pairs are sums of the fine couplings crossing between them;
  // the excess of a pair is its members' excess plus their couplings to cells outside every aggregate.
  const rowStart = new Int32Array(nc + 1);
  const col = new Int32Array(6 * nc);
  const coupling = new Float64Array(6 * nc);
  const cDiag = new Float64Array(nc);
  const cExcess = new Float64Array(nc);
  const marker = new Int32Array(nc).fill(-1);
  let nnz = 0;
  const add = (rowBegin: number, I: number, q: number, c: number): void => {
    if (c === 0) return;
    const J = agg[q]!;
    if (J === I) return;
    if (J < 0) {
      cExcess[I]! += c;
      return;
    }
    const at = marker[J]!;
    if (at < rowBegin) {
      marker[J] = nnz;
      col[nnz] = J;
      coupling[nnz] = c;
      nnz++;
    } else coupling[at]! += c;
  };
  for (let I = 0; I < nc; I++) {
    const rowBegin = nnz;
    rowStart[I] = nnz;
    for (let m = 0; m < 2; m++) {
      const p = m === 0 ? first[I]! : second[I]!;
      if (p < 0) continue;
      cExcess[I]! += excess[p]!;
      const j = p % nx;
      if (j > 0) add(rowBegin, I, p - 1, east[p - 1]! * scale);
      if (j + 1 < nx) add(rowBegin, I, p + 1, east[p]! * scale);
      if (p >= nx) add(rowBegin, I, p - nx, south[p - nx]! * scale);
      if (p + nx < n) add(rowBegin, I, p + nx, south[p]! * scale);
    }
    let d = cExcess[I]!;
    for (let k = rowBegin; k < nnz; k++) d += coupling[k]!;
    cDiag[I] = d;
  }
  rowStart[nc] = nnz;
  const pairs: SetupMatrix = { n: nc, rowStart, col: col.slice(0, nnz), coupling: coupling.slice(0, nnz), diag: cDiag, excess: cExcess };
  const base: BaseRows = {
    diag: (p) => diag[p]! * scale,
    excess: (p) => excess[p]!,
    coupling: (p, q) => {
      const lo = p < q ? p : q;
      const gap = p < q ? q - p : p - q;
      if (gap === 1) return east[lo]! * scale;
      if (gap === nx) return south[lo]! * scale;
      return 0;
    },
  };
  return { pairs, members: { first: first.slice(0, nc), second: second.slice(0, nc) }, base };
}

/** The members of each pair: first[I] and second[I] (-1 for a pair of one). */
export interface Members {
  first: Int32Array;
  second: Int32Array;
}

/** Read access to the rows a pass of pairing works on: diagonal, excess, and the coupling of two rows. */
export interface BaseRows {
  diag(i: number): number;
  excess(i: number): number;
  coupling(i: number, k: number): number;
}

/** BaseRows of a set-up matrix. */
export function matrixRows(a: SetupMatrix): BaseRows {
  const { rowStart, col, coupling, diag, excess } = a;
  return {
    diag: (i) => diag[i]!,
    excess: (i) => excess[i]!,
    coupling: (i, k) => {
      for (let m = rowStart[i]!; m < rowStart[i + 1]!; m++) if (col[m] === k) return coupling[m]!;
      return 0;
    },
  };
}

/**
 * A pass of pairwise aggregation on a set-up matrix: `agg[i]` receives the pair of row i; returns the pairs'
 * members (their count is the length).
 */
export function pairMatrix(a: SetupMatrix, agg: Int32Array): Members {
  const { n, rowStart, col, coupling, diag, excess } = a;
  for (let i = 0; i < n; i++) {
    const d = diag[i]!;
    agg[i] = d >= DOMINANT * (d - excess[i]!) ? NO_AGGREGATE : UNPAIRED;
  }
  const first = new Int32Array(n);
  const second = new Int32Array(n);
  let nc = 0;
  for (let i = 0; i < n; i++) {
    if (agg[i] !== UNPAIRED) continue;
    const di = diag[i]!;
    const ei = excess[i]!;
    let best = -1;
    let bestMu = PAIR_QUALITY;
    const end = rowStart[i + 1]!;
    for (let k = rowStart[i]!; k < end; k++) {
      const j = col[k]!;
      if (agg[j] !== UNPAIRED) continue;
      const mu = pairQuality(di, diag[j]!, ei, excess[j]!, coupling[k]!);
      if (mu < bestMu) {
        bestMu = mu;
        best = j;
      }
    }
    agg[i] = nc;
    first[nc] = i;
    second[nc] = best;
    if (best >= 0) agg[best] = nc;
    nc++;
  }
  return { first: first.slice(0, nc), second: second.slice(0, nc) };
}

/** Galerkin operator P^T A P of piecewise-constant interpolation on the aggregates `agg` (nc of them). */
export function galerkin(a: SetupMatrix, agg: Int32Array, nc: number): SetupMatrix {
  const { n, rowStart, col, coupling, excess } = a;
  // members of each aggregate, by counting sort
  const start = new Int32Array(nc + 1);
  for (let i = 0; i < n; i++) {
    const I = agg[i]!;
    if (I >= 0) start[I + 1]!++;
  }
  for (let I = 0; I < nc; I++) start[I + 1]! += start[I]!;
  const fill = start.slice(0, nc);
  const members = new Int32Array(start[nc]!);
  for (let i = 0; i < n; i++) {
    const I = agg[i]!;
    if (I >= 0) members[fill[I]!++] = i;
  }
  const cRowStart = new Int32Array(nc + 1);
  const cCol = new Int32Array(col.length);
  const cCoupling = new Float64Array(col.length);
  const cDiag = new Float64Array(nc);
  const cExcess = new Float64Array(nc);
  const marker = new Int32Array(nc).fill(-1);
  let nnz = 0;
  for (let I = 0; I < nc; I++) {
    const rowBegin = nnz;
    cRowStart[I] = nnz;
    let e = 0;
    for (let m = start[I]!; m < start[I + 1]!; m++) {
      const i = members[m]!;
      e += excess[i]!;
      const end = rowStart[i + 1]!;
      for (let k = rowStart[i]!; k < end; k++) {
        const J = agg[col[k]!]!;
        if (J === I) continue;
        const c = coupling[k]!;
        if (J < 0) {
          e += c;
          continue;
        }
        const at = marker[J]!;
        if (at < rowBegin) {
          marker[J] = nnz;
          cCol[nnz] = J;
          cCoupling[nnz] = c;
          nnz++;
        } else cCoupling[at]! += c;
      }
    }
    cExcess[I] = e;
    let d = e;
    for (let k = rowBegin; k < nnz; k++) d += cCoupling[k]!;
    cDiag[I] = d;
  }
  cRowStart[nc] = nnz;
  return { n: nc, rowStart: cRowStart, col: cCol.slice(0, nnz), coupling: cCoupling.slice(0, nnz), diag: cDiag, excess: cExcess };
}

/** Scratch of the aggregate quality test (at most 4 rows); set-up only. */
const scratch = {
  d: new Float64Array(4),
  e: new Float64Array(4),
  c: new Float64Array(16),
  b: new Float64Array(16),
  u: new Float64Array(4),
  bu: new Float64Array(4),
  rows: new Int32Array(4),
};

/**
 * Whether the aggregate of `m` rows (at most 4) in scratch.rows has quality mu(G) < kappa, where mu(G) is the
 * largest eigenvalue of  D_G (I - 1 (1^T D_G 1)^-1 1^T D_G) v = mu A_G v  (Napov & Notay 2012, eq. 3.3 with a
 * diagonal smoother): A_G the aggregate's rows with its outside couplings removed (diagonal = excess + inside
 * couplings), D_G their diagonals. With B = D^-1/2 A_G D^-1/2 and u = D^1/2 1 / |D^1/2 1|, 1/mu(G) is the least
 * eigenvalue of the Schur complement S = B - B u u^T B / (u^T B u) on the complement of u (S u = 0); so mu(G) < kappa
 * exactly when S + (1 + 1 / kappa) u u^T - I / kappa is positive definite, which a Cholesky factorisation tells.
 */
function aggregateQualityBelow(base: BaseRows, m: number, kappa: number): boolean {
  const { d, e, c, b, u, bu, rows } = scratch;
  let sum = 0;
  for (let i = 0; i < m; i++) {
    d[i] = base.diag(rows[i]!);
    e[i] = base.excess(rows[i]!);
    sum += d[i]!;
    for (let k = 0; k < i; k++) {
      const v = base.coupling(rows[i]!, rows[k]!);
      c[i * 4 + k] = v;
      c[k * 4 + i] = v;
    }
  }
  for (let i = 0; i < m; i++) u[i] = Math.sqrt(d[i]! / sum);
  for (let i = 0; i < m; i++) {
    let inside = 0;
    for (let k = 0; k < m; k++) if (k !== i) inside += c[i * 4 + k]!;
    const si = Math.sqrt(d[i]!);
    for (let k = 0; k < m; k++) {
      const a = k === i ? e[i]! + inside : -c[i * 4 + k]!;
      b[i * 4 + k] = a / (si * Math.sqrt(d[k]!));
    }
  }
  let ubu = 0;
  for (let i = 0; i < m; i++) {
    let v = 0;
    for (let k = 0; k < m; k++) v += b[i * 4 + k]! * u[k]!;
    bu[i] = v;
    ubu += u[i]! * v;
  }
  const shift = 1 / kappa;
  for (let i = 0; i < m; i++) {
    for (let k = 0; k < m; k++) {
      let v = b[i * 4 + k]! + (1 + shift) * u[i]! * u[k]!;
      if (ubu > 0) v -= (bu[i]! * bu[k]!) / ubu;
      if (i === k) v -= shift;
      b[i * 4 + k] = v;
    }
  }
  // Cholesky of the (symmetric) matrix in b, lower triangle in place
  for (let j = 0; j < m; j++) {
    let s = b[j * 4 + j]!;
    for (let k = 0; k < j; k++) s -= b[j * 4 + k]! * b[j * 4 + k]!;
    if (!(s > 0)) return false;
    const pivot = Math.sqrt(s);
    b[j * 4 + j] = pivot;
    for (let i = j + 1; i < m; i++) {
      let t = b[i * 4 + j]!;
      for (let k = 0; k < j; k++) t -= b[i * 4 + k]! * b[j * 4 + k]!;
      b[i * 4 + j] = t / pivot;
    }
  }
  return true;
}

/** Quality of a set of rows as an aggregate, below kappa? For tests: rows given explicitly (at most 4). */
export function qualityBelow(base: BaseRows, rows: readonly number[], kappa: number): boolean {
  for (let i = 0; i < rows.length; i++) scratch.rows[i] = rows[i]!;
  return aggregateQualityBelow(base, rows.length, kappa);
}

/**
 * Second pass: pairs of the pairs of a first pass (`members` of the rows of `base`, whose Galerkin matrix is
 * `pairs`). Each unpaired pair, in order, takes the unpaired neighbouring pair with the best pair quality on the
 * `pairs` matrix among those whose union passes the exact quality test on the rows of `base`
 * (aggregateQualityBelow); `agg[I]` receives the aggregate of pair I. Returns the aggregates' count.
 */
export function pairPairs(base: BaseRows, members: Members, pairs: SetupMatrix, agg: Int32Array): number {
  const { n, rowStart, col, coupling, diag, excess } = pairs;
  const { first, second } = members;
  for (let I = 0; I < n; I++) {
    const d = diag[I]!;
    agg[I] = d >= DOMINANT * (d - excess[I]!) ? NO_AGGREGATE : UNPAIRED;
  }
  const candidates = new Int32Array(64);
  const mus = new Float64Array(64);
  const rows = scratch.rows;
  let nc = 0;
  for (let I = 0; I < n; I++) {
    if (agg[I] !== UNPAIRED) continue;
    const di = diag[I]!;
    const ei = excess[I]!;
    let count = 0;
    const end = rowStart[I + 1]!;
    for (let k = rowStart[I]!; k < end && count < 64; k++) {
      const J = col[k]!;
      if (agg[J] !== UNPAIRED) continue;
      const mu = pairQuality(di, diag[J]!, ei, excess[J]!, coupling[k]!);
      if (!(mu < PAIR_QUALITY * 4)) continue;
      // insertion into the candidates sorted by mu
      let at = count++;
      while (at > 0 && mus[at - 1]! > mu) {
        mus[at] = mus[at - 1]!;
        candidates[at] = candidates[at - 1]!;
        at--;
      }
      mus[at] = mu;
      candidates[at] = J;
    }
    let best = -1;
    for (let t = 0; t < count; t++) {
      const J = candidates[t]!;
      let m = 0;
      rows[m++] = first[I]!;
      if (second[I]! >= 0) rows[m++] = second[I]!;
      rows[m++] = first[J]!;
      if (second[J]! >= 0) rows[m++] = second[J]!;
      if (aggregateQualityBelow(base, m, AGGREGATE_QUALITY)) {
        best = J;
        break;
      }
    }
    agg[I] = nc;
    if (best >= 0) agg[best] = nc;
    nc++;
  }
  return nc;
}
