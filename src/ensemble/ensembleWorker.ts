/**
 * The worker-thread side of ./pool.ts: loads the scenario once, sets the ensemble up (field generator, kriging
 * system), then solves the realisations it is sent one at a time and sends each record back (its arrays
 * transferred, not copied). The same code as an inline run (./realisation.ts), so results do not depend on where
 * or in which order realisations are computed.
 */
import { parentPort } from 'node:worker_threads';
import { PiezomapError, describeThrown } from '../errors.js';
import { loadScenario } from '../scenario/load.js';
import { resolveVariants } from '../compare/run.js';
import type { SolverOverrides } from '../scenario/solverSettings.js';
import { prepareEnsemble, solveRealisation, type EnsembleContext } from './realisation.js';
import type { RealisationRecord } from './types.js';

export type EnsembleWorkerRequest = { kind: 'init'; scenario: string; overrides: SolverOverrides } | { kind: 'run'; index: number };
export type EnsembleWorkerMessage =
  | { kind: 'ready' }
  | { kind: 'record'; record: RealisationRecord }
  | { kind: 'error'; code: PiezomapError['code']; message: string; stack?: string | undefined };

const port = parentPort;
if (!port) throw new Error('ensembleWorker.js runs only as a worker thread');

let context: Promise<EnsembleContext> | null = null;

port.on('message', (request: EnsembleWorkerRequest) => {
  const send = (message: EnsembleWorkerMessage, transfer: ArrayBuffer[] = []) => port.postMessage(message, transfer);
  const fail = (thrown: unknown) => {
    if (thrown instanceof PiezomapError) send({ kind: 'error', code: thrown.code, message: thrown.message });
    else
      send({ kind: 'error', code: 'internal', message: describeThrown(thrown), stack: thrown instanceof Error ? thrown.stack : undefined });
  };
  if (request.kind === 'init') {
    context = (async () => {
      const { model, raw } = await loadScenario(request.scenario);
      return prepareEnsemble(model, await resolveVariants(model, raw), request.overrides);
    })();
    context.then(() => send({ kind: 'ready' }), fail);
    return;
  }
  if (!context) return fail(new PiezomapError('internal', 'ensemble worker: "run" before "init"'));
  context.then((ctx) => {
    try {
      const record = solveRealisation(ctx, request.index);
      const transfer: ArrayBuffer[] = [];
      for (const run of record.runs) {
        if (run.head) transfer.push(run.head.buffer as ArrayBuffer);
        if (run.drawdown) transfer.push(run.drawdown.buffer as ArrayBuffer);
        if (run.capture) transfer.push(run.capture.buffer as ArrayBuffer);
      }
      send({ kind: 'record', record }, transfer);
    } catch (thrown) {
      fail(thrown);
    }
  }, fail);
});
