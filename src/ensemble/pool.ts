/**
 * Realisations on a pool of worker threads: each worker loads the scenario and sets the ensemble up once, then takes
 * the next realisation index whenever it is free (so fast and slow realisations balance out). Records are returned
 * by index, so the order they finish in never matters. The main thread stays free to answer SIGINT/SIGTERM.
 */
import { Worker } from 'node:worker_threads';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { PiezomapError } from '../errors.js';
import type { SolverOverrides } from '../scenario/solverSettings.js';
import type { EnsembleWorkerMessage, EnsembleWorkerRequest } from './ensembleWorker.js';
import type { RealisationRecord } from './types.js';

const WORKER_URL = new URL('./ensembleWorker.js', import.meta.url);

/** True when the compiled worker script is there (it is not when running from TypeScript sources). */
export function ensembleWorkerAvailable(): boolean {
  return existsSync(fileURLToPath(WORKER_URL));
}

/** Solve the realisations `indices` on `workers` threads; `onRecord` is called as each finishes. */
export function runOnPool(
  scenario: string,
  overrides: SolverOverrides,
  indices: readonly number[],
  workers: number,
  onRecord: (record: RealisationRecord) => void,
): Promise<void> {
  return new Promise((resolve, reject) => {
    const pool: Worker[] = [];
    let next = 0;
    let finished = 0;
    let failed = false;
    const stop = (error: Error | null) => {
      if (failed) return;
      if (error) failed = true;
      for (const w of pool) void w.terminate();
      if (error) reject(error);
      else resolve();
    };
    if (indices.length === 0) return resolve();
    const count = Math.max(1, Math.min(workers, indices.length));
    for (let k = 0; k < count; k++) {
      // workerData must be an object: geotiff's web-worker shim reads workerData.mod when loaded off the main thread.
      const worker = new Worker(WORKER_URL, { workerData: {} });
      pool.push(worker);
      const give = () => {
        if (next < indices.length) worker.postMessage({ kind: 'run', index: indices[next++]! } satisfies EnsembleWorkerRequest);
      };
      worker.on('message', (message: EnsembleWorkerMessage) => {
        if (failed) return;
        if (message.kind === 'ready') give();
        else if (message.kind === 'record') {
          onRecord(message.record);
          finished++;
          if (finished === indices.length) stop(null);
          else give();
        } else {
          const error = new PiezomapError(message.code, message.message);
          if (message.stack) error.stack = message.stack;
          stop(error);
        }
      });
      worker.on('error', (thrown) => stop(new PiezomapError('internal', `an ensemble thread failed: ${thrown.message}`)));
      worker.on('exit', (code) => {
        if (finished < indices.length && !failed)
          stop(new PiezomapError('internal', `an ensemble thread stopped unexpectedly (exit code ${code})`));
      });
      worker.postMessage({ kind: 'init', scenario, overrides } satisfies EnsembleWorkerRequest);
    }
  });
}
