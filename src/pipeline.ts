/**
 * The one-way flow of a run: load -> assemble -> solve -> analyse -> write.
 * Library users call these steps directly; the CLI only parses arguments and formats what they return.
 */
import { assembleSystem, headsFromSolution, type FlowSystem } from './discretisation/assemble.js';
import { waterBudget, type WaterBudget } from './analysis/budget.js';
import { observationResults, wellResults, locateObservations, locateReceptors, type ObservationResult, type WellResult } from './analysis/points.js';
import { wellboreHeads, wellboreWarnings, type WellboreResult } from './analysis/wellbore.js';
import { sanityWarnings } from './analysis/sanity.js';
import { calibrationStatistics, type CalibrationStatistics } from './analysis/calibration.js';
import { PiezomapError } from './errors.js';
import { loadScenario } from './scenario/load.js';
import type { ModelInput } from './scenario/types.js';
import { createSolver, chooseAutoMethod, leanestMethod, solverBytesPerCell } from './solvers/registry.js';
import { checkMemoryBudget } from './memory.js';
import type { Solver, SolveStats } from './solvers/types.js';
import { encodeFloat32GeoTiff } from './raster/write.js';
import { buildSummary, budgetCsv, convergenceCsv, type SummaryJson } from './output/summary.js';
import { prepareResultFolder, previousResultFiles, releaseResultFolder, writeResultFiles, RESULT_MARKER, type OutputFile } from './output/resultFolder.js';
import { CAUTION } from './caution.js';
import { reportRun, solveProducts, type ProductOptions, type RenderedMap } from './output/products.js';
import { renderReportHtml } from './report/index.js';
import { VERSION } from './version.js';

/** Above this budget discrepancy a run fails loudly even when the residual criterion was met. */
export const BUDGET_DISCREPANCY_LIMIT_PERCENT = 0.1;

export interface RunOptions {
  /** Override the scenario's solver settings. */
  method?: string;
  tolerance?: number;
  maxIterations?: number;
  relaxation?: number;
  /** Progress of long stages; return false from a solver progress call to stop. */
  onProgress?: (event: ProgressEvent) => boolean | void;
}

export type ProgressEvent =
  | { stage: 'load' | 'assemble' | 'analyse' | 'write'; message: string }
  | { stage: 'solve'; iteration: number; relativeResidual: number; tolerance: number; maxIterations: number };

export interface SolveResult {
  model: ModelInput;
  system: FlowSystem;
  /** Head per cell, NaN on inactive cells. */
  head: Float64Array;
  stats: SolveStats;
  budget: WaterBudget;
  wells: WellResult[];
  observations: ObservationResult[];
  /** Well-bore heads (Peaceman), in well order. */
  wellbore: WellboreResult[];
  /** Simulated vs observed statistics; null without observations. */
  calibration: CalibrationStatistics | null;
  warnings: string[];
  /** Wall seconds per stage. */
  timings: Record<string, number>;
  peakMemoryMiB: number;
}

const now = () => performance.now() / 1000;

export function peakMemoryMiB(): number {
  // resourceUsage().maxRSS is in kilobytes.
  return process.resourceUsage().maxRSS / 1024;
}

/** Assemble once; the returned solver can be reused for other right-hand sides on the same operator. */
export function prepareSolver(system: FlowSystem, model: ModelInput, options: RunOptions = {}): { solver: Solver; setupSeconds: number } {
  const requested = options.method ?? model.solver.method;
  const method = requested === 'auto' ? chooseAutoMethod(system.operator) : requested;
  const relaxation = options.relaxation ?? model.solver.relaxation;
  const t0 = now();
  const solver = createSolver(method, system.operator, relaxation === undefined ? {} : { relaxation });
  return { solver, setupSeconds: now() - t0 };
}

/** Assemble, solve and analyse a loaded model. Does not throw on non-convergence: check `stats.converged`. */
export function solveModel(model: ModelInput, options: RunOptions = {}, timings: Record<string, number> = {}): SolveResult {
  const system = assembleModel(model, options, timings);
  const { solver, setupSeconds } = prepareSolver(system, model, options);
  return solveSystem(model, system, solver, options, timings, setupSeconds);
}

