/**
 * The result files of one solve, as bytes, and writing them into the result folder: `head.tif` only for a sound
 * result (else `head-not-converged.tif`), budget and convergence tables, the products (contours, flux rasters,
 * map), the HTML report and summary.json (last).
 */
import { resultProblem, type SolveResult } from '../analysis/result.js';
import { CAUTION } from '../caution.js';
import { encodeFloat32GeoTiff, encodeFloat32GeoTiffAsync } from '../raster/write.js';
import { settleFiles, type LaterFile } from './pending.js';
import type { WritePool } from './writePool.js';
import { runWriteJob, warmUpWriteJobs } from './writeJobs.js';
import { renderReportHtml, type ReportInputs } from '../report/index.js';
import { VERSION } from '../version.js';
import { resultRasterOptions } from './rasterOptions.js';
import {
  exchangeRastersWith,
  reportInputs,
  reportRun,
  solveProductsOnPool,
  solveProductsWith,
  type PendingFile,
  type ProductOptions,
  type RasterEncoder,
  type RenderedMap,
} from './products.js';
import { prepareResultFolder, releaseResultFolder, RESULT_MARKER, writeResultFiles, type OutputFile } from './resultFolder.js';
import { budgetCsv, buildSummary, convergenceCsv, outerConvergenceCsv, type SummaryJson } from './summary.js';
import { trackingFilesWith } from './tracking.js';
import { headsForOutput, saturatedThicknessField } from '../discretisation/aquifer.js';

export const REPORT_FILE = 'report.html';

/** The files of one solve, with the rendered maps kept for the report. */
export interface ResultBundle {
  files: OutputFile[];
  maps: RenderedMap[];
}

/**
 * Result files of one solve, as bytes: `head.tif` only for a sound result (else `head-not-converged.tif`),
 * budget and convergence tables, and (unless `maps: false`) contours, flux rasters and the head map.
 * Product warnings are appended to `result.warnings`. `prefix` places them in a sub-folder, e.g. `NAME/`.
 */
export function resultBundle(result: SolveResult, prefix = '', options: ProductOptions = {}): ResultBundle {
  return bundleWith(result, prefix, options, encodeFloat32GeoTiff);
}

function bundleWith<B extends Uint8Array | Promise<Uint8Array>>(
  result: SolveResult,
  prefix: string,
  options: ProductOptions,
  encode: RasterEncoder<B>,
): { files: Array<PendingFile<B>>; maps: RenderedMap[] } {
  const files = tableFiles(result, prefix, encode);
  if (resultProblem(result) !== null) return { files, maps: [] };
  files.push(...exchangeRastersWith(result, prefix, encode));
  const products = solveProductsWith(result, options, prefix, encode);
  for (const w of products.warnings) if (!result.warnings.includes(w)) result.warnings.push(w);
  files.push(...products.files);
  // Capture zones, pathlines and their rasters are data (written with or without maps).
  const tracking = trackingFilesWith(result, prefix, options, encode);
  for (const w of tracking.warnings) if (!result.warnings.includes(w)) result.warnings.push(w);
  files.push(...tracking.files);
  return { files, maps: products.maps };
}

/** The head raster (head.tif, or head-not-converged.tif), budget and convergence tables, and the saturated thickness of a water table. */
function tableFiles<B extends Uint8Array | Promise<Uint8Array>>(
  result: SolveResult,
  prefix: string,
  encode: RasterEncoder<B>,
): Array<PendingFile<B>> {
  const sound = resultProblem(result) === null;
  const files: Array<PendingFile<B>> = [];
  const description = `piezomap ${VERSION} head (${result.model.units.length}): ${result.model.title}. ${CAUTION}`;
  const table = result.system.waterTable;
  // Dry cells of a water-table aquifer are nodata in head.tif (physics.md).
  const headBytes = encode(result.model.grid, headsForOutput(table, result.head), resultRasterOptions(description));
  files.push({ name: prefix + (sound ? 'head.tif' : 'head-not-converged.tif'), bytes: headBytes });
  files.push({ name: prefix + 'budget.csv', bytes: budgetCsv(result.budget) });
  const outer = result.outer.stopReason === 'linear' ? null : result.outer;
  files.push({ name: prefix + 'convergence.csv', bytes: outer ? outerConvergenceCsv(outer) : convergenceCsv(result.stats.history) });
  if (table !== null) {
    const thicknessDescription = `piezomap ${VERSION} saturated thickness (${result.model.units.length}; 0 = dry): ${result.model.title}. ${CAUTION}`;
    const bytes = encode(result.model.grid, saturatedThicknessField(table, result.head), resultRasterOptions(thicknessDescription));
    files.push({ name: prefix + (sound ? 'saturated-thickness.tif' : 'saturated-thickness-not-converged.tif'), bytes });
  }
  return files;
}

