/**
 * The files of a comparison, and writing them: every run's folder as for `solve`, drawdown rasters, contours and
 * maps per variant, comparison.csv, the comparison report and summary.json (last). Built from a ComparisonResult
 * (src/compare/types.ts); no solving here.
 */
import { CAUTION } from '../caution.js';
import type { ComparisonResult, VariantComparison } from '../compare/types.js';
import type { ContourSet } from '../analysis/contours.js';
import { crsLabel, type Grid } from '../grid.js';
import { PiezomapError } from '../errors.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
import { renderMapPng, renderReportHtml, type MapInput, type ReportRun } from '../report/index.js';
import { VERSION } from '../version.js';
import { resultRasterOptions } from './rasterOptions.js';
import { mapCellLayers } from '../discretisation/terms/types.js';
import { comparisonCsv, comparisonSummary, variantStatus, type ComparisonSummaryJson } from './comparison.js';
import { contourFiles, mapJobInput, reportInputs, reportRun, type ProductOptions, type RenderedMap } from './products.js';
import { contourFileNames, contourOptions } from './contourFiles.js';
import { observed, settleFiles, type LaterFile } from './pending.js';
import type { WritePool } from './writePool.js';
import { runWriteJob } from './writeJobs.js';
import { reportTracking } from './tracking.js';
import { prepareResultFolder, releaseResultFolder, writeResultFiles, RESULT_MARKER, type OutputFile } from './resultFolder.js';
import { REPORT_FILE, solveFolderFiles, solveFolderFilesConcurrent } from './solveFiles.js';

/**
 * All files of a comparison, relative to OUTDIR: baseline/ and NAME/ as for `solve` (each with its summary.json),
 * NAME/drawdown.tif for every sound variant (with drawdown contours and map unless `maps: false`), the comparison
 * report.html, comparison.csv and the comparison summary.json (last).
 */
export function comparisonFiles(
  c: ComparisonResult,
  options: ProductOptions = {},
): { files: OutputFile[]; summary: ComparisonSummaryJson } {
  const { grid, units } = c.baseline.model;
  const extras = c.variants.map((v) => {
    const extra = drawdownFiles(v, grid, units, options);
    for (const w of extra.warnings) if (!v.result.warnings.includes(w)) v.result.warnings.push(w);
    return extra;
  });
  const folders = [
    solveFolderFiles(c.baseline, 'baseline/', options),
    ...c.variants.map((v, i) => solveFolderFiles(v.result, `${v.name}/`, options, extras[i]!.files, extras[i]!.maps)),
  ];
  return finishComparison(c, options, folders);
}

/**
 * As comparisonFiles, the same files in the same order, built on a write pool (./writePool.ts): each run's folder
 * with its rasters, contours and map built at once in the pool's threads. The runs go one after another, so that
 * the arrays handed to the threads (heads and fluxes in shared memory) are those of one run at a time, whatever the
 * number of variants.
 */
export async function comparisonFilesOnPool(
  c: ComparisonResult,
  options: ProductOptions,
  pool: WritePool,
): Promise<{ files: OutputFile[]; summary: ComparisonSummaryJson }> {
  pool.lendMainThread(runWriteJob);
  const { grid, units } = c.baseline.model;
  const folders = [await solveFolderFilesConcurrent(c.baseline, 'baseline/', options, [], [], pool)];
  for (const v of c.variants) {
    const extra = await drawdownFilesOnPool(v, grid, units, options, pool);
    for (const w of extra.warnings) if (!v.result.warnings.includes(w)) v.result.warnings.push(w);
    folders.push(await solveFolderFilesConcurrent(v.result, `${v.name}/`, options, extra.files, extra.maps, pool));
  }
  return finishComparison(c, options, folders);
}

interface DrawdownFiles {
  files: OutputFile[];
  maps: RenderedMap[];
  warnings: string[];
}

const DRAWDOWN_CAPTION = (units: { length: string }) => `Drawdown against the baseline, ${units.length} (positive = lowered)`;

function drawdownDescription(v: VariantComparison, units: { length: string }): string {
  return `piezomap ${VERSION} drawdown (${units.length}, baseline head - variant head, positive = lowered): ${v.result.model.title}. ${CAUTION}`;
}

