/**
 * Comparison of pumping plans: the baseline and every variant of a scenario, each solved and analysed as by
 * `solve`, plus the drawdown of each variant against the baseline (baseline head - variant head, positive =
 * lowered), drawdown at observation points, receptors and well bores, and where the added pumping comes from.
 *
 * Variants whose aquifer, fixed heads and solver settings equal the baseline's (they change only wells or
 * recharge) are solved on the baseline's operator with the baseline's solver (multigrid hierarchy or
 * factorisation set up once): only their sources and right-hand side are built. The others are assembled and
 * set up afresh. Every variant is resolved and checked before the first solve, so bad input fails fast.
 */
import { dirname } from 'node:path';
import { assembleSystem, withSources, type FlowSystem } from './discretisation/assemble.js';
import { headAtPoint, locateObservations, locateReceptors } from './analysis/points.js';
import { sourcesOfWater, type SourcesOfWater } from './analysis/sources.js';
import { cellAt, crsLabel, gridDifference } from './grid.js';
import { inputError, PiezomapError } from './errors.js';
import { loadScenario, mergeVariant, resolveScenario, type ScenarioJson } from './scenario/load.js';
import type { ModelInput, ReceptorInput } from './scenario/types.js';
import type { Solver } from './solvers/types.js';
import { leanestMethod, solverBytesPerCell } from './solvers/registry.js';
import { checkMemoryBudget } from './memory.js';
import {
  prepareSolver,
  resultBundle,
  resultProblem,
  solveReport,
  solveSystem,
  REPORT_FILE,
  type RunOptions,
  type SolveResult,
} from './pipeline.js';
import { buildSummary } from './output/summary.js';
import { comparisonCsv, comparisonSummary, type ComparisonSummaryJson } from './output/comparison.js';
import { prepareResultFolder, releaseResultFolder, RESULT_MARKER, writeResultFiles, type OutputFile } from './output/resultFolder.js';
import { contourFiles, reportRun, type ProductOptions, type RenderedMap } from './output/products.js';
import { renderMapPng, renderReportHtml, type ReportRun } from './report/index.js';
import { encodeFloat32GeoTiff } from './raster/write.js';
import { CAUTION } from './caution.js';
import { VERSION } from './version.js';

export interface CompareOptions extends RunOptions {
  /** Folder that relative paths of an in-memory scenario start from (default: the scenario file's folder, else the working folder). */
  baseDir?: string;
}

/** A drawdown read at a point: bilinear between the surrounding cell centres when all are active, else the cell value. */
export interface PointDrawdown {
  id: string;
  x: number;
  y: number;
  /** NaN where the point is inactive in the variant. */
  drawdown: number;
}

export interface WellboreDrawdown {
  id: string;
  rate: number;
  /** Head at the bore before the change: the baseline well-bore head if the well pumps in the baseline, else the baseline cell head. */
  baselineHead: number;
  wellboreHead: number;
  drawdown: number;
  minimumHead: number | null;
  belowMinimum: boolean;
}

export interface VariantComparison {
  name: string;
  result: SolveResult;
  /** True when solved on the baseline's operator and solver set-up (only the right-hand side was new). */
  sharedOperator: boolean;
  /** Why the operator was or was not shared, in words. */
  sharing: string;
  /** Why the result must not be presented (not converged, budget not closed), or null. */
  problem: PiezomapError | null;
  /** baseline - variant head per cell, NaN where either is inactive; null when either run is unsound. */
  drawdown: Float64Array | null;
  /** Largest drawdown and where; null without drawdown. */
  maxDrawdown: { value: number; row: number; col: number; x: number; y: number } | null;
  /** Largest rise (most negative drawdown, e.g. from injection or more recharge), as a positive number; 0 when none. */
  maxRise: number;
  /** At the baseline's observation points. */
  observations: PointDrawdown[];
  receptors: PointDrawdown[];
  wellbores: WellboreDrawdown[];
  /** Sum of withdrawal rates (positive number), L^3/T. */
  withdrawal: number;
  sources: SourcesOfWater;
}

