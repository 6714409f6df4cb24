/**
 * The worker-thread side of solveInWorker.ts: rebuild the operator from its bands, set up the solver, solve, and
 * send back the solution (transferred, not copied) with the statistics. Progress goes back at most every 0.2 s.
 * The same solver code runs here as in the main thread, so the solution is bit-for-bit the same.
 */
import { parentPort } from 'node:worker_threads';
import { GridOperator } from '../discretisation/operator.js';
import { PiezomapError, describeThrown } from '../errors.js';
import { chooseAutoMethod, createSolver } from '../solvers/registry.js';
import type { SolveRequest, WorkerMessage } from './solveInWorker.js';

const port = parentPort;
if (!port) throw new Error('solveWorker.js runs only as a worker thread');

port.once('message', (request: SolveRequest) => {
  const send = (message: WorkerMessage, transfer: ArrayBuffer[] = []) => port.postMessage(message, transfer);
  try {
    const op = new GridOperator(request.nx, request.ny, request.diag, request.east, request.south, request.unknown);
    const method = request.method === 'auto' ? chooseAutoMethod(op) : request.method;
    const t0 = performance.now();
    const solver = createSolver(method, op, request.relaxation === undefined ? {} : { relaxation: request.relaxation });
    const setupSeconds = (performance.now() - t0) / 1000;
    const x = new Float64Array(op.n);
    let lastPost = 0;
    const stats = solver.solve(request.rhs, x, {
      tolerance: request.tolerance,
      maxIterations: request.maxIterations,
      keepHistory: true,
      onProgress: (iteration, relativeResidual) => {
        const t = performance.now();
        if (t - lastPost >= 200) {
          lastPost = t;
          send({ kind: 'progress', iteration, relativeResidual });
        }
      },
    });
    send({ kind: 'done', x, stats, setupSeconds }, [x.buffer as ArrayBuffer]);
  } catch (thrown) {
    if (thrown instanceof PiezomapError) send({ kind: 'error', code: thrown.code, message: thrown.message, detail: thrown.detail });
    else send({ kind: 'error', code: 'internal', message: describeThrown(thrown), stack: thrown instanceof Error ? thrown.stack : undefined });
  }
});
