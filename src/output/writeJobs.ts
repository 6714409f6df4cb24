/**
 * The jobs of the write pool (./writePool.ts), as one function: run in a worker thread (./writeWorker.ts) or in
 * the main thread's own slot of the pool. The code is the one the one-after-another writer runs, so the bytes are
 * the same wherever a job runs.
 */
import { PiezomapError, describeThrown } from '../errors.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
import { traceContourLevels } from '../analysis/contours.js';
import { renderMapPng, trackingOverlay, type MapInput } from '../report/index.js';
import { contourFilesOf } from './contourFiles.js';
import type { WriteJob, WriteReply } from './writePool.js';

/** The answer to one job, with the buffers that can be transferred (not copied) to the main thread. */
export function runWriteJob(id: number, job: WriteJob): { reply: WriteReply; transfer: ArrayBuffer[] } {
  try {
    if (job.kind === 'geotiff') {
      const bytes = encodeFloat32GeoTiff(job.grid, job.values, job.options);
      return { reply: { id, ok: true, bytes }, transfer: [bytes.buffer as ArrayBuffer] };
    }
    if (job.kind === 'contours') {
      const levels = traceContourLevels(job.grid, job.values, job.levels);
      const transfer = [...new Set(levels.flatMap((l) => l.lines.map((line) => line.buffer as ArrayBuffer)))];
      return { reply: { id, ok: true, levels }, transfer };
    }
    if (job.kind === 'contourFiles') {
      const { files, warnings } = contourFilesOf(job.grid, job.contours, job.quantity, job.units, job.options, job.prefix);
      return { reply: { id, ok: true, files, warnings }, transfer: [] };
    }
    const { tracking, ...rest } = job.input;
    const input: MapInput = tracking ? { ...rest, overlays: [trackingOverlay(tracking.run, tracking.units)] } : rest;
    const bytes = renderMapPng(input, job.options).png;
    return { reply: { id, ok: true, bytes }, transfer: [bytes.buffer as ArrayBuffer] };
  } catch (thrown) {
    const error =
      thrown instanceof PiezomapError
        ? thrown
        : new PiezomapError('internal', `${job.kind} for the result files: ${describeThrown(thrown)}`);
    return { reply: { id, ok: false, code: error.code, message: error.message, detail: error.detail, stack: error.stack }, transfer: [] };
  }
}

/**
 * Contour tracing and GeoTIFF encoding once on a small synthetic field: the engine then compiles their hot loops
 * before the first real job, which otherwise runs them largely unoptimised in a fresh worker (measured at 1024²: the
 * contour jobs about 60 ms of CPU faster for about 40 ms of warm-up). Nothing of it is kept; a failure costs only speed.
 */
export function warmUpWriteJobs(): void {
  try {
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
  } catch {
    // the real job reports its own failure
  }
}
