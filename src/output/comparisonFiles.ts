/**
 * The files of a comparison, and writing them: every run's folder as for `solve`, drawdown rasters, contours and
 * maps per variant, comparison.csv, the comparison report and summary.json (last). Built from a ComparisonResult
 * (src/compare/types.ts); no solving here.
 */
import type { SolveResult } from '../analysis/result.js';
import { CAUTION } from '../caution.js';
import type { ComparisonResult, VariantComparison } from '../compare/types.js';
import type { ContourSet } from '../analysis/contours.js';
import { crsLabel } from '../grid.js';
import { PiezomapError } from '../errors.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
import { renderMapPng, renderReportHtml, type MapInput, type ReportRun } from '../report/index.js';
import { VERSION } from '../version.js';
import { mapCellLayers } from '../discretisation/terms/types.js';
import { comparisonCsv, comparisonSummary, variantStatus, type ComparisonSummaryJson } from './comparison.js';
import { contourFiles, reportInputs, reportRun, type ProductOptions, type RenderedMap } from './products.js';
import { reportTracking } from './tracking.js';
import { prepareResultFolder, releaseResultFolder, writeResultFiles, RESULT_MARKER, type OutputFile } from './resultFolder.js';
import { REPORT_FILE, solveFolderFiles } from './solveFiles.js';

/**
 * All files of a comparison, relative to OUTDIR: baseline/ and NAME/ as for `solve` (each with its summary.json),
 * NAME/drawdown.tif for every sound variant (with drawdown contours and map unless `maps: false`), the comparison
 * report.html, comparison.csv and the comparison summary.json (last).
 */
export function comparisonFiles(
  c: ComparisonResult,
  options: ProductOptions = {},
): { files: OutputFile[]; summary: ComparisonSummaryJson } {
  const files: OutputFile[] = [];
  const { grid, units } = c.baseline.model;
  const runs: ReportRun[] = [];
  const runFolder = (name: string, result: SolveResult, extra: OutputFile[], extraMaps: RenderedMap[], reportExtra: Partial<ReportRun>) => {
    const folder = solveFolderFiles(result, `${name}/`, options, extra, extraMaps);
    files.push(...folder.files);
    runs.push(reportRun(name, result, folder.maps, reportExtra));
  };
  runFolder('baseline', c.baseline, [], [], {});
  for (const v of c.variants) {
    const extra: OutputFile[] = [];
    const maps: RenderedMap[] = [];
    if (v.drawdown) {
      const description = `piezomap ${VERSION} drawdown (${units.length}, baseline head - variant head, positive = lowered): ${v.result.model.title}. ${CAUTION}`;
      extra.push({ name: `${v.name}/drawdown.tif`, bytes: encodeFloat32GeoTiff(grid, v.drawdown, { nodata: -9999, description }) });
      if (options.maps !== false) {
        const contours = contourFiles(grid, v.drawdown, 'drawdown', units.length, options, `${v.name}/`);
        extra.push(...contours.files);
        for (const w of contours.warnings) if (!v.result.warnings.includes(w)) v.result.warnings.push(w);
        const map = renderMapPng(drawdownMapInput(v, contours.contours, units));
        const file = `${v.name}/drawdown-map.png`;
        extra.push({ name: file, bytes: map.png });
        maps.push({ caption: `Drawdown against the baseline, ${units.length} (positive = lowered)`, file, png: map.png });
      }
    }
    const obsDrawdown = new Map(v.observations.map((o) => [o.id, o.drawdown]));
    const bores = new Map(v.wellbores.map((w) => [w.id, w]));
    const reportExtra: Partial<ReportRun> = {};
    if (v.maxDrawdown) reportExtra.maxDrawdown = v.maxDrawdown.value;
    if (v.capture && v.result.tracking) reportExtra.tracking = reportTracking(v.result.tracking, v.capture);
    runFolder(v.name, v.result, extra, maps, reportExtra);
    const run = runs[runs.length - 1]!;
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
  }
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
 * any input of the baseline or a variant is refused, and earlier results unless `overwrite`. Returns the comparison summary that was written.
 */
export async function writeComparisonResults(
  c: ComparisonResult,
  outDir: string,
  options: { overwrite?: boolean } & ProductOptions = {},
): Promise<ComparisonSummaryJson> {
  const folder = await prepareResultFolder(outDir, Boolean(options.overwrite), c.inputFiles);
  for (const note of folder.notes) if (!c.warnings.includes(note)) c.warnings.push(note);
  try {
    const { files, summary } = comparisonFiles(c, options);
    await writeResultFiles(folder, files);
    return summary;
  } finally {
    releaseResultFolder(folder.dir);
  }
}
