/**
 * A solve whose solver runs in a worker thread, so that the main thread stays free to answer SIGINT/SIGTERM at once
 * (a synchronous solve in the main thread would hold the signal until it finished). Loading, assembly and analysis
 * stay in the main thread; the worker receives copies of the operator bands and the right-hand side and returns the
 * solution. Results are byte-identical to solveModel's: the same solver code runs on the same numbers.
 */
import { Worker } from 'node:worker_threads';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { PiezomapError, type ErrorCode, type ErrorDetail } from '../errors.js';
import { analyseSolution, assembleModel, withSolverOverrides, type RunOptions, type SolveResult } from '../pipeline.js';
import type { ModelInput } from '../scenario/types.js';
import type { SolveStats } from '../solvers/types.js';

export interface SolveRequest {
  nx: number;
  ny: number;
  diag: Float64Array;
  east: Float64Array;
  south: Float64Array;
  unknown: Uint8Array;
  rhs: Float64Array;
  method: string;
  relaxation?: number;
  tolerance: number;
  maxIterations: number;
}

export type WorkerMessage =
  | { kind: 'progress'; iteration: number; relativeResidual: number }
  | { kind: 'done'; x: Float64Array; stats: SolveStats; setupSeconds: number }
  | { kind: 'error'; code: ErrorCode; message: string; detail?: ErrorDetail; stack?: string | undefined };

const WORKER_URL = new URL('./solveWorker.js', import.meta.url);

/** True when the compiled worker script is there (it is not when running from TypeScript sources). */
export function workerAvailable(): boolean {
  return existsSync(fileURLToPath(WORKER_URL));
}

/** Like solveModel, with the solver in a worker thread. */
export async function solveModelInWorker(model: ModelInput, options: RunOptions = {}, timings: Record<string, number> = {}): Promise<SolveResult> {
  const system = assembleModel(model, options, timings);
  const op = system.operator;
  const tolerance = options.tolerance ?? model.solver.tolerance;
  const maxIterations = options.maxIterations ?? model.solver.maxIterations;
  const relaxation = options.relaxation ?? model.solver.relaxation;
  const request: SolveRequest = {
    nx: op.nx,
    ny: op.ny,
    diag: op.diag,
    east: op.east,
    south: op.south,
    unknown: op.unknown,
    rhs: system.rhs,
    method: options.method ?? model.solver.method,
    tolerance,
    maxIterations,
    ...(relaxation === undefined ? {} : { relaxation }),
  };
  const t = performance.now();
  const { x, stats, setupSeconds } = await runWorker(request, (iteration, relativeResidual) =>
    options.onProgress?.({ stage: 'solve', iteration, relativeResidual, tolerance, maxIterations }),
  );
  stats.setupSeconds = setupSeconds;
  timings.solve = (performance.now() - t) / 1000;
  return analyseSolution(withSolverOverrides(model, options), system, x, stats, timings);
}

function runWorker(
  request: SolveRequest,
  onProgress: (iteration: number, relativeResidual: number) => void,
): Promise<{ x: Float64Array; stats: SolveStats; setupSeconds: number }> {
  return new Promise((resolve, reject) => {
    // The arrays are copied into the worker (structured clone): the main thread keeps its system for the analysis.
    const worker = new Worker(WORKER_URL);
    let settled = false;
    const finish = (action: () => void) => {
      if (settled) return;
      settled = true;
      action();
      void worker.terminate();
    };
    worker.on('message', (message: WorkerMessage) => {
      if (message.kind === 'progress') onProgress(message.iteration, message.relativeResidual);
      else if (message.kind === 'done') finish(() => resolve({ x: message.x, stats: message.stats, setupSeconds: message.setupSeconds }));
      else {
        const error = new PiezomapError(message.code, message.message, message.detail ?? {});
        if (message.stack) error.stack = message.stack;
        finish(() => reject(error));
      }
    });
    worker.on('error', (thrown) => finish(() => reject(new PiezomapError('internal', `the solver thread failed: ${thrown.message}`))));
    worker.on('exit', (code) => finish(() => reject(new PiezomapError('internal', `the solver thread stopped unexpectedly (exit code ${code})`))));
    worker.postMessage(request);
  });
}
