import { applyDot, dot, residual } from './kernels.js';
import { IterationMonitor, checkOperator, checkVectors } from './monitor.js';
import { sharedAlloc, type Team } from './team.js';
import { OP } from './teamKernels.js';
import type { Preconditioner, Solver, SolveOptions, SolveStats, StencilOperator, StopReason, VariablePreconditioner } from './types.js';

/** How many times a recurrence residual below the threshold may be refuted by the true residual. */
const MAX_RESTARTS = 5;

/**
 * Preconditioned conjugate gradient (Hestenes & Stiefel 1952) on a preallocated workspace.
 * With `preconditioner` null it is plain CG. For a variable preconditioner the flexible form
 * beta = z_{k+1}·(r_{k+1} - r_k) / z_k·r_k is used (Notay 2000, "Flexible conjugate gradients").
 * Convergence is confirmed on the true residual b - A x; if the recurrence has drifted, CG restarts from it.
 *
 * With a thread `team` every vector operation (operator product, dot products, updates) is shared by the team, each
 * thread on its block of rows, sums added in thread order; the workspaces then live in shared memory, with copies of
 * b and x made at each solve (see ./team.ts). The operator's bands must already be in shared memory.
 */
export class PcgSolver implements Solver {
  private readonly r: Float64Array;
  private readonly z: Float64Array;
  private readonly p: Float64Array;
  private readonly q: Float64Array;
  private readonly monitor = new IterationMonitor();
  private readonly shared: SharedWorkspace | null;

  constructor(
    readonly method: string,
    private readonly op: StencilOperator,
    private readonly preconditioner: Preconditioner | null,
    private readonly setupSeconds: number,
    private readonly setupNotes: string[] = [],
    team: Team | null = null,
  ) {
    checkOperator(op);
    const n = op.n;
    const f64 = team ? sharedAlloc.f64 : (m: number) => new Float64Array(m);
    this.r = f64(n);
    this.z = preconditioner ? f64(n) : this.r;
    this.p = f64(n);
    this.q = f64(n);
    this.shared = team ? shareWorkspace(team, op, this.r, this.z, this.p, this.q) : null;
    if (this.shared && preconditioner && typeof (preconditioner as Partial<DotFusingPreconditioner>).applyWithDots === 'function') {
      this.shared.fusedDots = preconditioner as unknown as DotFusingPreconditioner;
    }
  }

  solve(b: Float64Array, x: Float64Array, options: SolveOptions): SolveStats {
    const shared = this.shared;
    if (!shared) return this.iterate(b, x, options);
    checkVectors(this.op, b, x);
    // the helpers see only shared memory, and only arrays registered with the team: b and x are copied into the
    // workspace's own (registering every caller's array would keep them all alive)
    shared.b.set(b);
    shared.x.set(x);
    const stats = this.iterateShared(shared, options);
    x.set(shared.x);
    return stats;
  }

