import { applyDot, dot } from './kernels.js';
import type { StencilOperator } from './types.js';

export interface JacobiRadiusEstimate {
  /** Estimate of rho(I - D^{-1} A), from below. */
  rho: number;
  /** Smallest eigenvalue estimate of D^{-1} A. */
  lambdaMin: number;
  steps: number;
}

/**
 * Estimates the spectral radius of the Jacobi iteration matrix I - D^{-1}A from the Lanczos tridiagonal
 * matrix that Jacobi-preconditioned CG builds as a by-product (Golub & Van Loan, Matrix Computations, 10.2):
 * rho_J = 1 - lambda_min(D^{-1}A), exact for the five-point stencil whose spectrum of D^{-1}A is symmetric
 * about 1 (the grid graph is bipartite). Ritz values approach lambda_min from above, so rho is estimated
 * from below; iteration stops when lambda_min changes by less than `relativeChange` over 10 steps.
 */
export function estimateJacobiRadius(op: StencilOperator, maxSteps = 1500, relativeChange = 1e-3): JacobiRadiusEstimate {
  const n = op.n;
  const { unknown, diag } = op;
  const r = new Float64Array(n);
  const z = new Float64Array(n);
  const p = new Float64Array(n);
  const q = new Float64Array(n);
  // Deterministic pseudo-random start on the unknown cells (Park–Miller minimal standard generator).
  let seed = 12345;
  for (let i = 0; i < n; i++) {
    seed = (seed * 16807) % 2147483647;
    r[i] = unknown[i] ? seed / 2147483647 - 0.5 : 0;
  }
  const alphas = new Float64Array(maxSteps);
  const betas = new Float64Array(maxSteps);
  for (let i = 0; i < n; i++) z[i] = r[i]! / diag[i]!;
  p.set(z);
  let rz = dot(r, z);
  const r0 = rz;
  let steps = 0;
  let lambdaMin = 1;
  let previous = Infinity;
  for (let k = 0; k < maxSteps; k++) {
    const pq = applyDot(op, p, q);
    if (!(pq > 0) || !(rz > 0)) break;
    const alpha = rz / pq;
    for (let i = 0; i < n; i++) r[i]! -= alpha * q[i]!;
    for (let i = 0; i < n; i++) z[i] = r[i]! / diag[i]!;
    const rzNew = dot(r, z);
    const beta = rzNew / rz;
    alphas[k] = alpha;
    betas[k] = beta;
    steps = k + 1;
    rz = rzNew;
    for (let i = 0; i < n; i++) p[i] = z[i]! + beta * p[i]!;
    const exhausted = rz <= 1e-28 * r0;
    if (steps % 10 === 0 || exhausted || steps === maxSteps) {
      lambdaMin = smallestRitzValue(alphas, betas, steps);
      if (exhausted || Math.abs(previous - lambdaMin) <= relativeChange * lambdaMin) break;
      previous = lambdaMin;
    }
  }
  if (steps > 0 && steps % 10 !== 0) lambdaMin = smallestRitzValue(alphas, betas, steps);
  return { rho: Math.max(0, 1 - lambdaMin), lambdaMin, steps };
}

/** Smallest eigenvalue of the Lanczos tridiagonal built from m CG steps, by Sturm-sequence bisection. */
function smallestRitzValue(alphas: Float64Array, betas: Float64Array, m: number): number {
  // T_kk = 1/alpha_k + beta_{k-1}/alpha_{k-1}, T_{k,k+1} = sqrt(beta_k)/alpha_k
  const diagAt = (k: number): number => 1 / alphas[k]! + (k > 0 ? betas[k - 1]! / alphas[k - 1]! : 0);
  const offSq = (k: number): number => betas[k]! / (alphas[k]! * alphas[k]!);
  let hi = 0;
  for (let k = 0; k < m; k++) {
    const off = (k > 0 ? Math.sqrt(offSq(k - 1)) : 0) + (k < m - 1 ? Math.sqrt(offSq(k)) : 0);
    hi = Math.max(hi, diagAt(k) + off);
  }
  let lo = 0;
  // count of eigenvalues below x
  const countBelow = (x: number): number => {
    let count = 0;
    let d = 1;
    for (let k = 0; k < m; k++) {
      d = diagAt(k) - x - (k > 0 ? offSq(k - 1) / d : 0);
      if (d === 0) d = -1e-300;
      if (d < 0) count++;
    }
    return count;
  };
  for (let it = 0; it < 100 && hi - lo > 1e-15 * hi; it++) {
    const mid = 0.5 * (lo + hi);
    if (countBelow(mid) >= 1) hi = mid;
    else lo = mid;
  }
  return 0.5 * (lo + hi);
}

/** Young's (1950) optimal SOR relaxation factor for a consistently ordered matrix with Jacobi radius rho. */
export function optimalRelaxation(rho: number): number {
  const r = Math.min(rho, 1 - 1e-16);
  return 2 / (1 + Math.sqrt(1 - r * r));
}
