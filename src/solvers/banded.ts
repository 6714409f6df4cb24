import { PiezomapError } from '../errors.js';
import type { Bands } from './kernels.js';

/**
 * Direct solver for a five-point SPD system: Cholesky factorisation in band storage (Golub & Van Loan,
 * Matrix Computations, 4.3.5). Cells are ordered along the shorter grid side so the half-bandwidth is
 * min(nx, ny); cost n * w^2 to factor, n * w per solve. Used for the coarsest multigrid level and as a
 * direct reference on small grids.
 */
export class BandedCholesky {
  readonly n: number;
  /** Half-bandwidth. */
  readonly width: number;
  private readonly factor: Float64Array;
  /** band position of grid cell p */
  private readonly order: Int32Array;
  private readonly work: Float64Array;

  constructor(a: Bands) {
    const { nx, ny, diag, east, south } = a;
    const n = nx * ny;
    const byRows = nx <= ny;
    const w = byRows ? nx : ny;
    this.n = n;
    this.width = w;
    const order = new Int32Array(n);
    for (let i = 0; i < ny; i++) for (let j = 0; j < nx; j++) order[i * nx + j] = byRows ? i * nx + j : j * ny + i;
    this.order = order;
    const stride = w + 1;
    // row k of L stored at factor[k*stride + (col - k + w)], col in [k-w, k]
    const f = new Float64Array(n * stride);
    for (let p = 0; p < n; p++) {
      const k = order[p]!;
      f[k * stride + w] = diag[p]!;
      const col = p % nx;
      // lower-triangle entries: coupling to the neighbour that comes earlier in band order
      if (col + 1 < nx) {
        const q = p + 1;
        const c = -east[p]!;
        const kq = order[q]!;
        if (kq < k) f[k * stride + (kq - k + w)] = c;
        else f[kq * stride + (k - kq + w)] = c;
      }
      if (p + nx < n) {
        const q = p + nx;
        const c = -south[p]!;
        const kq = order[q]!;
        if (kq < k) f[k * stride + (kq - k + w)] = c;
        else f[kq * stride + (k - kq + w)] = c;
      }
    }
    for (let i = 0; i < n; i++) {
      const ri = i * stride;
      const j0 = Math.max(0, i - w);
      for (let j = j0; j <= i; j++) {
        const rj = j * stride;
        let s = f[ri + (j - i + w)]!;
        const k0 = Math.max(j0, j - w);
        for (let k = k0; k < j; k++) s -= f[ri + (k - i + w)]! * f[rj + (k - j + w)]!;
        if (j < i) {
          f[ri + (j - i + w)] = s / f[rj + w]!;
        } else {
          if (!(s > 0)) {
            throw new PiezomapError('solver', `banded Cholesky: matrix is not positive definite (pivot ${s} at position ${i})`, {
              hint: 'every connected active region needs a fixed-head cell',
            });
          }
          f[ri + w] = Math.sqrt(s);
        }
      }
    }
    this.factor = f;
    this.work = new Float64Array(n);
  }

  /** x = A^{-1} b (x may alias b). */
  solve(b: ArrayLike<number>, x: Float64Array | Float32Array): void {
    const { n, width: w, factor: f, order, work: y } = this;
    const stride = w + 1;
    for (let p = 0; p < n; p++) y[order[p]!] = b[p]!;
    for (let i = 0; i < n; i++) {
      const ri = i * stride;
      let s = y[i]!;
      for (let k = Math.max(0, i - w); k < i; k++) s -= f[ri + (k - i + w)]! * y[k]!;
      y[i] = s / f[ri + w]!;
    }
    for (let i = n - 1; i >= 0; i--) {
      let s = y[i]!;
      const kEnd = Math.min(n - 1, i + w);
      for (let k = i + 1; k <= kEnd; k++) s -= f[k * stride + (i - k + w)]! * y[k]!;
      y[i] = s / f[i * stride + w]!;
    }
    for (let p = 0; p < n; p++) x[p] = y[order[p]!]!;
  }
}