  private iterate(b: Float64Array, x: Float64Array, options: SolveOptions): SolveStats {
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
        notes.push(breakdownNote(pq, rz));
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

  /**
   * The same iteration as `iterate` on the workspace's copies of b and x, every vector operation run by the team.
   * The new direction p = z + beta p is formed at the start of the next iteration, in the same kernel as q = A p
   * (one fork–join instead of two).
   */
  private iterateShared(ws: SharedWorkspace, options: SolveOptions): SolveStats {
    const { op, r, z, monitor, preconditioner } = this;
    const { team, grid } = ws;
    const { nx, ny } = op;
    const flexible = preconditioner !== null && (preconditioner as Partial<VariablePreconditioner>).variable === true;
    const x = ws.x;
    const iB = ws.bId;
    const iX = ws.xId;
    const none = -1;
    team.run(OP.dots, [nx, ny, iB, iB, none, none]);
    const bNorm = Math.sqrt(team.sum(0));
    const notes = [...this.setupNotes];
    if (bNorm === 0) {
      x.fill(0);
      monitor.begin(options, 0, 0);
      return monitor.finish(this.method, 'converged', 0, 0, this.setupSeconds, { notes });
    }
    const trueResidual = (): number => {
      team.run(OP.residual, [...grid, iB, iX, ws.r]);
      return Math.sqrt(team.sum(0));
    };
    // z = M^-1 r; the next kernel copies it into p; returns r·z
    const startDirection = (): number => {
      if (preconditioner) preconditioner.apply(r, z);
      team.run(OP.dots, [nx, ny, ws.r, ws.z, none, none]);
      return team.sum(0);
    };
    let rNorm = trueResidual();
    let stop: StopReason | null = monitor.begin(options, bNorm, rNorm);
    let k = 0;
    let restarts = 0;
    let rz = 0;
    let copy = 1;
    let beta = 0;
    if (stop === null) rz = startDirection();
    while (stop === null) {
      if (k >= options.maxIterations) {
        stop = 'iteration-limit';
        break;
      }
      team.run(OP.directionApply, [...grid, ws.z, ws.p, ws.q, copy], [beta]);
      const pq = team.sum(0);
      if (!(pq > 0) || !(rz > 0)) {
        stop = 'breakdown';
        notes.push(breakdownNote(pq, rz));
        break;
      }
      const alpha = rz / pq;
      team.run(OP.pcgStep, [nx, ny, iX, ws.p, ws.r, ws.q], [alpha]);
      const rr = team.sum(0);
      k++;
      rNorm = Math.sqrt(rr);
      stop = monitor.step(k, rNorm);
      if (stop === 'converged') {
        const trueNorm = trueResidual();
        if (trueNorm <= monitor.threshold) break;
        if (restarts >= MAX_RESTARTS) {
          stop = 'breakdown';
          notes.push(`the true residual stays above the tolerance after ${restarts} restarts (attainable accuracy reached)`);
          break;
        }
        restarts++;
        stop = null;
        rz = startDirection();
        copy = 1;
        continue;
      }
      if (stop !== null) break;
      if (preconditioner) {
        // a multigrid with a shared finest level computes z·r and z·q in its last kernel
        let fused = false;
        if (ws.fusedDots) fused = ws.fusedDots.applyWithDots(r, z, this.q);
        else preconditioner.apply(r, z);
        if (flexible) {
          if (!fused) team.run(OP.dots, [nx, ny, ws.z, ws.r, ws.z, ws.q]);
          const zr = team.sum(0);
          const zq = team.sum(1);
          beta = (-alpha * zq) / rz;
          rz = zr;
        } else {
          team.run(OP.dots, [nx, ny, ws.r, ws.z, none, none]);
          const rzNew = team.sum(0);
          beta = rzNew / rz;
          rz = rzNew;
        }
      } else {
        beta = rr / rz;
        rz = rr;
      }
      copy = 0;
    }
    const trueNorm = trueResidual();
    if (restarts > 0) notes.push(`restarted ${restarts}x from the true residual`);
    return monitor.finish(this.method, stop, k, trueNorm, this.setupSeconds, { notes });
  }
}

/** The team and the ids of the CG workspaces and operator bands in its table; b and x copies in shared memory. */
interface SharedWorkspace {
  team: Team;
  /** nx, ny and the ids of diag, east, south: the first arguments of the operator kernels. */
  grid: number[];
  r: number;
  z: number;
  p: number;
  q: number;
  b: Float64Array;
  x: Float64Array;
  bId: number;
  xId: number;
  /** The preconditioner when it can leave z·r and z·q in the team's sums as it applies itself (see iterateShared). */
  fusedDots: DotFusingPreconditioner | null;
}

/** A preconditioner run by the same team that can compute z·r and z·q in its last kernel (AggregationMultigrid). */
interface DotFusingPreconditioner {
  applyWithDots(r: Float64Array, z: Float64Array, q: Float64Array): boolean;
}

function shareWorkspace(
  team: Team,
  op: StencilOperator,
  r: Float64Array,
  z: Float64Array,
  p: Float64Array,
  q: Float64Array,
): SharedWorkspace {
  const ids = {
    team,
    grid: [op.nx, op.ny, team.id(op.diag), team.id(op.east), team.id(op.south)],
    r: team.id(r),
    z: team.id(z),
    p: team.id(p),
    q: team.id(q),
  };
  const b = sharedAlloc.f64(op.n);
  const x = sharedAlloc.f64(op.n);
  return { ...ids, b, x, bId: team.id(b), xId: team.id(x), fusedDots: null };
}

/** Why CG stopped when a curvature p·Ap or r·z is not positive. */
function breakdownNote(pq: number, rz: number): string {
  return `curvature p·Ap = ${pq.toExponential(3)} or r·z = ${rz.toExponential(3)} is not positive: operator or preconditioner not positive definite`;
}
