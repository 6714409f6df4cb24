import { PiezomapError } from '../errors.js';
import type { SolveOptions, SolveStats, StencilOperator, StopReason } from './types.js';

/**
 * Applies the stopping rule of SolveOptions — ||r|| <= absoluteTolerance + tolerance * ||b|| — and records
 * what every solver reports: residual history, progress callbacks, time limit, convergence factor.
 * One instance per solver, reused across solves (the history array is the only growing store, and only
 * when asked for).
 */
export class IterationMonitor {
  threshold = 0;
  bNorm = 0;
  initialResidual = 0;
  lastResidual = 0;
  history: number[] = [];
  private keepHistory = false;
  private started = 0;
  private deadline = Infinity;
  private onProgress: SolveOptions['onProgress'] = undefined;
  criterion = '';

  /** Starts a solve; returns the stop reason when the start vector already satisfies the rule. */
  begin(options: SolveOptions, bNorm: number, residualNorm: number): StopReason | null {
    validateOptions(options);
    this.started = performance.now();
    this.bNorm = bNorm;
    const abs = options.absoluteTolerance ?? 0;
    this.threshold = abs + options.tolerance * bNorm;
    this.criterion = `||b - A x|| <= ${abs} + ${options.tolerance} * ||b|| (2-norm)`;
    this.keepHistory = options.keepHistory === true;
    this.history = [];
    this.deadline = options.timeLimitSeconds !== undefined ? this.started + options.timeLimitSeconds * 1000 : Infinity;
    this.onProgress = options.onProgress;
    this.initialResidual = residualNorm;
    this.lastResidual = residualNorm;
    if (this.keepHistory) this.history.push(this.relative(residualNorm));
    return residualNorm <= this.threshold ? 'converged' : null;
  }

  relative(residualNorm: number): number {
    return this.bNorm > 0 ? residualNorm / this.bNorm : residualNorm;
  }

  /** Records iteration `k` with residual norm `rNorm`; returns a stop reason or null to go on. */
  step(k: number, rNorm: number): StopReason | null {
    this.lastResidual = rNorm;
    if (this.keepHistory) this.history.push(this.relative(rNorm));
    if (!Number.isFinite(rNorm)) return 'diverging';
    if (rNorm <= this.threshold) return 'converged';
    if ((k & 7) === 0) {
      if (performance.now() > this.deadline) return 'time-limit';
      if (this.onProgress && this.onProgress(k, this.relative(rNorm)) === false) return 'interrupted';
    }
    return null;
  }

  elapsedSeconds(): number {
    return (performance.now() - this.started) / 1000;
  }

  /** Assembles the statistics; `trueResidual` is ||b - A x|| computed from the final x. */
  finish(
    method: string,
    stopReason: StopReason,
    iterations: number,
    trueResidual: number,
    setupSeconds: number,
    extra: { spectralRadius?: number | null; notes?: string[] } = {},
  ): SolveStats {
    const relativeResidual = this.relative(trueResidual);
    let convergenceFactor: number | null = null;
    if (iterations > 0 && this.initialResidual > 0 && trueResidual > 0) {
      convergenceFactor = Math.pow(trueResidual / this.initialResidual, 1 / iterations);
    }
    return {
      method,
      stopReason,
      converged: stopReason === 'converged',
      iterations,
      relativeResidual,
      criterion: this.criterion,
      setupSeconds,
      solveSeconds: this.elapsedSeconds(),
      convergenceFactor,
      spectralRadius: extra.spectralRadius ?? null,
      history: this.history,
      notes: extra.notes ?? [],
    };
  }
}

function validateOptions(options: SolveOptions): void {
  if (!(options.tolerance >= 0) || !Number.isFinite(options.tolerance)) {
    throw new PiezomapError('usage', `solver tolerance must be a finite number >= 0, got ${options.tolerance}`, {
      key: 'solver.tolerance',
      hint: 'use e.g. 1e-8',
    });
  }
  if (!Number.isInteger(options.maxIterations) || options.maxIterations < 0) {
    throw new PiezomapError('usage', `solver maxIterations must be a whole number >= 0, got ${options.maxIterations}`, {
      key: 'solver.maxIterations',
    });
  }
}

/** Checks a vector pair against the operator before any work; a mismatch is a programming error. */
export function checkVectors(op: StencilOperator, b: Float64Array, x: Float64Array): void {
  if (b.length !== op.n || x.length !== op.n) {
    throw new PiezomapError('internal', `solver vectors have length ${b.length}/${x.length}, operator has ${op.n} cells`);
  }
}

/**
 * Checks the operator once at setup: positive finite diagonal everywhere (Jacobi-type divisions and
 * pivots need it) and no east coupling across the last column (the kernels rely on it).
 */
export function checkOperator(op: StencilOperator): void {
  const { nx, ny, diag, east, south } = op;
  const n = nx * ny;
  if (diag.length !== n || east.length !== n || south.length !== n || op.unknown.length !== n) {
    throw new PiezomapError('internal', `operator bands do not match the ${nx}x${ny} grid`);
  }
  for (let p = 0; p < n; p++) {
    const d = diag[p]!;
    if (!(d > 0) || !Number.isFinite(d)) {
      const row = Math.floor(p / nx);
      const col = p - row * nx;
      throw new PiezomapError('internal', `operator diagonal at cell row ${row}, col ${col} is ${d}; it must be positive`, {
        cell: { row, col },
        hint: 'a cell with no conductance to any neighbour should be inactive or fixed-head',
      });
    }
  }
  for (let i = 0; i < ny; i++) {
    if (east[i * nx + nx - 1] !== 0) {
      throw new PiezomapError('internal', `operator has an east coupling across the last column in row ${i}`);
    }
  }
  for (let p = n - nx; p < n; p++) {
    if (p >= 0 && south[p] !== 0) throw new PiezomapError('internal', 'operator has a south coupling below the last row');
  }
}
