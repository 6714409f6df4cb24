import { applyDot, dot, residual } from './kernels.js';
import { IterationMonitor, checkOperator, checkVectors } from './monitor.js';
import type { Preconditioner, Solver, SolveOptions, SolveStats, StencilOperator, StopReason, VariablePreconditioner } from './types.js';

/** How many times a recurrence residual below the threshold may be refuted by the true residual. */
const MAX_RESTARTS = 5;

/**
 * Preconditioned conjugate gradient (Hestenes & Stiefel 1952) on a preallocated workspace.
 * With `preconditioner` null it is plain CG. For a variable preconditioner the flexible form
 * beta = z_{k+1}·(r_{k+1} - r_k) / z_k·r_k is used (Notay 2000, "Flexible conjugate gradients").
 * Convergence is confirmed on the true residual b - A x; if the recurrence has drifted, CG restarts from it.
 */
export class PcgSolver implements Solver {
  private readonly r: Float64Array;
  private readonly z: Float64Array;
  private readonly p: Float64Array;
  private readonly q: Float64Array;
  private readonly monitor = new IterationMonitor();

  constructor(
    readonly method: string,
    private readonly op: StencilOperator,
    private readonly preconditioner: Preconditioner | null,
    private readonly setupSeconds: number,
    private readonly setupNotes: string[] = [],
  ) {
    checkOperator(op);
    const n = op.n;
    this.r = new Float64Array(n);
    this.z = preconditioner ? new Float64Array(n) : this.r;
    this.p = new Float64Array(n);
    this.q = new Float64Array(n);
  }

  solve(b: Float64Array, x: Float64Array, options: SolveOptions): SolveStats {
    const { op, r, z, p, q, monitor, preconditioner } = this;
    checkVectors(op, b, x);
    const n = op.n;
    const flexible = preconditioner !== null && (preconditioner as Partial<VariablePreconditioner>).variable === true;
    const bNorm = Math.sqrt(dot(b, b));
    const notes = [...this.setupNotes];
    if (bNorm === 0) {
      // A x = 0 has the unique solution x = 0 for an SPD operator.
      x.fill(0);
      monitor.begin(options, 0, 0);
      return monitor.finish(this.method, 'converged', 0, 0, this.setupSeconds, { notes });
    }
    let rNorm = residual(op, b, x, r);
    let stop: StopReason | null = monitor.begin(options, bNorm, rNorm);
    let k = 0;
    let restarts = 0;
    let rz = 0;
    if (stop === null) rz = this.startDirection();
    while (stop === null) {
      if (k >= options.maxIterations) {
        stop = 'iteration-limit';
        break;
      }
      const pq = applyDot(op, p, q);
      if (!(pq > 0) || !(rz > 0)) {
        stop = 'breakdown';
        notes.push(
          `curvature p·Ap = ${pq.toExponential(3)} or r·z = ${rz.toExponential(3)} is not positive: operator or preconditioner not positive definite`,
        );
        break;
      }
      const alpha = rz / pq;
      let rr = 0;
      for (let i = 0; i < n; i++) {
        x[i]! += alpha * p[i]!;
        const ri = r[i]! - alpha * q[i]!;
        r[i] = ri;
        rr += ri * ri;
      }
      k++;
      rNorm = Math.sqrt(rr);
      stop = monitor.step(k, rNorm);
      if (stop === 'converged') {
        const trueNorm = residual(op, b, x, r);
        if (trueNorm <= monitor.threshold) break;
        if (restarts >= MAX_RESTARTS) {
          stop = 'breakdown';
          notes.push(`the true residual stays above the tolerance after ${restarts} restarts (attainable accuracy reached)`);
          break;
        }
        restarts++;
        stop = null;
        rz = this.startDirection();
        continue;
      }
      if (stop !== null) break;
      let beta: number;
      if (preconditioner) {
        preconditioner.apply(r, z);
        if (flexible) {
          // z·(r_new - r_old) = z·r_new - ... with r_new - r_old = -alpha q
          let zr = 0;
          let zq = 0;
          for (let i = 0; i < n; i++) {
            zr += z[i]! * r[i]!;
            zq += z[i]! * q[i]!;
          }
          beta = (-alpha * zq) / rz;
          rz = zr;
        } else {
          const rzNew = dot(r, z);
          beta = rzNew / rz;
          rz = rzNew;
        }
      } else {
        beta = rr / rz;
        rz = rr;
      }
      for (let i = 0; i < n; i++) p[i] = z[i]! + beta * p[i]!;
    }
    const trueNorm = residual(op, b, x, r);
    if (restarts > 0) notes.push(`restarted ${restarts}x from the true residual`);
    return monitor.finish(this.method, stop, k, trueNorm, this.setupSeconds, { notes });
  }

  /** z = M^{-1} r, p = z; returns r·z. */
  private startDirection(): number {
    const { r, z, p, preconditioner } = this;
    if (preconditioner) preconditioner.apply(r, z);
    p.set(z);
    return dot(r, z);
  }
}