/** Everything before the solver: the memory budget check, the assembly, and the observation points located. */
export function assembleModel(model: ModelInput, options: RunOptions = {}, timings: Record<string, number> = {}): FlowSystem {
  const t = now();
  // Refuse a grid too large for this machine before the large allocations start.
  const requested = options.method ?? model.solver.method;
  checkMemoryBudget(model.grid, { method: requested, bytesPerCell: solverBytesPerCell(requested) }, leanestMethod());
  options.onProgress?.({ stage: 'assemble', message: 'assembling the flow system' });
  const system = assembleSystem(model);
  // Points are checked before the long solve so bad input fails fast.
  locateObservations(system, model.observations);
  locateReceptors(system, model.receptors ?? []);
  timings.assemble = now() - t;
  return system;
}

/**
 * Solve and analyse an assembled system with a solver already set up for its operator (prepareSolver), so that
 * several right-hand sides on one operator (e.g. pumping variants) share the setup. `setupSeconds` is recorded
 * in the statistics (0 when the setup was shared).
 */
export function solveSystem(
  model: ModelInput,
  system: FlowSystem,
  solver: Solver,
  options: RunOptions = {},
  timings: Record<string, number> = {},
  setupSeconds = 0,
): SolveResult {
  const t = now();
  const x = new Float64Array(system.operator.n);
  const tolerance = options.tolerance ?? model.solver.tolerance;
  const maxIterations = options.maxIterations ?? model.solver.maxIterations;
  const stats = solver.solve(system.rhs, x, {
    tolerance,
    maxIterations,
    keepHistory: true,
    onProgress: (iteration, relativeResidual) =>
      options.onProgress?.({ stage: 'solve', iteration, relativeResidual, tolerance, maxIterations }),
  });
  stats.setupSeconds = setupSeconds;
  timings.solve = now() - t + setupSeconds;
  return analyseSolution(withSolverOverrides(model, options), system, x, stats, timings);
}

/**
 * The model with the solver settings a run actually used (RunOptions override the scenario's), so that the
 * summary reports the tolerance, cap and method that applied. Shares every array with `model`.
 */
export function withSolverOverrides(model: ModelInput, options: RunOptions): ModelInput {
  if (options.method === undefined && options.tolerance === undefined && options.maxIterations === undefined && options.relaxation === undefined) {
    return model;
  }
  const solver = { ...model.solver };
  if (options.method !== undefined) solver.method = options.method;
  if (options.tolerance !== undefined) solver.tolerance = options.tolerance;
  if (options.maxIterations !== undefined) solver.maxIterations = options.maxIterations;
  if (options.relaxation !== undefined) solver.relaxation = options.relaxation;
  return { ...model, solver };
}

/**
 * Everything after the solver: heads from the solution x = h - datum, the water budget, point results and warnings.
 * Separate so that a solve run elsewhere (e.g. in a worker thread, src/robustness/solveInWorker.ts) ends the same way.
 */
export function analyseSolution(
  model: ModelInput,
  system: FlowSystem,
  x: Float64Array,
  stats: SolveStats,
  timings: Record<string, number> = {},
): SolveResult {
  const t = now();
  const head = headsFromSolution(system, x);
  const budget = waterBudget(system, head);
  const warnings = [...model.warnings];
  const ignored = system.counts.fixedOnInactive;
  ignored.forEach((count, g) => {
    if (count > 0) warnings.push(`${count} fixed-head cell(s) of "${system.groups[g]}" fall on inactive cells and were ignored`);
  });
  const observations = observationResults(system, model.observations, head);
  const wellbore = wellboreHeads(model, system, head);
  warnings.push(...wellboreWarnings(wellbore, model.units.length));
  warnings.push(...sanityWarnings(model, system, head, wellbore));
  const result: SolveResult = {
    model,
    system,
    head,
    stats,
    budget,
    wells: wellResults(system, model.wells, head),
    observations,
    wellbore,
    calibration: calibrationStatistics(observations),
    warnings,
    timings,
    peakMemoryMiB: peakMemoryMiB(),
  };
  timings.analyse = now() - t;
  return result;
}

export async function solveScenarioFile(path: string, options: RunOptions = {}): Promise<SolveResult> {
  const timings: Record<string, number> = {};
  const t = now();
  options.onProgress?.({ stage: 'load', message: `reading ${path}` });
  const { model } = await loadScenario(path);
  timings.load = now() - t;
  return solveModel(model, options, timings);
}

