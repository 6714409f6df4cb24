/**
 * Symmetric sparse matrices in compressed-row form (CSR, every row stored whole) for the coarse levels of the
 * pairwise-aggregation multigrid (./pairwise.ts), whose aggregates follow the conductances and so no longer form a
 * raster. Like the five-point operator, a row keeps its diagonal apart and its off-diagonal entries as positive
 * couplings c_ij = -a_ij:  (A x)_i = d_i x_i - sum_j c_ij x_j.
 */

/** Coefficient storage: single precision as a rule, double where the operator's range needs it (see operatorScale). */
export type Coefficients = Float32Array | Float64Array;

export interface CsrMatrix {
  readonly n: number;
  /** Row i's entries are rowStart[i] .. rowStart[i + 1] - 1. */
  readonly rowStart: Int32Array;
  readonly col: Int32Array;
  /** Off-diagonal couplings c_ij = -a_ij (>= 0 for the M-matrices built here). */
  readonly coupling: Coefficients;
  readonly diag: Coefficients;
  /**
   * The diagonal less the row's couplings, d_i - sum_j c_ij (>= 0: the row's conductance to fixed heads). Products
   * are formed from it, not from the diagonal (csrApplyDot).
   */
  readonly excess: Coefficients;
}

/**
 * out = A x in the difference form (A x)_i = e_i x_i + sum_j c_ij (x_i - x_j); returns x·out.
 * The same product as d_i x_i - sum_j c_ij x_j, but without its cancellation: inside a block of cells tied by
 * large conductances and held only by small ones (a high-K lens in low-K rock), d_i nearly equals sum_j c_ij, and a
 * single-precision d_i (7 digits) would carry the small difference, which decides the block's slowest mode, with a
 * large relative error (measured: 772 iterations instead of 14 on a checkerboard of 5 x 5 blocks, K 1 and 1e-6).
 */
export function csrApplyDot(a: CsrMatrix, x: Float64Array, out: Float64Array): number {
  const { n, rowStart, col, coupling, excess } = a;
  let s = 0;
  let k = rowStart[0]!;
  for (let i = 0; i < n; i++) {
    const end = rowStart[i + 1]!;
    const xi = x[i]!;
    let v = excess[i]! * xi;
    for (; k < end; k++) v += coupling[k]! * (xi - x[col[k]!]!);
    out[i] = v;
    s += v * xi;
  }
  return s;
}

/** One Gauss–Seidel sweep in place on A x = b, rows in increasing order (forward) or decreasing (backward). */
export function csrGaussSeidel(a: CsrMatrix, invDiag: Coefficients, b: Float64Array, x: Float64Array, backward: boolean): void {
  const { n, rowStart, col, coupling } = a;
  if (!backward) {
    for (let i = 0; i < n; i++) {
      let v = b[i]!;
      const end = rowStart[i + 1]!;
      for (let k = rowStart[i]!; k < end; k++) v += coupling[k]! * x[col[k]!]!;
      x[i] = v * invDiag[i]!;
    }
  } else {
    for (let i = n - 1; i >= 0; i--) {
      let v = b[i]!;
      const end = rowStart[i + 1]!;
      for (let k = rowStart[i]!; k < end; k++) v += coupling[k]! * x[col[k]!]!;
      x[i] = v * invDiag[i]!;
    }
  }
}

/**
 * Sorts each row's entries by column (rows are short: insertion sort) and returns, per row, the position of its
 * first entry right of the diagonal: row i's lower part is rowStart[i] .. upper[i] - 1, its upper part
 * upper[i] .. rowStart[i + 1] - 1.
 */
export function sortRows(rowStart: Int32Array, col: Int32Array, coupling: Float64Array): Int32Array {
  const n = rowStart.length - 1;
  const upper = new Int32Array(n);
  for (let i = 0; i < n; i++) {
    const begin = rowStart[i]!;
    const end = rowStart[i + 1]!;
    for (let k = begin + 1; k < end; k++) {
      const c = col[k]!;
      const v = coupling[k]!;
      let m = k;
      while (m > begin && col[m - 1]! > c) {
        col[m] = col[m - 1]!;
        coupling[m] = coupling[m - 1]!;
        m--;
      }
      col[m] = c;
      coupling[m] = v;
    }
    let u = begin;
    while (u < end && col[u]! < i) u++;
    upper[i] = u;
  }
  return upper;
}

/**
 * Pre-smoothing fused with the restriction: one forward Gauss–Seidel sweep from a zero start, (D + L) x = b, which
 * reads only the lower parts of the rows; then the residual b - A x = -U x (upper parts only) summed into the coarse
 * right-hand side of each row's aggregate `map[i]`. One pass over the matrix in all, no residual vector.
 */
export function csrSmoothRestrict(
  a: CsrMatrix,
  upper: Int32Array,
  invDiag: Coefficients,
  b: Float64Array,
  x: Float64Array,
  map: Int32Array,
  coarseRhs: Float64Array,
): void {
  const { n, rowStart, col, coupling } = a;
  for (let i = 0; i < n; i++) {
    let v = b[i]!;
    const end = upper[i]!;
    for (let k = rowStart[i]!; k < end; k++) v += coupling[k]! * x[col[k]!]!;
    x[i] = v * invDiag[i]!;
  }
  coarseRhs.fill(0);
  for (let i = 0; i < n; i++) {
    let r = 0;
    const end = rowStart[i + 1]!;
    for (let k = upper[i]!; k < end; k++) r += coupling[k]! * x[col[k]!]!;
    coarseRhs[map[i]!]! += r;
  }
}
