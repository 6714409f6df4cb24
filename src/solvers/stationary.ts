import { PiezomapError } from '../errors.js';
import { dot, gaussSeidelSweep, redBlackSweep, residual } from './kernels.js';
import { IterationMonitor, checkOperator, checkVectors } from './monitor.js';
import { estimateJacobiRadius, optimalRelaxation } from './spectrum.js';
import type { Solver, SolveOptions, SolveStats, StencilOperator, StopReason } from './types.js';

export type StationaryKind = 'jacobi' | 'gauss-seidel' | 'sor';

/** Iterations before the spectral radius estimate is trusted for a verdict. */
const FIRST_VERDICT = 64;
/** The verdict is revisited every so many iterations. */
const VERDICT_EVERY = 16;
/** Residual growth beyond transient amplification (non-normal SOR iteration matrices) that counts as divergence. */
const DIVERGED_GROWTH = 1e4;

/**
 * The classical splittings A = M - N iterated as x <- x + M^{-1}(b - A x):
 * Jacobi (M = D), Gauss–Seidel (M = D + L, lexicographic), SOR with red–black ordering and relaxation w.
 *
 * The spectral radius of M^{-1}N is estimated from the observed residual reduction over the second half of
 * the iterations so far, (||r_k|| / ||r_j||)^(1/(k-j)) with j the last power of two <= k/2; early estimates
 * are optimistic (fast modes die first), so a predicted iteration count above the cap is a safe reason to
 * stop early ('too-slow'), and an estimate >= 1 stops with 'diverging'.
 */
export class StationarySolver implements Solver {
  private readonly invDiag: Float64Array;
  private readonly r: Float64Array;
  private readonly monitor = new IterationMonitor();
  readonly relaxation: number;
  private readonly setupNotes: string[] = [];
  readonly setupSeconds: number;

  constructor(
    readonly method: string,
    private readonly op: StencilOperator,
    private readonly kind: StationaryKind,
    relaxation: number | undefined,
  ) {
    const t0 = performance.now();
    checkOperator(op);
    const n = op.n;
    this.invDiag = new Float64Array(n);
    for (let i = 0; i < n; i++) this.invDiag[i] = 1 / op.diag[i]!;
    this.r = new Float64Array(n);
    if (kind === 'sor') {
      if (relaxation === undefined) {
        const est = estimateJacobiRadius(op);
        this.relaxation = optimalRelaxation(est.rho);
        this.setupNotes.push(
          `relaxation factor ${this.relaxation.toFixed(6)} from Jacobi spectral radius estimate ${est.rho.toFixed(8)} ` +
            `(${est.steps} Lanczos steps; Young 1950: w = 2/(1+sqrt(1-rho^2)))`,
        );
      } else {
        if (!(relaxation > 0 && relaxation < 2)) {
          throw new PiezomapError('usage', `SOR relaxation factor must lie in (0, 2), got ${relaxation}`, {
            key: 'solver.relaxation',
            hint: 'leave it out to choose the optimal factor automatically',
          });
        }
        this.relaxation = relaxation;
        this.setupNotes.push(`relaxation factor ${relaxation} (given)`);
      }
    } else {
      this.relaxation = 1;
    }
    this.setupSeconds = (performance.now() - t0) / 1000;
  }

  solve(b: Float64Array, x: Float64Array, options: SolveOptions): SolveStats {
    const { op, r, invDiag, monitor, kind } = this;
    checkVectors(op, b, x);
    const n = op.n;
    const notes = [...this.setupNotes];
    const bNorm = Math.sqrt(dot(b, b));
    if (bNorm === 0) {
      x.fill(0);
      monitor.begin(options, 0, 0);
      return monitor.finish(this.method, 'converged', 0, 0, this.setupSeconds, { notes });
    }
    let rNorm = residual(op, b, x, r);
    let stop: StopReason | null = monitor.begin(options, bNorm, rNorm);
    let k = 0;
    let anchorK = 0;
    let anchorNorm = rNorm;
    let nextAnchorK = 0;
    let nextAnchorNorm = rNorm;
    let rho: number | null = null;
    let slowVerdicts = 0;
    const omega = this.relaxation;
    while (stop === null) {
      if (k >= options.maxIterations) {
        stop = 'iteration-limit';
        break;
      }
      if (kind === 'jacobi') {
        // r holds b - A x of the current iterate
        for (let i = 0; i < n; i++) x[i]! += r[i]! * invDiag[i]!;
      } else if (kind === 'gauss-seidel') {
        gaussSeidelSweep(op, invDiag, b, x, false, 1);
      } else {
        redBlackSweep(op, invDiag, b, x, 0, omega);
        redBlackSweep(op, invDiag, b, x, 1, omega);
      }
      k++;
      rNorm = residual(op, b, x, r);
      stop = monitor.step(k, rNorm);
      if (stop !== null) break;
      // anchors at powers of two: the estimate spans at least the second half of the run
      if ((k & (k - 1)) === 0) {
        anchorK = nextAnchorK;
        anchorNorm = nextAnchorNorm;
        nextAnchorK = k;
        nextAnchorNorm = rNorm;
      }
      if (k >= FIRST_VERDICT && k % VERDICT_EVERY === 0 && k > anchorK) {
        rho = Math.pow(rNorm / anchorNorm, 1 / (k - anchorK));
        if (rho >= 1 && rNorm > DIVERGED_GROWTH * monitor.initialResidual) {
          stop = 'diverging';
          notes.push(
            `the residual grows: spectral radius estimate ${rho.toFixed(6)} >= 1, the iteration cannot converge; ` +
              `try solver method "pcg-multigrid" (or "auto")`,
          );
          break;
        }
        const predicted = rho < 1 ? k + Math.log(monitor.threshold / rNorm) / Math.log(rho) : Infinity;
        if (predicted > options.maxIterations) slowVerdicts++;
        else slowVerdicts = 0;
        if (slowVerdicts >= 2) {
          stop = 'too-slow';
          const count = Number.isFinite(predicted) ? `about ${Math.ceil(predicted)}` : 'unboundedly many';
          notes.push(
            `spectral radius estimate ${rho.toFixed(6)}: reaching the tolerance needs at least ${count} iterations (early estimates are optimistic), ` +
              `more than maxIterations = ${options.maxIterations}; stopped early after ${k}. ` +
              `Try solver method "pcg-multigrid" (or "auto")`,
          );
          break;
        }
      }
    }
    if (rho === null && k > anchorK && k >= 2 && monitor.lastResidual > 0) {
      rho = Math.pow(monitor.lastResidual / anchorNorm, 1 / (k - anchorK));
    }
    const trueNorm = residual(op, b, x, r);
    return monitor.finish(this.method, stop, k, trueNorm, this.setupSeconds, { spectralRadius: rho, notes });
  }
}
