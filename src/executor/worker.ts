/**
 * The executor that runs solver sessions in worker threads, so that the main thread stays free to answer SIGINT and
 * SIGTERM at once (a synchronous solve in the main thread would hold the signal until it finished). Each session is
 * one worker holding the operator and its solver set-up (e.g. the multigrid hierarchy) for as long as the session is
 * open: variants and inner solves of outer iterations reuse it. The operator's bands are shared with the worker
 * through shared memory (./shared.ts): the assembly allocates them there, so no copy is made; the worker reads them
 * only while it answers a request, and the main thread waits for the answer, so they are never used by both at once. The worker runs the same solver code
 * on the same numbers as the inline executor, so results are bit-for-bit the same.
 */
import { Worker } from 'node:worker_threads';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { PiezomapError, type ErrorCode, type ErrorDetail } from '../errors.js';
import type { SolveStats, StencilOperator } from '../solvers/types.js';
import type { Executor, LinearAnswer, LinearSolve, OperatorBands, SolverChoice, SolverSession } from './types.js';
import { shared, sharedFloat64Array } from './shared.js';

/** Main thread to worker. */
export type WorkerRequest =
  | {
      kind: 'open';
      nx: number;
      ny: number;
      diag: Float64Array;
      east: Float64Array;
      south: Float64Array;
      unknown: Uint8Array;
      choice: SolverChoice;
    }
  | { kind: 'prepare'; cells: number; choice: SolverChoice }
  | { kind: 'solve'; rhs: Float64Array; x: Float64Array; tolerance: number; maxIterations: number }
  | { kind: 'diagonal'; diag: Float64Array }
  | { kind: 'operator'; diag: Float64Array; east: Float64Array; south: Float64Array; rebuild: boolean };

/** Worker to main thread. */
export type WorkerMessage =
  | { kind: 'ready'; method: string; setupSeconds: number }
  | { kind: 'progress'; iteration: number; relativeResidual: number }
  | { kind: 'done'; x: Float64Array; stats: SolveStats }
  | { kind: 'error'; code: ErrorCode; message: string; detail?: ErrorDetail; stack?: string | undefined };

const WORKER_URL = new URL('./solveWorker.js', import.meta.url);

/** True when the compiled worker script is there (it is not when running from TypeScript sources). */
export function workerAvailable(): boolean {
  return existsSync(fileURLToPath(WORKER_URL));
}

class WorkerSession implements SolverSession {
  method = '';
  setupSeconds = 0;
  private pending: { resolve: (m: WorkerMessage) => void; reject: (e: Error) => void; onProgress?: LinearSolve['onProgress'] } | null =
    null;
  private failure: Error | null = null;

  constructor(private readonly worker: Worker) {
    worker.on('message', (message: WorkerMessage) => {
      const pending = this.pending;
      if (!pending) return;
      if (message.kind === 'progress') {
        pending.onProgress?.(message.iteration, message.relativeResidual);
        return;
      }
      this.pending = null;
      if (message.kind === 'error') {
        const error = new PiezomapError(message.code, message.message, message.detail ?? {});
        if (message.stack) error.stack = message.stack;
        pending.reject(error);
      } else pending.resolve(message);
    });
    const fail = (error: Error) => {
      this.failure ??= error;
      const pending = this.pending;
      this.pending = null;
      pending?.reject(error);
    };
    worker.on('error', (thrown) => fail(new PiezomapError('internal', `the solver thread failed: ${thrown.message}`)));
    worker.on('exit', (code) => fail(new PiezomapError('internal', `the solver thread stopped unexpectedly (exit code ${code})`)));
  }

  /** Send a request and wait for its answer (one at a time). Arrays are copied (structured clone) unless in shared memory. */
  request(message: WorkerRequest, onProgress?: LinearSolve['onProgress']): Promise<WorkerMessage> {
    if (this.failure) return Promise.reject(this.failure);
    return new Promise((resolve, reject) => {
      this.pending = { resolve, reject, ...(onProgress ? { onProgress } : {}) };
      this.worker.postMessage(message);
    });
  }

  async solve(request: LinearSolve): Promise<LinearAnswer> {
    const { tolerance, maxIterations } = request;
    // Both in shared memory, so that nothing is cloned: the right-hand side as it is (the assembly puts it there) and
    // the start a copy there, which the thread solves in place and answers with (the caller's own x is kept).
    const rhs = shared(request.rhs);
    const x = sharedFloat64Array(request.x.length);
    x.set(request.x);
    const answer = await this.request({ kind: 'solve', rhs, x, tolerance, maxIterations }, request.onProgress);
    if (answer.kind !== 'done') throw new PiezomapError('internal', `the solver thread answered "${answer.kind}" to a solve`);
    return { x: answer.x, stats: answer.stats };
  }

  async setDiagonal(diag: Float64Array): Promise<void> {
    const answer = await this.request({ kind: 'diagonal', diag });
    if (answer.kind === 'ready') this.setupSeconds = answer.setupSeconds;
  }

  async setOperator(bands: OperatorBands, rebuild: boolean): Promise<void> {
    const answer = await this.request({ kind: 'operator', diag: bands.diag, east: bands.east, south: bands.south, rebuild });
    if (answer.kind === 'ready') this.setupSeconds = answer.setupSeconds;
  }

  /** A message that has no answer (a hint); ignored once the thread has failed. */
  hint(message: WorkerRequest): void {
    if (!this.failure) this.worker.postMessage(message);
  }

  /** Lets the thread keep the process alive while it has work (a thread started ahead of its session does not). */
  hold(): void {
    this.worker.ref();
  }

  close(): void {
    this.failure ??= new PiezomapError('internal', 'the solver session is closed');
    void this.worker.terminate();
  }
}

/** Open a session on `session`'s thread: the operator's bands go there in shared memory, then the solver is set up. */
async function openOn(session: WorkerSession, operator: StencilOperator, choice: SolverChoice): Promise<SolverSession> {
  session.hold();
  const { nx, ny } = operator;
  // shared, not cloned: the bands in shared memory as they are, others copied there once
  const [diag, east, south, unknown] = [shared(operator.diag), shared(operator.east), shared(operator.south), shared(operator.unknown)];
  try {
    const ready = await session.request({ kind: 'open', nx, ny, diag, east, south, unknown, choice });
    if (ready.kind === 'ready') {
      session.method = ready.method;
      session.setupSeconds = ready.setupSeconds;
    }
  } catch (error) {
    session.close();
    throw error;
  }
  return session;
}

export const workerExecutor: Executor = {
  open: (operator, choice) => openOn(new WorkerSession(new Worker(WORKER_URL)), operator, choice),
};

/**
 * A worker executor whose first session's thread starts now, so that the thread loads its modules while the caller
 * reads its input, and starts its helper threads (`prepare`) while the caller assembles; later sessions start their
 * own thread as `workerExecutor` does. The thread waiting for its session does not keep the process alive; `close`
 * ends it when no session took it (e.g. the input was refused).
 */
export function startWorkerExecutor(): Executor & { close(): void } {
  const worker = new Worker(WORKER_URL);
  worker.unref();
  let waiting: WorkerSession | null = new WorkerSession(worker);
  return {
    prepare(cells, choice) {
      waiting?.hint({ kind: 'prepare', cells, choice });
    },
    open(operator, choice) {
      const session = waiting ?? new WorkerSession(new Worker(WORKER_URL));
      waiting = null;
      return openOn(session, operator, choice);
    },
    close() {
      waiting?.close();
      waiting = null;
    },
  };
}