/** A sound variant's drawdown.tif, drawdown contours and map (none for a variant without a drawdown field). */
function drawdownFiles(v: VariantComparison, grid: Grid, units: { length: string; time: string }, options: ProductOptions): DrawdownFiles {
  const files: OutputFile[] = [];
  const maps: RenderedMap[] = [];
  const warnings: string[] = [];
  if (!v.drawdown) return { files, maps, warnings };
  const description = drawdownDescription(v, units);
  files.push({ name: `${v.name}/drawdown.tif`, bytes: encodeFloat32GeoTiff(grid, v.drawdown, resultRasterOptions(description)) });
  if (options.maps !== false) {
    const contours = contourFiles(grid, v.drawdown, 'drawdown', units.length, options, `${v.name}/`);
    files.push(...contours.files);
    warnings.push(...contours.warnings);
    const map = renderMapPng(drawdownMapInput(v, contours.contours, units));
    const file = `${v.name}/drawdown-map.png`;
    files.push({ name: file, bytes: map.png });
    maps.push({ caption: DRAWDOWN_CAPTION(units), file, png: map.png });
  }
  return { files, maps, warnings };
}

/** As drawdownFiles, on a write pool. */
async function drawdownFilesOnPool(
  v: VariantComparison,
  grid: Grid,
  units: { length: string; time: string },
  options: ProductOptions,
  pool: WritePool,
): Promise<DrawdownFiles> {
  if (!v.drawdown) return { files: [], maps: [], warnings: [] };
  const drawdown = v.drawdown;
  const files: LaterFile[] = [
    { name: `${v.name}/drawdown.tif`, bytes: pool.geotiff(grid, drawdown, resultRasterOptions(drawdownDescription(v, units))) },
  ];
  if (options.maps === false) return { files: await settleFiles(files), maps: [], warnings: [] };
  const prefix = `${v.name}/`;
  const contours = observed(pool.contours(grid, drawdown, contourOptions(options)));
  const png = observed(contours.then((set) => pool.mapPng(mapJobInput(drawdownMapInput(v, set, units), v.result))));
  const out = observed(contours.then((set) => pool.contourFiles(grid, set, 'drawdown', units.length, options, prefix)));
  for (const name of contourFileNames(grid, 'drawdown', options, prefix)) {
    files.push({ name, bytes: out.then((o) => o.files.find((f) => f.name === name)!.bytes) });
  }
  const file = `${v.name}/drawdown-map.png`;
  files.push({ name: file, bytes: png });
  const done = await settleFiles(files);
  return { files: done, maps: [{ caption: DRAWDOWN_CAPTION(units), file, png: await png }], warnings: (await out).warnings };
}

/** The comparison's own files around the run folders (in comparisonFiles' order): comparison.csv, the report, summary.json. */
function finishComparison(
  c: ComparisonResult,
  options: ProductOptions,
  folders: Array<{ files: OutputFile[]; maps: RenderedMap[] }>,
): { files: OutputFile[]; summary: ComparisonSummaryJson } {
  const { grid } = c.baseline.model;
  const files: OutputFile[] = [];
  const runs: ReportRun[] = [];
  files.push(...folders[0]!.files);
  runs.push(reportRun('baseline', c.baseline, folders[0]!.maps, {}));
  c.variants.forEach((v, i) => {
    const folder = folders[i + 1]!;
    const obsDrawdown = new Map(v.observations.map((o) => [o.id, o.drawdown]));
    const bores = new Map(v.wellbores.map((w) => [w.id, w]));
    const reportExtra: Partial<ReportRun> = {};
    if (v.maxDrawdown) reportExtra.maxDrawdown = v.maxDrawdown.value;
    if (v.capture && v.result.tracking) reportExtra.tracking = reportTracking(v.result.tracking, v.capture);
    files.push(...folder.files);
    const run = reportRun(v.name, v.result, folder.maps, reportExtra);
    runs.push(run);
    for (const w of run.wells) {
      const bore = bores.get(w.id);
      if (bore && Number.isFinite(bore.drawdown)) w.wellboreDrawdown = bore.drawdown;
      // The cell head's change, read from the drawdown field (noise already set to zero there).
      if (v.drawdown) w.cellDrawdown = v.drawdown[w.row * grid.nx + w.col]!;
    }
    for (const o of run.observations) {
      const s = obsDrawdown.get(o.id);
      if (s !== undefined && Number.isFinite(s)) o.drawdown = s;
    }
  });
  files.push({ name: 'comparison.csv', bytes: comparisonCsv(c) });
  const withReport = options.maps !== false;
  const names = [...files.map((f) => f.name), ...(withReport ? [REPORT_FILE] : []), RESULT_MARKER];
  const summary = comparisonSummary(c, names, VERSION);
  if (withReport) files.push({ name: REPORT_FILE, bytes: comparisonReport(c, runs, summary) });
  files.push({ name: RESULT_MARKER, bytes: JSON.stringify(summary, null, 2) + '\n' });
  return { files, summary };
}