/**
 * As resultBundle, the same files, with the rasters compressed on the thread pool while the contours and the map
 * are computed in this thread (resolves once every file is complete).
 */
export async function resultBundleConcurrent(result: SolveResult, prefix = '', options: ProductOptions = {}): Promise<ResultBundle> {
  const bundle = bundleWith(result, prefix, options, encodeFloat32GeoTiffAsync);
  // all at once, so that no rejection waits unobserved behind another file
  const bytes = await Promise.all(bundle.files.map((f) => f.bytes));
  return { files: bundle.files.map((f, i) => ({ name: f.name, bytes: bytes[i]! })), maps: bundle.maps };
}

/**
 * Compile the hot loops of the jobs this thread takes from a write pool (contours, GeoTIFFs) and of the Darcy flux,
 * on a small field, for a grid of `cells` cells: for a caller that waits anyway (the CLI calls it while the solve runs
 * in its worker). Below a million cells the jobs are short and the warm-up would cost more than it saves (measured at
 * 512²: 0.15 s of warm-up beside the solve).
 */
export function prepareWriting(cells: number): void {
  if (cells >= 1 << 20) warmUpWriteJobs();
}

/**
 * As resultBundle, the same files in the same order, built on a write pool (./writePool.ts): rasters, contour
 * tracing and the map in its worker threads, the tables and GeoJSON here. The product jobs go first (the contours,
 * then the map, are the longest chain). Resolves once every file is complete; a failure is that of the first file
 * (in order) that failed, as with resultBundle.
 */
export async function resultBundleOnPool(
  result: SolveResult,
  prefix: string,
  options: ProductOptions,
  pool: WritePool,
): Promise<ResultBundle> {
  pool.lendMainThread(runWriteJob);
  const encode: RasterEncoder<Promise<Uint8Array>> = (grid, values, encodeOptions) => pool.geotiff(grid, values, encodeOptions);
  const sound = resultProblem(result) === null;
  const products = sound ? solveProductsOnPool(result, options, prefix, pool) : null;
  const files: LaterFile[] = tableFiles(result, prefix, encode);
  let trackingWarnings: string[] = [];
  if (products) {
    files.push(...exchangeRastersWith(result, prefix, encode));
    files.push(...products.files);
    const tracking = trackingFilesWith(result, prefix, options, encode);
    files.push(...tracking.files);
    trackingWarnings = tracking.warnings;
  }
  const done = await settleFiles(files, products ? [products.maps, products.warnings] : []);
  if (!products) return { files: done, maps: [] };
  // the warnings in resultBundle's order: the products', then the tracking's
  for (const w of await products.warnings) if (!result.warnings.includes(w)) result.warnings.push(w);
  for (const w of trackingWarnings) if (!result.warnings.includes(w)) result.warnings.push(w);
  return { files: done, maps: await products.maps };
}

export function resultFiles(result: SolveResult, prefix = '', options: ProductOptions = {}): OutputFile[] {
  return resultBundle(result, prefix, options).files;
}

/** The HTML report of one solve. */
export function solveReport(
  result: SolveResult,
  summary: SummaryJson,
  maps: RenderedMap[],
  inputs: ReportInputs = reportInputs(result),
): string {
  const g = summary.grid as { nx: number; ny: number; dx: number; dy: number; crs: string; activeCells: number; fixedHeadCells: number };
  return renderReportHtml({
    kind: 'solve',
    title: result.model.title,
    units: result.model.units,
    grid: { nx: g.nx, ny: g.ny, dx: g.dx, dy: g.dy, crs: g.crs, activeCells: g.activeCells, fixedHeadCells: g.fixedHeadCells },
    runs: [reportRun('baseline', result, maps)],
    inputs,
    warnings: result.warnings,
    caution: CAUTION,
    scenarioFile: result.model.scenarioPath,
    program: `piezomap ${VERSION}`,
    timings: Object.entries(result.timings).map(([stage, seconds]) => ({ stage, seconds })),
    files: summary.files,
  });
}

