import { dot } from './kernels.js';

/**
 * The K-cycle's inner Krylov steps, shared by the aggregation multigrids (./multigrid.ts on 2 x 2 raster aggregates,
 * ./pairwiseMultigrid.ts on strength-following aggregates): on a coarse level, two flexible-CG steps for A e = rhs,
 * each preconditioned by the next multigrid cycle on that level (Notay & Vassilevski 2008, "Recursive Krylov-based
 * multigrid cycles"; Notay 2010, "An aggregation-based algebraic multigrid method").
 */

/** Skip the second inner step when the first reduced the coarse residual below this fraction. */
export const K_CYCLE_THRESHOLD = 0.25;

/** The vectors of one coarse level's K-cycle: the right-hand side, the correction (v1) and workspaces. */
export interface KCycleVectors {
  readonly rhs: Float64Array;
  readonly v1: Float64Array;
  readonly w1: Float64Array;
  readonly r2: Float64Array;
  readonly v2: Float64Array;
  readonly w2: Float64Array;
}

/**
 * Two flexible-CG steps for A e = `v.rhs`, the correction e left in `v.v1`. `applyDot(x, out)` sets out = A x and
 * returns x·out; `cycle(b, x)` sets x ~= A^{-1} b (the multigrid cycle on this level). With `second` false, or once
 * the first step has reduced the residual below K_CYCLE_THRESHOLD, only the first step is taken.
 */
export function krylovTwoSteps(
  v: KCycleVectors,
  applyDot: (x: Float64Array, out: Float64Array) => number,
  cycle: (b: Float64Array, x: Float64Array) => void,
  second = true,
): void {
  const { rhs, v1, w1, r2, v2, w2 } = v;
  cycle(rhs, v1);
  const rho1 = applyDot(v1, w1);
  const alpha1 = dot(v1, rhs);
  const step1 = alpha1 / rho1;
  const n = rhs.length;
  let rr2 = 0;
  let rr = 0;
  for (let i = 0; i < n; i++) {
    const r = rhs[i]! - step1 * w1[i]!;
    r2[i] = r;
    rr2 += r * r;
    rr += rhs[i]! * rhs[i]!;
  }
  if (!(rho1 > 0) || !second || rr2 <= K_CYCLE_THRESHOLD * K_CYCLE_THRESHOLD * rr) {
    const s = rho1 > 0 ? step1 : 0;
    for (let i = 0; i < n; i++) v1[i] = s * v1[i]!;
    return;
  }
  cycle(r2, v2);
  const beta = applyDot(v2, w2);
  const gamma = dot(v2, w1);
  const alpha2 = dot(v2, r2);
  const rho2 = beta - (gamma * gamma) / rho1;
  if (!(rho2 > 0)) {
    for (let i = 0; i < n; i++) v1[i] = step1 * v1[i]!;
    return;
  }
  const a1 = step1 - (gamma * alpha2) / (rho1 * rho2);
  const a2 = alpha2 / rho2;
  for (let i = 0; i < n; i++) v1[i] = a1 * v1[i]! + a2 * v2[i]!;
}
