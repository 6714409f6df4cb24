import { PiezomapError } from '../errors.js';
import type { CsrMatrix } from './csr.js';

/**
 * Direct solver for a small symmetric positive definite sparse matrix (the coarsest multigrid level): Cholesky
 * factorisation A = L L^T in dense storage (Golub & Van Loan, Matrix Computations, algorithm 4.2.1), n^3 / 6
 * multiply-adds to factor and n^2 per solve, so it serves only for a few hundred unknowns.
 */
export class DenseCholesky {
  readonly n: number;
  /** L row by row, full n x n (upper part unused). */
  private readonly factor: Float64Array;

  constructor(a: CsrMatrix) {
    const { n, rowStart, col, coupling, diag } = a;
    this.n = n;
    const f = new Float64Array(n * n);
    for (let i = 0; i < n; i++) {
      f[i * n + i] = diag[i]!;
      for (let k = rowStart[i]!; k < rowStart[i + 1]!; k++) f[i * n + col[k]!] = -coupling[k]!;
    }
    for (let j = 0; j < n; j++) {
      const rj = j * n;
      let s = f[rj + j]!;
      for (let k = 0; k < j; k++) s -= f[rj + k]! * f[rj + k]!;
      if (!(s > 0)) {
        throw new PiezomapError('solver', `dense Cholesky: matrix is not positive definite (pivot ${s} at position ${j})`, {
          hint: 'every connected active region needs a fixed-head cell',
        });
      }
      const pivot = Math.sqrt(s);
      f[rj + j] = pivot;
      for (let i = j + 1; i < n; i++) {
        const ri = i * n;
        let t = f[ri + j]!;
        for (let k = 0; k < j; k++) t -= f[ri + k]! * f[rj + k]!;
        f[ri + j] = t / pivot;
      }
    }
    this.factor = f;
  }

  /** x = A^{-1} b (x may alias b). */
  solve(b: Float64Array, x: Float64Array): void {
    const { n, factor: f } = this;
    for (let i = 0; i < n; i++) {
      const ri = i * n;
      let s = b[i]!;
      for (let k = 0; k < i; k++) s -= f[ri + k]! * x[k]!;
      x[i] = s / f[ri + i]!;
    }
    // L^T x = y by columns of L^T (rows of L, contiguous): x_i final, then remove it from the rows above
    for (let i = n - 1; i >= 0; i--) {
      const ri = i * n;
      const xi = x[i]! / f[ri + i]!;
      x[i] = xi;
      for (let k = 0; k < i; k++) x[k]! -= f[ri + k]! * xi;
    }
  }
}