/** The files of one solve's folder (under `prefix`), its summary last; `extra` files and maps are added (compare's drawdown). */
export function solveFolderFiles(
  result: SolveResult,
  prefix: string,
  options: ProductOptions,
  extra: OutputFile[] = [],
  extraMaps: RenderedMap[] = [],
): { files: OutputFile[]; maps: RenderedMap[]; summary: SummaryJson } {
  const t = performance.now();
  const bundle = resultBundle(result, prefix, options);
  if (prefix === '') result.timings.write = (performance.now() - t) / 1000;
  return folderFromBundle(result, bundle, prefix, extra, extraMaps);
}

/**
 * As solveFolderFiles, the same files, built concurrently: on `pool` when given (resultBundleOnPool), else with the
 * rasters compressed on the thread pool (resultBundleConcurrent).
 */
export async function solveFolderFilesConcurrent(
  result: SolveResult,
  prefix: string,
  options: ProductOptions,
  extra: OutputFile[] = [],
  extraMaps: RenderedMap[] = [],
  pool: WritePool | null = null,
): Promise<{ files: OutputFile[]; maps: RenderedMap[]; summary: SummaryJson }> {
  const t = performance.now();
  const pending = pool ? resultBundleOnPool(result, prefix, options, pool) : resultBundleConcurrent(result, prefix, options);
  // While the products are built elsewhere: the report's table of inputs (a pass over every cell).
  const inputs = options.maps === false && extraMaps.length === 0 ? undefined : reportInputs(result);
  const bundle = await pending;
  if (prefix === '') result.timings.write = (performance.now() - t) / 1000;
  return folderFromBundle(result, bundle, prefix, extra, extraMaps, inputs);
}

function folderFromBundle(
  result: SolveResult,
  bundle: ResultBundle,
  prefix: string,
  extra: OutputFile[],
  extraMaps: RenderedMap[],
  inputs?: ReportInputs,
): { files: OutputFile[]; maps: RenderedMap[]; summary: SummaryJson } {
  const files = [...bundle.files, ...extra];
  const maps = [...extraMaps, ...bundle.maps];
  const withReport = maps.length > 0;
  const names = [...files.map((f) => f.name.slice(prefix.length)), ...(withReport ? [REPORT_FILE] : []), RESULT_MARKER];
  const summary = buildSummary(result, names, VERSION);
  // Map paths are relative to OUTDIR; inside the run's folder they are not prefixed.
  const local = maps.map((m) => ({ ...m, file: m.file.startsWith(prefix) ? m.file.slice(prefix.length) : m.file }));
  if (withReport) files.push({ name: prefix + REPORT_FILE, bytes: solveReport(result, summary, local, inputs) });
  files.push({ name: prefix + RESULT_MARKER, bytes: JSON.stringify(summary, null, 2) + '\n' });
  return { files, maps, summary };
}

/**
 * Write the result folder of one solve: refuses a folder holding any input of the run, or (unless `overwrite`)
 * earlier results; locks it for the run; replaces earlier results all-or-nothing (src/output/resultFolder.ts).
 * With `pool` (./writePool.ts, started early by the caller so that its threads are ready), the products are built
 * in its worker threads.
 * What the folder preparation cleaned up (leftovers of interrupted runs) goes into the warnings.
 * Returns the summary that was written.
 */
export async function writeSolveResults(
  result: SolveResult,
  outDir: string,
  options: { overwrite?: boolean; pool?: WritePool | null } & ProductOptions = {},
): Promise<SummaryJson> {
  const folder = await prepareResultFolder(outDir, Boolean(options.overwrite), result.model.inputFiles);
  for (const note of folder.notes) if (!result.warnings.includes(note)) result.warnings.push(note);
  try {
    const { files, summary } = await solveFolderFilesConcurrent(result, '', options, [], [], options.pool ?? null);
    await writeResultFiles(folder, files);
    return summary;
  } finally {
    releaseResultFolder(folder.dir);
  }
}