export interface ComparisonResult {
  baseline: SolveResult;
  baselineProblem: PiezomapError | null;
  variants: VariantComparison[];
  receptors: ReceptorInput[];
  warnings: string[];
  /** Every file the baseline and the variants read (a result folder must hold none of them). */
  inputFiles: string[];
}

/** Read a scenario file (or take a loaded one) and compare its baseline with every variant. */
export async function compareScenario(
  scenario: string | { model: ModelInput; raw: ScenarioJson },
  options: CompareOptions = {},
): Promise<ComparisonResult> {
  const loaded = typeof scenario === 'string' ? await loadScenario(scenario) : scenario;
  const variants = await resolveVariants(loaded.model, loaded.raw, options);
  return compareModels(loaded.model, variants, options);
}

/** Every variant of a scenario as a model: its JSON merged into the baseline's and resolved like a scenario. */
export async function resolveVariants(
  model: ModelInput,
  raw: ScenarioJson,
  options: { baseDir?: string } = {},
): Promise<Array<{ name: string; model: ModelInput }>> {
  const inline = model.scenarioPath === '<inline>' || model.scenarioPath === '<test>';
  const baseDir = options.baseDir ?? (inline ? process.cwd() : dirname(model.scenarioPath));
  const label = inline ? '<inline>' : model.scenarioPath;
  const result: Array<{ name: string; model: ModelInput }> = [];
  for (const variant of raw.variants ?? []) {
    const merged = mergeVariant(raw, variant);
    if (variant.title === undefined) merged.title = `${model.title} (${variant.name})`;
    result.push({ name: variant.name, model: await resolveScenario(merged, baseDir, label) });
  }
  return result;
}

/** What compareModels builds before its first solve: every system assembled and every point located. */
export interface PreparedComparison {
  baseSystem: FlowSystem;
  receptors: ReceptorInput[];
  receptorCells: Int32Array;
  variants: PreparedVariant[];
}

export interface PreparedVariant {
  name: string;
  model: ModelInput;
  system: FlowSystem;
  /** True when the variant will be solved on the baseline's operator and solver set-up. */
  shared: boolean;
  sharing: string;
}

/**
 * Check a comparison without solving: variant names, the memory budget, every system (assembled, or sources on the
 * baseline's operator), wells, observations and receptors. Throws the input error a comparison would throw.
 * `assembled`: the baseline's system when the caller has already built it (then the memory budget is not checked).
 */
export function prepareComparison(
  baseline: ModelInput,
  variants: ReadonlyArray<{ name: string; model: ModelInput }>,
  options: RunOptions = {},
  assembled?: FlowSystem,
): PreparedComparison {
  const names = new Set<string>();
  for (const v of variants) {
    const key = v.name.toLowerCase();
    if (!/^[A-Za-z0-9_-]+$/.test(v.name) || key === 'baseline') {
      throw inputError(`variant name "${v.name}" cannot name a result folder`, { hint: 'use letters, digits, "-" and "_"; "baseline" is reserved' });
    }
    if (names.has(key)) throw inputError(`duplicate variant name "${v.name}"`, { hint: 'variant names must be unique (case is ignored)' });
    names.add(key);
  }
  if (!assembled) {
    // Refuse a grid too large for this machine before the large allocations start (as solveModel does).
    const requested = options.method ?? baseline.solver.method;
    checkMemoryBudget(baseline.grid, { method: requested, bytesPerCell: solverBytesPerCell(requested) }, leanestMethod());
    options.onProgress?.({ stage: 'assemble', message: 'assembling the baseline' });
  }
  const baseSystem = assembled ?? assembleSystem(baseline);
  locateObservations(baseSystem, baseline.observations);
  const receptors = baseline.receptors ?? [];
  const receptorCells = locateReceptors(baseSystem, receptors);
  const prepared: PreparedVariant[] = variants.map(({ name, model }) => {
    options.onProgress?.({ stage: 'assemble', message: `assembling variant "${name}"` });
    const difference = operatorDifference(baseline, model, options);
    const system = difference === null ? withSources(baseSystem, model) : assembleSystem(model);
    locateObservations(system, model.observations);
    return {
      name,
      model,
      system,
      shared: difference === null,
      sharing: difference === null ? 'same aquifer, fixed heads and solver: baseline operator and solver set-up reused' : `solved afresh: ${difference}`,
    };
  });
  return { baseSystem, receptors, receptorCells, variants: prepared };
}

