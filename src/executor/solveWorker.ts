/**
 * The worker-thread side of ./worker.ts: one solver session. 'open' rebuilds the operator from its bands and sets
 * the solver up; each 'solve' solves one right-hand side and sends the solution back (transferred, not copied)
 * with the statistics; 'diagonal' replaces the diagonal and sets up again; 'prepare' (no answer) starts the helper
 * threads a session of that size will want, before its operator arrives. Progress goes back at most every 0.2 s.
 * The same code as the inline executor runs here (./inline.ts), so the solution is bit-for-bit the same.
 */
import { parentPort } from 'node:worker_threads';
import { PiezomapError, describeThrown } from '../errors.js';
import { InlineSession, prestartTeam } from './inline.js';
import { isShared } from './shared.js';
import type { Team } from '../solvers/team.js';
import { GridOperator } from '../solvers/operator.js';
import type { WorkerMessage, WorkerRequest } from './worker.js';

const port = parentPort;
if (!port) throw new Error('solveWorker.js runs only as a worker thread');

let session: InlineSession | null = null;
/** Helper threads started on a 'prepare' hint, handed to the next session (which closes them if it needs others). */
let early: Team | null = null;

port.on('message', (request: WorkerRequest) => {
  const send = (message: WorkerMessage, transfer: ArrayBuffer[] = []) => port.postMessage(message, transfer);
  if (request.kind === 'prepare') {
    // a hint with no answer: on failure the session starts its helpers itself and reports what goes wrong then
    try {
      void early?.close();
      early = prestartTeam(request.cells, request.choice);
    } catch {
      early = null;
    }
    return;
  }
  try {
    if (request.kind === 'open') {
      const op = new GridOperator(request.nx, request.ny, request.diag, request.east, request.south, request.unknown);
      const team = early;
      early = null;
      session = new InlineSession(op, request.choice, team);
      send({ kind: 'ready', method: session.method, setupSeconds: session.setupSeconds });
    } else if (!session) {
      throw new PiezomapError('internal', `solver thread: "${request.kind}" before "open"`);
    } else if (request.kind === 'operator') {
      session.setOperatorNow({ diag: request.diag, east: request.east, south: request.south }, request.rebuild);
      send({ kind: 'ready', method: session.method, setupSeconds: session.setupSeconds });
    } else if (request.kind === 'diagonal') {
      session.setDiagonalNow(request.diag);
      send({ kind: 'ready', method: session.method, setupSeconds: session.setupSeconds });
    } else {
      let lastPost = 0;
      // x in shared memory (./worker.ts puts it there) is solved in place and shared back, not copied
      const inPlace = isShared(request.x);
      const { x, stats } = session.solveNow(
        {
          rhs: request.rhs,
          x: request.x,
          tolerance: request.tolerance,
          maxIterations: request.maxIterations,
          onProgress: (iteration, relativeResidual) => {
            const t = performance.now();
            if (t - lastPost >= 200) {
              lastPost = t;
              send({ kind: 'progress', iteration, relativeResidual });
            }
          },
        },
        inPlace,
      );
      send({ kind: 'done', x, stats }, inPlace ? [] : [x.buffer as ArrayBuffer]);
    }
  } catch (thrown) {
    if (thrown instanceof PiezomapError) send({ kind: 'error', code: thrown.code, message: thrown.message, detail: thrown.detail });
    else
      send({ kind: 'error', code: 'internal', message: describeThrown(thrown), stack: thrown instanceof Error ? thrown.stack : undefined });
  }
});