/** Why a finished solve must not be presented as a result, or null when it is sound. */
export function resultProblem(result: SolveResult): PiezomapError | null {
  const { stats, budget } = result;
  if (!stats.converged) {
    const factor = stats.convergenceFactor ?? stats.spectralRadius;
    const note = stats.notes.length ? `\n  ${stats.notes.join('\n  ')}` : '';
    return new PiezomapError(
      'solver',
      `solver ${stats.method} did not reach the tolerance (${stats.stopReason}): relative residual ${stats.relativeResidual.toExponential(2)} after ${stats.iterations} iterations` +
        (factor !== null && factor !== undefined ? `, convergence factor ${factor.toFixed(6)}` : '') +
        note,
      { hint: 'try solver.method "auto" or "pcg-multigrid", or raise solver.maxIterations' },
    );
  }
  if (Math.abs(budget.discrepancyPercent) > BUDGET_DISCREPANCY_LIMIT_PERCENT) {
    return new PiezomapError(
      'solver',
      `water budget does not close: discrepancy ${budget.discrepancyPercent.toFixed(4)} % exceeds ${BUDGET_DISCREPANCY_LIMIT_PERCENT} % although the residual criterion was met`,
      { hint: 'tighten solver.tolerance (e.g. 1e-10)' },
    );
  }
  return null;
}

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
  const sound = resultProblem(result) === null;
  const files: OutputFile[] = [];
  const description = `piezomap ${VERSION} head (${result.model.units.length}): ${result.model.title}. ${CAUTION}`;
  const headBytes = encodeFloat32GeoTiff(result.model.grid, result.head, { nodata: -9999, description });
  files.push({ name: prefix + (sound ? 'head.tif' : 'head-not-converged.tif'), bytes: headBytes });
  files.push({ name: prefix + 'budget.csv', bytes: budgetCsv(result.budget) });
  files.push({ name: prefix + 'convergence.csv', bytes: convergenceCsv(result.stats.history) });
  if (!sound) return { files, maps: [] };
  const products = solveProducts(result, options, prefix);
  for (const w of products.warnings) if (!result.warnings.includes(w)) result.warnings.push(w);
  files.push(...products.files);
  return { files, maps: products.maps };
}

export function resultFiles(result: SolveResult, prefix = '', options: ProductOptions = {}): OutputFile[] {
  return resultBundle(result, prefix, options).files;
}

/** The HTML report of one solve. */
export function solveReport(result: SolveResult, summary: SummaryJson, maps: RenderedMap[]): string {
  const g = summary.grid as { nx: number; ny: number; dx: number; dy: number; crs: string; activeCells: number; fixedHeadCells: number };
  return renderReportHtml({
    kind: 'solve',
    title: result.model.title,
    units: result.model.units,
    grid: { nx: g.nx, ny: g.ny, dx: g.dx, dy: g.dy, crs: g.crs, activeCells: g.activeCells, fixedHeadCells: g.fixedHeadCells },
    runs: [reportRun('baseline', result, maps)],
    warnings: result.warnings,
    caution: CAUTION,
    scenarioFile: result.model.scenarioPath,
    program: `piezomap ${VERSION}`,
    timings: Object.entries(result.timings).map(([stage, seconds]) => ({ stage, seconds })),
    files: summary.files,
  });
}

/**
 * Write the result folder of one solve. Refuses a folder holding earlier results unless `overwrite`.
 * Returns the summary that was written.
 */
export async function writeSolveResults(
  result: SolveResult,
  outDir: string,
  options: { overwrite?: boolean } & ProductOptions = {},
): Promise<SummaryJson> {
  const t = now();
  // Refuses a folder holding inputs or (without overwrite) earlier results; locks it; notes say what it cleaned up.
  const folder = await prepareResultFolder(outDir, Boolean(options.overwrite), result.model.inputFiles);
  for (const note of folder.notes) if (!result.warnings.includes(note)) result.warnings.push(note);
  try {
    const { files, maps } = resultBundle(result, '', options);
    const withReport = maps.length > 0;
    const names = [...files.map((f) => f.name), ...(withReport ? [REPORT_FILE] : []), RESULT_MARKER];
    result.timings.write = now() - t;
    const summary = buildSummary(result, names, VERSION);
    if (withReport) files.push({ name: REPORT_FILE, bytes: solveReport(result, summary, maps) });
    files.push({ name: RESULT_MARKER, bytes: JSON.stringify(summary, null, 2) + '\n' });
    await writeResultFiles(folder, files);
    return summary;
  } finally {
    releaseResultFolder(folder.dir);
  }
}

export const REPORT_FILE = 'report.html';

export { prepareResultFolder, previousResultFiles };
