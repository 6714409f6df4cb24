/**
 * The worker-thread side of ./writePool.ts: one job at a time, answered with its bytes (GeoTIFF, PNG) or contour
 * lines, transferred, not copied. The code is the one the one-after-another writer runs, so the bytes are the same.
 */
import { parentPort } from 'node:worker_threads';
import { PiezomapError, describeThrown } from '../errors.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
import { traceContourLevels } from '../analysis/contours.js';
import { renderMapPng, trackingOverlay, type MapInput } from '../report/index.js';
import { contourFilesOf } from './contourFiles.js';
import type { WriteReply, WriteRequest } from './writePool.js';

const port = parentPort;
if (!port) throw new Error('writeWorker.js runs only as a worker thread');

/**
 * Contour tracing and GeoTIFF encoding once on a small synthetic field, at start: the engine then compiles their hot
 * loops before the first real job, which otherwise runs them largely unoptimised in every worker (measured at 1024²:
 * the contour jobs about 60 ms of CPU faster for about 40 ms of warm-up per worker). The pool starts before the
 * scenario is loaded, so this runs while the main thread loads, assembles and solves. Nothing of it is kept.
 */
function warmUp(): void {
  const nx = 120;
  const ny = 90;
  const grid = { nx, ny, transform: [0, 10, 0, 900, 0, -10] as const, crs: null };
  const values = new Float64Array(nx * ny);
  for (let p = 0; p < values.length; p++) values[p] = 50 + 5 * Math.sin((p % nx) / 17) + 3 * Math.cos(Math.floor(p / nx) / 11);
  values[nx + 1] = Number.NaN;
  const levels: number[] = [];
  for (let level = 43; level <= 57; level += 0.5) levels.push(level);
  traceContourLevels(grid, values, levels);
  encodeFloat32GeoTiff(grid, values, { nodata: -9999, compressionLevel: 1 });
}

try {
  warmUp();
} catch {
  // a failed warm-up costs only speed; the real job reports its own failure
}

port.on('message', ({ id, job }: WriteRequest) => {
  try {
    if (job.kind === 'geotiff') {
      const bytes = encodeFloat32GeoTiff(job.grid, job.values, job.options);
      port.postMessage({ id, ok: true, bytes } satisfies WriteReply, [bytes.buffer as ArrayBuffer]);
    } else if (job.kind === 'contours') {
      const levels = traceContourLevels(job.grid, job.values, job.levels);
      const transfer = [...new Set(levels.flatMap((l) => l.lines.map((line) => line.buffer as ArrayBuffer)))];
      port.postMessage({ id, ok: true, levels } satisfies WriteReply, transfer);
    } else if (job.kind === 'contourFiles') {
      const { files, warnings } = contourFilesOf(job.grid, job.contours, job.quantity, job.units, job.options, job.prefix);
      port.postMessage({ id, ok: true, files, warnings } satisfies WriteReply);
    } else {
      const { tracking, ...rest } = job.input;
      const input: MapInput = tracking ? { ...rest, overlays: [trackingOverlay(tracking.run, tracking.units)] } : rest;
      const bytes = renderMapPng(input, job.options).png;
      port.postMessage({ id, ok: true, bytes } satisfies WriteReply, [bytes.buffer as ArrayBuffer]);
    }
  } catch (thrown) {
    const error =
      thrown instanceof PiezomapError
        ? thrown
        : new PiezomapError('internal', `${job.kind} in a result-writing thread: ${describeThrown(thrown)}`);
    port.postMessage({
      id,
      ok: false,
      code: error.code,
      message: error.message,
      detail: error.detail,
      stack: error.stack,
    } satisfies WriteReply);
  }
});