/** The drawdown map of a sound variant: drawdown with its noise level, contours, each term's cells, wells, points, receptors. */
export function drawdownMapInput(v: VariantComparison, contours: ContourSet, units: { length: string; time: string }): MapInput {
  if (!v.drawdown) throw new PiezomapError('internal', `variant "${v.name}" has no drawdown field to map`);
  return {
    grid: v.result.model.grid,
    values: v.drawdown,
    quantity: 'drawdown',
    units,
    title: v.result.model.title,
    caution: CAUTION,
    contours,
    cellLayers: mapCellLayers(v.result.system.terms, v.result.system.active.length),
    wells: v.result.wells.map((w) => ({ id: w.id, x: w.x, y: w.y, rate: w.rate })),
    observations: v.observations.map((o) => ({ id: o.id, x: o.x, y: o.y })),
    receptors: v.receptors.map((r) => ({ id: r.id, x: r.x, y: r.y })),
    noiseLevel: v.noiseLevel,
    footnote: `piezomap ${VERSION}`,
  };
}

/** The comparison's HTML report: the variants table, then the baseline and each variant with their maps. */
function comparisonReport(c: ComparisonResult, runs: ReportRun[], summary: ComparisonSummaryJson): string {
  const base = c.baseline;
  const { grid, units } = base.model;
  const observationIds = base.model.observations.map((o) => o.id);
  return renderReportHtml({
    kind: 'compare',
    title: base.model.title,
    units,
    grid: {
      nx: grid.nx,
      ny: grid.ny,
      dx: base.system.dx,
      dy: base.system.dy,
      crs: crsLabel(grid.crs),
      activeCells: base.system.counts.active,
      fixedHeadCells: base.system.counts.fixed,
    },
    runs,
    variants: c.variants.map((v) => ({
      name: v.name,
      maxDrawdown: v.maxDrawdown?.value ?? NaN,
      totalWithdrawal: v.withdrawal,
      discrepancyPercent: v.result.budget.discrepancyPercent,
      converged: v.problem === null,
      observationDrawdowns: v.observations.map((o) => o.drawdown),
      receptorDrawdowns: v.receptors.map((r) => r.drawdown),
      maxRise: v.problem ? null : v.maxRise,
      noiseLevel: v.noiseLevel,
      status: variantStatus(v),
      maxDrawdownAt: v.maxDrawdown ? { x: v.maxDrawdown.x, y: v.maxDrawdown.y } : null,
      sharing: v.sharing,
      sources: v.problem
        ? null
        : {
            addedPumping: v.sources.addedPumping,
            terms: v.sources.terms.map((t) => ({
              term: t.term,
              inflowChange: t.inflowChange,
              outflowChange: t.outflowChange,
              netChange: t.netChange,
              percent: t.percentOfAddedPumping,
            })),
            totalPercent: v.sources.totalPercent,
          },
    })),
    observationIds,
    receptorIds: c.receptors.map((r) => r.id),
    inputs: reportInputs(base),
    warnings: summary.warnings,
    caution: CAUTION,
    scenarioFile: base.model.scenarioPath,
    program: `piezomap ${VERSION}`,
    files: summary.files,
  });
}

/**
 * Write a comparison into OUTDIR in one staged, all-or-nothing step (src/output/resultFolder.ts): a folder holding
 * any input of the baseline or a variant is refused, and earlier results unless `overwrite`. With `pool`, the files are
 * built on its worker threads (comparisonFilesOnPool). Returns the comparison summary that was written.
 */
export async function writeComparisonResults(
  c: ComparisonResult,
  outDir: string,
  options: { overwrite?: boolean; pool?: WritePool | null } & ProductOptions = {},
): Promise<ComparisonSummaryJson> {
  const folder = await prepareResultFolder(outDir, Boolean(options.overwrite), c.inputFiles);
  for (const note of folder.notes) if (!c.warnings.includes(note)) c.warnings.push(note);
  try {
    const { files, summary } = options.pool ? await comparisonFilesOnPool(c, options, options.pool) : comparisonFiles(c, options);
    await writeResultFiles(folder, files);
    return summary;
  } finally {
    releaseResultFolder(folder.dir);
  }
}
