import type { StencilOperator } from '../solvers/types.js';

/**
 * Five-point stencil operator on the full raster grid; see StencilOperator for the layout.
 * Boundaries are handled outside the inner loops so the hot loop has no branches.
 */
export class GridOperator implements StencilOperator {
  readonly n: number;

  constructor(
    readonly nx: number,
    readonly ny: number,
    readonly diag: Float64Array,
    readonly east: Float64Array,
    readonly south: Float64Array,
    readonly unknown: Uint8Array,
  ) {
    this.n = nx * ny;
  }

  apply(x: Float64Array, out: Float64Array): void {
    applyStencil(this.nx, this.ny, this.diag, this.east, this.south, x, out);
  }

  diagonal(out: Float64Array): void {
    out.set(this.diag);
  }
}

/** out = A x for the five-point stencil given as diagonal, east and south bands. */
export function applyStencil(
  nx: number,
  ny: number,
  diag: Float64Array,
  east: Float64Array,
  south: Float64Array,
  x: Float64Array,
  out: Float64Array,
): void {
  if (nx === 1) {
    for (let i = 0; i < ny; i++) {
      let v = diag[i]! * x[i]!;
      if (i > 0) v -= south[i - 1]! * x[i - 1]!;
      if (i < ny - 1) v -= south[i]! * x[i + 1]!;
      out[i] = v;
    }
    return;
  }
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    const hasN = i > 0;
    const hasS = i < ny - 1;
    // first column
    {
      const p = row;
      let v = diag[p]! * x[p]! - east[p]! * x[p + 1]!;
      if (hasN) v -= south[p - nx]! * x[p - nx]!;
      if (hasS) v -= south[p]! * x[p + nx]!;
      out[p] = v;
    }
    const end = row + nx - 1;
    if (hasN && hasS) {
      for (let p = row + 1; p < end; p++) {
        out[p] =
          diag[p]! * x[p]! -
          east[p]! * x[p + 1]! -
          east[p - 1]! * x[p - 1]! -
          south[p]! * x[p + nx]! -
          south[p - nx]! * x[p - nx]!;
      }
    } else {
      for (let p = row + 1; p < end; p++) {
        let v = diag[p]! * x[p]! - east[p]! * x[p + 1]! - east[p - 1]! * x[p - 1]!;
        if (hasN) v -= south[p - nx]! * x[p - nx]!;
        if (hasS) v -= south[p]! * x[p + nx]!;
        out[p] = v;
      }
    }
    // last column
    {
      const p = end;
      let v = diag[p]! * x[p]! - east[p - 1]! * x[p - 1]!;
      if (hasN) v -= south[p - nx]! * x[p - nx]!;
      if (hasS) v -= south[p]! * x[p + nx]!;
      out[p] = v;
    }
  }
}