/** Compare a baseline model with variant models (already resolved). Everything is checked before the first solve. */
export function compareModels(
  baseline: ModelInput,
  variants: ReadonlyArray<{ name: string; model: ModelInput }>,
  options: RunOptions = {},
): ComparisonResult {
  const { baseSystem, receptors, receptorCells, variants: prepared } = prepareComparison(baseline, variants, options);

  const { solver, setupSeconds } = prepareSolver(baseSystem, baseline, options);
  const baseResult = solveSystem(baseline, baseSystem, solver, options, {}, setupSeconds);
  const baselineProblem = resultProblem(baseResult);
  const warnings: string[] = [];
  if (baselineProblem) warnings.push('the baseline is not a sound result, so no variant was solved and no drawdown computed');

  const compared: VariantComparison[] = [];
  if (!baselineProblem) {
    for (const v of prepared) {
      options.onProgress?.({ stage: 'analyse', message: `solving variant "${v.name}"${v.shared ? ' on the baseline operator' : ''}` });
      let variantSolver: Solver = solver;
      let variantSetup = 0;
      if (!v.shared) ({ solver: variantSolver, setupSeconds: variantSetup } = prepareSolver(v.system, v.model, options));
      const result = solveSystem(v.model, v.system, variantSolver, options, {}, variantSetup);
      compared.push(analyseVariant(v, result, baseResult, receptors, receptorCells));
    }
  }
  const inputFiles = [...new Set([...baseline.inputFiles, ...variants.flatMap((v) => v.model.inputFiles)])];
  return { baseline: baseResult, baselineProblem, variants: compared, receptors, warnings, inputFiles };
}

/**
 * Why a variant cannot use the baseline's operator and solver, or null when it can: the grid, conductivity,
 * thickness, anisotropy, fixed heads (cells, heads, names) and solver method/relaxation must all be equal.
 */
export function operatorDifference(baseline: ModelInput, variant: ModelInput, options: RunOptions = {}): string | null {
  if (gridDifference(baseline.grid, variant.grid) !== null) return 'the grid differs';
  if (!sameField(baseline.conductivity, variant.conductivity)) return 'aquifer.conductivity differs';
  if (!sameField(baseline.thickness, variant.thickness)) return 'aquifer.thickness differs';
  if (baseline.anisotropy !== variant.anisotropy) return 'aquifer.anisotropy differs';
  const a = baseline.fixedHeads;
  const b = variant.fixedHeads;
  if (a.length !== b.length) return 'fixedHeads differ';
  for (let g = 0; g < a.length; g++) {
    if (a[g]!.name !== b[g]!.name || !sameField(a[g]!.cells, b[g]!.cells) || !sameField(a[g]!.heads, b[g]!.heads)) return 'fixedHeads differ';
  }
  if (options.method === undefined && baseline.solver.method !== variant.solver.method) return 'solver.method differs';
  if (options.relaxation === undefined && baseline.solver.relaxation !== variant.solver.relaxation) return 'solver.relaxation differs';
  return null;
}

