import { PiezomapError } from '../errors.js';
import { triangularPairSolve } from './kernels.js';
import type { Preconditioner, StencilOperator } from './types.js';

/** Diagonal (Jacobi) preconditioner: z = D^{-1} r. */
export class JacobiPreconditioner implements Preconditioner {
  readonly name = 'jacobi';
  private readonly invDiag: Float64Array;

  constructor(op: StencilOperator) {
    this.invDiag = new Float64Array(op.n);
    op.diagonal(this.invDiag);
    for (let i = 0; i < op.n; i++) this.invDiag[i] = 1 / this.invDiag[i]!;
  }

  apply(r: Float64Array, z: Float64Array): void {
    const d = this.invDiag;
    for (let i = 0; i < r.length; i++) z[i] = r[i]! * d[i]!;
  }
}

/**
 * Symmetric SOR preconditioner M = (D/w + L)(D/w)^{-1}(D/w + U) (up to a scale factor, which CG ignores);
 * w = 1 is symmetric Gauss–Seidel. Lexicographic order, forward then backward sweep (Axelsson 1994, ch. 7).
 */
export class SsorPreconditioner implements Preconditioner {
  readonly name: string;
  private readonly invPivot: Float64Array;

  constructor(
    private readonly op: StencilOperator,
    omega = 1,
  ) {
    if (!(omega > 0 && omega < 2)) {
      throw new PiezomapError('usage', `SSOR relaxation factor must lie in (0, 2), got ${omega}`, { key: 'solver.relaxation' });
    }
    this.name = omega === 1 ? 'symmetric Gauss-Seidel' : `SSOR(${omega})`;
    this.invPivot = new Float64Array(op.n);
    for (let i = 0; i < op.n; i++) this.invPivot[i] = omega / op.diag[i]!;
  }

  apply(r: Float64Array, z: Float64Array): void {
    triangularPairSolve(this.op, this.invPivot, r, z);
  }
}

/**
 * Incomplete Cholesky without fill, IC(0), for the five-point stencil: M = (P + L) P^{-1} (P + U) with pivots
 * P_p = a_pp - c_{p,west}^2 / P_west - c_{p,north}^2 / P_north (Meijerink & van der Vorst 1977). The operator is
 * an M-matrix, so the pivots stay positive; a non-positive pivot is still caught and reported.
 */
export class IncompleteCholeskyPreconditioner implements Preconditioner {
  readonly name = 'incomplete Cholesky IC(0)';
  private readonly invPivot: Float64Array;

  constructor(private readonly op: StencilOperator) {
    const { nx, diag, east, south } = op;
    const n = op.n;
    const inv = new Float64Array(n);
    for (let p = 0; p < n; p++) {
      let pivot = diag[p]!;
      if (p % nx !== 0) {
        const c = east[p - 1]!;
        pivot -= c * c * inv[p - 1]!;
      }
      if (p >= nx) {
        const c = south[p - nx]!;
        pivot -= c * c * inv[p - nx]!;
      }
      if (!(pivot > 0)) {
        const row = Math.floor(p / nx);
        throw new PiezomapError('solver', `incomplete Cholesky pivot at row ${row}, col ${p - row * nx} is not positive`, {
          cell: { row, col: p - row * nx },
          hint: 'the system is not an M-matrix; try solver method "pcg-ssor"',
        });
      }
      inv[p] = 1 / pivot;
    }
    this.invPivot = inv;
  }

  apply(r: Float64Array, z: Float64Array): void {
    triangularPairSolve(this.op, this.invPivot, r, z);
  }
}
