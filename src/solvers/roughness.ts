import type { StencilOperator } from './types.js';

/**
 * A cell counts as weakly tied to its 2 x 2 block when its stronger coupling inside the block (to its horizontal or
 * vertical partner) is below this fraction of its strongest coupling. Chosen from the measured shares below.
 */
export const WEAK_INSIDE_BLOCK = 0.1;

/**
 * Share of the unknown cells that are weakly tied to their 2 x 2 block (the block the first coarsening of the
 * geometric multigrid, ./multigrid.ts, merges them into): their strongest conductance leads out of the block and
 * both conductances inside it are below WEAK_INSIDE_BLOCK times that. Cells without couplings are not counted.
 * One pass over the bands, no allocation; the `auto` rule (./registry.ts) reads it.
 */
export function weakBlockShare(op: StencilOperator): number {
  const { nx, ny, east, south, unknown } = op;
  let counted = 0;
  let weak = 0;
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    for (let j = 0; j < nx; j++) {
      const p = row + j;
      if (!unknown[p]) continue;
      const e = east[p]!;
      const s = south[p]!;
      const w = j > 0 ? east[p - 1]! : 0;
      const n = i > 0 ? south[p - nx]! : 0;
      const strongest = Math.max(e, s, w, n);
      if (!(strongest > 0)) continue;
      counted++;
      // partner in the block: east for an even column, west for an odd one; south for an even row, north for odd
      const horizontal = j & 1 ? w : e;
      const vertical = i & 1 ? n : s;
      if (Math.max(horizontal, vertical) < WEAK_INSIDE_BLOCK * strongest) weak++;
    }
  }
  return counted > 0 ? weak / counted : 0;
}