/** Equal numbers or equal arrays, NaN equal to NaN (nodata stays nodata). */
function sameField(a: ArrayLike<number> | number, b: ArrayLike<number> | number): boolean {
  if (a === b) return true;
  if (typeof a === 'number' || typeof b === 'number') return false;
  if (a.length !== b.length) return false;
  for (let p = 0; p < a.length; p++) {
    const x = a[p]!;
    const y = b[p]!;
    if (x !== y && !(x !== x && y !== y)) return false;
  }
  return true;
}

/** baseline - variant head, NaN where either is inactive. */
export function drawdownField(baselineHead: Float64Array, variantHead: Float64Array, out = new Float64Array(baselineHead.length)): Float64Array {
  for (let p = 0; p < out.length; p++) out[p] = baselineHead[p]! - variantHead[p]!;
  return out;
}

function pointDrawdown(system: FlowSystem, drawdown: Float64Array | null, id: string, x: number, y: number, cell: number): PointDrawdown {
  const value = drawdown === null ? NaN : headAtPoint(system.grid, drawdown, x, y) ?? drawdown[cell]!;
  return { id, x, y, drawdown: value };
}

function analyseVariant(
  v: PreparedVariant,
  result: SolveResult,
  base: SolveResult,
  receptors: ReceptorInput[],
  receptorCells: Int32Array,
): VariantComparison {
  const problem = resultProblem(result);
  const grid = base.model.grid;
  const nx = grid.nx;
  const drawdown = problem ? null : drawdownField(base.head, result.head);

  let maxDrawdown: VariantComparison['maxDrawdown'] = null;
  let maxRise = 0;
  if (drawdown) {
    let best = -Infinity;
    let at = -1;
    for (let p = 0; p < drawdown.length; p++) {
      const s = drawdown[p]!;
      if (s > best) {
        best = s;
        at = p;
      }
      if (-s > maxRise) maxRise = -s;
    }
    if (at >= 0) {
      const row = Math.floor(at / nx);
      const col = at - row * nx;
      const t = grid.transform;
      maxDrawdown = { value: best, row, col, x: t[0] + (col + 0.5) * t[1], y: t[3] + (row + 0.5) * t[5] };
    }
  }

  const obsCells = locateObservations(base.system, base.model.observations);
  const observations = base.model.observations.map((o, k) => pointDrawdown(base.system, drawdown, o.id, o.x, o.y, obsCells[k]!));
  const receptorDrawdowns = receptors.map((r, k) => pointDrawdown(base.system, drawdown, r.id, r.x, r.y, receptorCells[k]!));

  // Well bores: the head there before the change is the baseline's well-bore head when the same well pumps in the
  // baseline at the same place, else the baseline's head in the well's cell.
  const baseBores = new Map(base.wellbore.map((w, k) => [w.id, { bore: w, cell: base.system.wellCells[k]! }]));
  const wellbores: WellboreDrawdown[] = result.wellbore.map((w, k) => {
    const cell = result.system.wellCells[k]!;
    const before = baseBores.get(w.id);
    const baselineHead = before && before.cell === cell ? before.bore.wellboreHead : base.head[cell]!;
    return {
      id: w.id,
      rate: w.rate,
      baselineHead,
      wellboreHead: w.wellboreHead,
      drawdown: problem ? NaN : baselineHead - w.wellboreHead,
      minimumHead: w.minimumHead,
      belowMinimum: w.belowMinimum,
    };
  });

  let withdrawal = 0;
  for (const w of result.model.wells) if (w.rate < 0) withdrawal -= w.rate;

  return {
    name: v.name,
    result,
    sharedOperator: v.shared,
    sharing: v.sharing,
    problem,
    drawdown,
    maxDrawdown,
    maxRise,
    observations,
    receptors: receptorDrawdowns,
    wellbores,
    withdrawal,
    sources: sourcesOfWater(base.budget, result.budget),
  };
}

