/**
 * End rasters with the bands of seeds (rasters.ts, SEED_BANDS) split between worker threads. Each worker receives
 * a copy of the tracking input, builds the same field, tracks its bands with a fresh FaceCache per band and
 * sends the band rasters back (transferred). The result is the same, value for value, as `endRasters` in one
 * thread, whatever the number of workers. Falls back to one thread when the compiled worker script is not there
 * (running from TypeScript sources) or one worker is asked for.
 */
import { Worker } from 'node:worker_threads';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { PiezomapError, describeThrown } from '../../errors.js';
import { buildTrackingField, type TrackingInput } from './field.js';
import { bandRows, endRasters, SEED_BANDS, type EndRasterOptions, type EndRasters } from './rasters.js';

export interface BandRequest {
  input: TrackingInput;
  options: EndRasterOptions;
  bands: number[];
}

export type BandMessage =
  | { kind: 'band'; band: number; label: Int32Array; time: Float64Array; stalled: number }
  | { kind: 'done' }
  | { kind: 'error'; message: string };

const WORKER_URL = new URL('./trackingWorker.js', import.meta.url);

/** True when the compiled worker script is there. */
export function trackingWorkersAvailable(): boolean {
  return existsSync(fileURLToPath(WORKER_URL));
}

export async function endRastersInWorkers(input: TrackingInput, options: EndRasterOptions = {}, workers = 2): Promise<EndRasters> {
  const count = Math.min(Math.max(1, Math.floor(workers)), SEED_BANDS);
  if (count === 1 || !trackingWorkersAvailable()) return endRasters(buildTrackingField(input), options);
  buildTrackingField(input); // check the input here, so that bad input fails in this thread with its message
  const { nx, ny } = input;
  const out: EndRasters = { label: new Int32Array(nx * ny), time: new Float64Array(nx * ny), stalled: 0 };
  const jobs: Promise<void>[] = [];
  for (let w = 0; w < count; w++) {
    const bands: number[] = [];
    for (let k = w; k < SEED_BANDS; k += count) bands.push(k);
    jobs.push(runWorker({ input, options, bands }, out));
  }
  await Promise.all(jobs);
  return out;
}

function runWorker(request: BandRequest, out: EndRasters): Promise<void> {
  return new Promise((resolve, reject) => {
    const worker = new Worker(WORKER_URL);
    let settled = false;
    const finish = (error?: Error) => {
      if (settled) return;
      settled = true;
      void worker.terminate();
      if (error) reject(error);
      else resolve();
    };
    worker.on('message', (message: BandMessage) => {
      if (message.kind === 'band') {
        const [rowStart] = bandRows(request.input.ny, message.band);
        out.label.set(message.label, rowStart * request.input.nx);
        out.time.set(message.time, rowStart * request.input.nx);
        out.stalled += message.stalled;
      } else if (message.kind === 'done') finish();
      else finish(new PiezomapError('internal', `tracking worker failed: ${message.message}`));
    });
    worker.on('error', (error) => finish(new PiezomapError('internal', `tracking worker failed: ${describeThrown(error)}`)));
    worker.on('exit', (code) =>
      finish(code === 0 ? undefined : new PiezomapError('internal', `tracking worker stopped with code ${code}`)),
    );
    worker.postMessage(request);
  });
}
