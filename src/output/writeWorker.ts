/**
 * The worker-thread side of ./writePool.ts: one job at a time (./writeJobs.ts), answered with its bytes (GeoTIFF,
 * PNG), contour lines or GeoJSON, transferred where they can be, not copied. The pool starts before the scenario is
 * loaded, so the warm-up runs while the main thread loads, assembles and solves.
 */
import { parentPort } from 'node:worker_threads';
import { runWriteJob, warmUpWriteJobs } from './writeJobs.js';
import type { WriteRequest } from './writePool.js';

const port = parentPort;
if (!port) throw new Error('writeWorker.js runs only as a worker thread');

warmUpWriteJobs({ map: true });

port.on('message', ({ id, job }: WriteRequest) => {
  const { reply, transfer } = runWriteJob(id, job);
  port.postMessage(reply, transfer);
});