/**
 * All files of a comparison, relative to OUTDIR: baseline/ and NAME/ as for `solve` (each with its summary.json),
 * NAME/drawdown.tif for every sound variant (with drawdown contours and map unless `maps: false`), the comparison
 * report.html, comparison.csv and the comparison summary.json (last).
 */
export function comparisonFiles(c: ComparisonResult, options: ProductOptions = {}): { files: OutputFile[]; summary: ComparisonSummaryJson } {
  const files: OutputFile[] = [];
  const { grid, units } = c.baseline.model;
  const runs: ReportRun[] = [];
  const runFolder = (name: string, result: SolveResult, extra: OutputFile[], extraMaps: RenderedMap[], reportExtra: Partial<ReportRun>) => {
    const prefix = `${name}/`;
    const bundle = resultBundle(result, prefix, options);
    const own = [...bundle.files, ...extra];
    const allMaps = [...extraMaps, ...bundle.maps];
    const withReport = allMaps.length > 0;
    const names = [...own.map((f) => f.name.slice(prefix.length)), ...(withReport ? [REPORT_FILE] : []), RESULT_MARKER];
    const summary = buildSummary(result, names, VERSION);
    // Map paths are relative to OUTDIR; inside the run's folder they are not prefixed.
    const local = allMaps.map((m) => ({ ...m, file: m.file.startsWith(prefix) ? m.file.slice(prefix.length) : m.file }));
    if (withReport) own.push({ name: prefix + REPORT_FILE, bytes: solveReport(result, summary, local) });
    own.push({ name: prefix + RESULT_MARKER, bytes: JSON.stringify(summary, null, 2) + '\n' });
    files.push(...own);
    runs.push(reportRun(name, result, allMaps, reportExtra));
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
        const map = renderMapPng({
          grid,
          values: v.drawdown,
          quantity: 'drawdown',
          units,
          title: v.result.model.title,
          caution: CAUTION,
          contours: contours.contours,
          fixedHead: v.result.system.fixed,
          wells: v.result.wells.map((w) => ({ id: w.id, x: w.x, y: w.y, rate: w.rate })),
          observations: [...v.observations, ...v.receptors].map((o) => ({ id: o.id, x: o.x, y: o.y })),
          footnote: `piezomap ${VERSION}`,
        });
        const file = `${v.name}/drawdown-map.png`;
        extra.push({ name: file, bytes: map.png });
        maps.push({ caption: `Drawdown against the baseline, ${units.length} (positive = lowered)`, file, png: map.png });
      }
    }
    const obsDrawdown = new Map(v.observations.map((o) => [o.id, o.drawdown]));
    const boreDrawdown = new Map(v.wellbores.map((w) => [w.id, w.drawdown]));
    const reportExtra: Partial<ReportRun> = {};
    if (v.maxDrawdown) reportExtra.maxDrawdown = v.maxDrawdown.value;
    runFolder(v.name, v.result, extra, maps, reportExtra);
    const run = runs[runs.length - 1]!;
    for (const w of run.wells) {
      const s = boreDrawdown.get(w.id);
      if (s !== undefined && Number.isFinite(s)) w.drawdown = s;
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
    })),
    observationIds,
    warnings: summary.warnings,
    caution: CAUTION,
    scenarioFile: base.model.scenarioPath,
    program: `piezomap ${VERSION}`,
    files: summary.files,
  });
}

/**
 * Write a comparison into OUTDIR in one staged, atomic step. Earlier results there are refused unless
 * `overwrite` (then the files they list are replaced). Returns the comparison summary that was written.
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

/** The first reason the comparison must not be presented as sound (baseline first), or null. */
export function comparisonProblem(c: ComparisonResult): PiezomapError | null {
  if (c.baselineProblem) return c.baselineProblem;
  for (const v of c.variants) {
    if (v.problem) return new PiezomapError(v.problem.code, `variant "${v.name}": ${v.problem.message}`, v.problem.detail);
  }
  return null;
}
