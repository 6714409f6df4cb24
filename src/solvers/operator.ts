import { applyDot } from './kernels.js';
import type { StencilOperator } from './types.js';

/**
 * Five-point stencil operator on the full raster grid; see StencilOperator for the layout. Its product is the
 * stencil kernel every solver uses (./kernels.ts), so the stencil is coded once.
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
    applyDot(this, x, out);
  }

  diagonal(out: Float64Array): void {
    out.set(this.diag);
  }
}
