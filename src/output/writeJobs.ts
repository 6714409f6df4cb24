/**
 * The jobs of the write pool (./writePool.ts), as one function: run in a worker thread (./writeWorker.ts) or in
 * the main thread's own slot of the pool. The code is the one the one-after-another writer runs, so the bytes are
 * the same wherever a job runs.
 */
import { PiezomapError, describeThrown } from '../errors.js';
import { encodeFloat32GeoTiff, encodeFloat32GeoTiffTileRows } from '../raster/write.js';
import { traceContourLevels } from '../analysis/contours.js';
import { darcyFlux } from '../analysis/flux.js';
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
    if (job.kind === 'geotiffTiles') {
      const tiles = encodeFloat32GeoTiffTileRows(job.grid, job.values, job.options, job.first, job.end);
      return { reply: { id, ok: true, tiles }, transfer: [tiles.bytes.buffer as ArrayBuffer] };
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
 * Every job once on a small synthetic field (contours, GeoTIFF, the Darcy flux the products start from, and with
 * `map` the contour GeoJSON in WGS 84 and a small map rasterised to PNG): the engine then compiles their hot loops,
 * and the map renderer loads its fonts and proj4 its definitions, before the first real job, which otherwise runs
 * them largely unoptimised in each thread that runs it. Nothing of it is kept; a failure costs only speed.
 * The warm-up map is small (600 px wide, 40 x 30 cells): in a fresh worker it cost 0.27–0.30 s of CPU with the
 * rest of the warm-up, against 0.46–0.48 s for a full-size one, and the first 1024² map after it took the same CPU
 * time (0.28–0.30 s, against 0.34–0.35 s with no warm-up). The warm-up runs while the solve does, on the same cores.
 */
export function warmUpWriteJobs(options: { map?: boolean } = {}): void {
  try {
    const nx = 120;
    const ny = 90;
    const grid = { nx, ny, transform: [500000, 10, 0, 4100900, 0, -10] as const, crs: { epsg: 32633, geographic: false, geoKeys: {} } };
    const values = new Float64Array(nx * ny);
    for (let p = 0; p < values.length; p++) values[p] = 50 + 5 * Math.sin((p % nx) / 17) + 3 * Math.cos(Math.floor(p / nx) / 11);
    values[nx + 1] = Number.NaN;
    const levels: number[] = [];
    for (let level = 43; level <= 57; level += 0.5) levels.push(level);
    const contours = { levels: traceContourLevels(grid, values, levels), interval: 0.5, note: null };
    encodeFloat32GeoTiff(grid, values, { nodata: -9999, compressionLevel: 1 });
    const conductance = new Float64Array(nx * ny).fill(1);
    const flux = darcyFlux({ grid, head: values, eastConductance: conductance, southConductance: conductance, thickness: 10 });
    if (!options.map) return;
    contourFilesOf(grid, contours, 'head', 'm', {}, '');
    // a small drawing: the same code paths, a fifth of the pixels of a real map to rasterise
    const small = { nx: 40, ny: 30, transform: [500000, 30, 0, 4100900, 0, -30] as const, crs: grid.crs };
    const pick = (a: Float64Array) => Float64Array.from({ length: 40 * 30 }, (_, q) => a[Math.floor(q / 40) * 3 * nx + (q % 40) * 3]!);
    const smallCells = new Uint8Array(40 * 30);
    for (let i = 0; i < 30; i++) smallCells[i * 40] = 1;
    renderMapPng(
      {
        grid: small,
        values: pick(values),
        quantity: 'head',
        units: { length: 'm', time: 'd' },
        title: 'warm-up',
        caution: 'warm-up',
        contours,
        cellLayers: [{ legend: 'warm-up', cells: smallCells }],
        wells: [{ id: 'W', x: 500600, y: 4100450, rate: -1 }],
        flux: { qx: pick(flux.qx), qy: pick(flux.qy) },
      },
      { width: 600, maxMapHeight: 240 },
    );
  } catch {
    // the real job reports its own failure
  }
}
