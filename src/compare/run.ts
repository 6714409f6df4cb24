/**
 * Comparison of pumping plans: the baseline and every variant of a scenario, each solved and analysed as by
 * `solve`, plus the drawdown of each variant against the baseline (baseline head - variant head, positive =
 * lowered), drawdown at observation points, receptors and well bores, and where the added pumping comes from.
 *
 * Variants whose aquifer, prescribed heads and solver settings equal the baseline's (they change only terms that add
 * to the right-hand side: wells, recharge) are solved on the baseline's operator in the baseline's solver session
 * (multigrid hierarchy or factorisation set up once): only their terms and right-hand side are built. The others
 * are assembled and set up afresh. Every variant is resolved and checked before the first solve, memory included,
 * so bad input fails fast. The solves run as a plan: inline (`compareModels`) or by an executor
 * (`compareModelsWith`, e.g. the worker thread, so that signals are answered at once).
 */
import { exchangeDifference } from '../scenario/loadHeadDependent.js';
import { dirname } from 'node:path';
import { assembleSystem, withSources } from '../discretisation/assemble.js';
import {
  drawdownExtremes,
  drawdownField,
  drawdownNoiseLevel,
  pointDrawdown,
  totalWithdrawal,
  wellboreDrawdowns,
  zeroBelow,
} from '../analysis/drawdown.js';
import { locateObservations, locateReceptors, wellCells } from '../analysis/points.js';
import { resultProblem, type SolveResult } from '../analysis/result.js';
import { sourcesOfWater } from '../analysis/sources.js';
import { compareCapture } from '../analysis/tracking/compareCapture.js';
import { closeSession, openSession, runInline, runOn, type Plan } from '../executor/plan.js';
import type { Executor } from '../executor/types.js';
import { gridDifference } from '../grid.js';
import { inputError } from '../errors.js';
import { fieldsEqual } from '../field.js';
import { checkMemoryBudget, COMPARE_FRESH_VARIANT_BYTES_PER_CELL, COMPARE_VARIANT_BYTES_PER_CELL } from '../memory.js';
import { addTrackingInWorkers, solvePlan, solverChoice, withSolverSettings, type RunOptions } from '../pipeline.js';
import { loadScenario, mergeVariant, resolveScenario, type ScenarioJson } from '../scenario/load.js';
import type { ModelInput } from '../scenario/types.js';
import { leanestMethod, solverBytesPerCell } from '../solvers/registry.js';
import type { ComparisonResult, PreparedComparison, PreparedVariant, VariantComparison } from './types.js';

export interface CompareOptions extends RunOptions {
  /** Folder that relative paths of an in-memory scenario start from (default: the scenario file's folder, else the working folder). */
  baseDir?: string;
}

/** Read a scenario file (or take a loaded one) and compare its baseline with every variant; solves run by `executor` when given. */
export async function compareScenario(
  scenario: string | { model: ModelInput; raw: ScenarioJson },
  options: CompareOptions = {},
  executor?: Executor,
): Promise<ComparisonResult> {
  const loaded = typeof scenario === 'string' ? await loadScenario(scenario) : scenario;
  const variants = await resolveVariants(loaded.model, loaded.raw, options);
  return executor ? compareModelsWith(loaded.model, variants, executor, options) : compareModels(loaded.model, variants, options);
}

/** Every variant of a scenario as a model: its JSON merged into the baseline's and resolved like a scenario. */
export async function resolveVariants(
  model: ModelInput,
  raw: ScenarioJson,
  options: { baseDir?: string } = {},
): Promise<Array<{ name: string; model: ModelInput }>> {
  const inline = model.scenarioPath === '<inline>';
  const baseDir = options.baseDir ?? (inline ? process.cwd() : dirname(model.scenarioPath));
  const label = inline ? '<inline>' : model.scenarioPath;
  const result: Array<{ name: string; model: ModelInput }> = [];
  for (const variant of raw.variants ?? []) {
    const merged = mergeVariant(raw, variant);
    if (variant.title === undefined) merged.title = variantTitle(model.title, variant.name);
    result.push({ name: variant.name, model: await resolveScenario(merged, baseDir, label) });
  }
  return result;
}

/**
 * The title of a variant without its own: the baseline's title with a trailing "baseline" (", baseline",
 * "(baseline)", "- baseline") replaced by the variant's name, e.g. "Valley wellfield, baseline" -> "Valley
 * wellfield, variant more".
 */
export function variantTitle(baselineTitle: string, name: string): string {
  const stem = baselineTitle.replace(/[\s,;:\u2013\u2014-]*\(?\s*baseline\s*\)?\s*$/i, '').trim();
  return `${stem || baselineTitle}, variant ${name}`;
}

/**
 * Check a comparison without solving: variant names, the memory of everything held at once (the baseline's run and
 * every variant's system and results), every system (assembled, or terms on the baseline's operator), wells,
 * observations and receptors. Throws the input error a comparison would throw. `assembled`: the baseline's system
 * when the caller has already built it (then only the variants' memory is checked).
 */
export function prepareComparison(
  baselineInput: ModelInput,
  variants: ReadonlyArray<{ name: string; model: ModelInput }>,
  options: RunOptions = {},
  assembled?: Parameters<typeof withSources>[0],
): PreparedComparison {
  const names = new Set<string>();
  for (const v of variants) {
    const key = v.name.toLowerCase();
    if (!/^[A-Za-z0-9_-]+$/.test(v.name) || key === 'baseline') {
      throw inputError(`variant name "${v.name}" cannot name a result folder`, {
        hint: 'use letters, digits, "-" and "_"; "baseline" is reserved',
      });
    }
    if (names.has(key)) throw inputError(`duplicate variant name "${v.name}"`, { hint: 'variant names must be unique (case is ignored)' });
    names.add(key);
  }
  const baseline = withSolverSettings(baselineInput, options);
  const settled = variants.map(({ name, model }) => ({ name, model: withSolverSettings(model, options) }));
  const differences = settled.map((v) => operatorDifference(baseline, v.model));
  // Everything held at once, before the large allocations start: the baseline's run, and per variant its results
  // (and its own system when it cannot share the baseline's operator). Solvers of fresh variants are set up one at a time.
  const fresh = differences.filter((d) => d !== null).length;
  const method = baseline.solver.method;
  checkMemoryBudget(baseline.grid, { method, bytesPerCell: solverBytesPerCell(method) }, leanestMethod(), undefined, {
    bytesPerCell: settled.length * COMPARE_VARIANT_BYTES_PER_CELL + fresh * COMPARE_FRESH_VARIANT_BYTES_PER_CELL,
    what: `${settled.length} variant(s) held at once`,
  });
  if (!assembled) options.onProgress?.({ stage: 'assemble', message: 'assembling the baseline' });
  const baseSystem = assembled ?? assembleSystem(baseline);
  // Nonlinear terms change the operator during the solve, so their systems are never shared.
  const shareable = !baseSystem.terms.some((t) => t.nonlinear) && baseSystem.waterTable === null;
  locateObservations(baseSystem, baseline.observations);
  const receptors = baseline.receptors ?? [];
  const receptorCells = locateReceptors(baseSystem, receptors);
  const prepared: PreparedVariant[] = settled.map(({ name, model }, k) => {
    options.onProgress?.({ stage: 'assemble', message: `assembling variant "${name}"` });
    const difference = differences[k] ?? (shareable ? null : 'the baseline has head-dependent terms');
    const system = difference === null ? withSources(baseSystem, model) : assembleSystem(model);
    locateObservations(system, model.observations);
    return {
      name,
      model,
      system,
      shared: difference === null,
      sharing:
        difference === null
          ? 'same aquifer, fixed heads and solver: baseline operator and solver set-up reused'
          : `solved afresh: ${difference}`,
    };
  });
  return { baseline, baseSystem, receptors, receptorCells, variants: prepared };
}

/** Compare a baseline model with variant models (already resolved), solving in this thread. */
export function compareModels(
  baseline: ModelInput,
  variants: ReadonlyArray<{ name: string; model: ModelInput }>,
  options: RunOptions = {},
): ComparisonResult {
  return runInline(comparePlan(prepareComparison(baseline, variants, options), options));
}

/**
 * As compareModels, with the solves run by `executor`, and particle tracking after the solves with its long part in
 * worker threads (addTrackingInWorkers), so that this thread stays free for signals; the same result.
 */
export async function compareModelsWith(
  baseline: ModelInput,
  variants: ReadonlyArray<{ name: string; model: ModelInput }>,
  executor: Executor,
  options: RunOptions = {},
): Promise<ComparisonResult> {
  // the solver's threads start while this one assembles the baseline and the variants
  executor.prepare?.(baseline.grid.nx * baseline.grid.ny, solverChoice(withSolverSettings(baseline, options).solver));
  const prepared = prepareComparison(baseline, variants, options);
  const c = await runOn(comparePlan(prepared, options, false), executor);
  await addTrackingInWorkers(prepared.baseline, prepared.baseSystem, c.baseline);
  for (const v of c.variants) {
    await addTrackingInWorkers(v.result.model, v.result.system, v.result);
    v.capture = captureChange(c.baseline, v.result, prepared.receptors, prepared.receptorCells);
  }
  return c;
}

/** A variant's capture zones against the baseline's, when both were tracked. */
function captureChange(
  base: SolveResult,
  result: SolveResult,
  receptors: PreparedComparison['receptors'],
  receptorCells: Int32Array,
): VariantComparison['capture'] {
  return base.tracking && result.tracking ? compareCapture(base.tracking, result.tracking, receptors, receptorCells) : null;
}

/** The solves of a prepared comparison: the baseline, then every variant (on the baseline's session when shared). */
export function* comparePlan(prepared: PreparedComparison, options: RunOptions = {}, track = true): Plan<ComparisonResult> {
  const { baseline, baseSystem, receptors, receptorCells } = prepared;
  const t = performance.now();
  const session = yield* openSession(baseSystem.operator, solverChoice(baseline.solver));
  const setupSeconds = (performance.now() - t) / 1000;
  const baseResult = yield* solvePlan(baseline, baseSystem, options, {}, session, track);
  baseResult.stats.setupSeconds = session.setupSeconds;
  baseResult.timings.solve = (baseResult.timings.solve ?? 0) + setupSeconds;
  const baselineProblem = resultProblem(baseResult);
  const warnings: string[] = [];
  if (baselineProblem) warnings.push('the baseline is not a sound result, so no variant was solved and no drawdown computed');

  const compared: VariantComparison[] = [];
  // The baseline's session is kept while a later variant shares it, then closed (not held beside fresh set-ups).
  const lastShared = baselineProblem ? -1 : prepared.variants.map((v) => v.shared).lastIndexOf(true);
  let open = true;
  const release = function* () {
    if (open) yield* closeSession(session);
    open = false;
  };
  if (lastShared < 0) yield* release();
  if (!baselineProblem) {
    for (const [k, v] of prepared.variants.entries()) {
      options.onProgress?.({ stage: 'analyse', message: `solving variant "${v.name}"${v.shared ? ' on the baseline operator' : ''}` });
      const result = yield* solvePlan(v.model, v.system, options, {}, v.shared ? session : undefined, track);
      if (k === lastShared) yield* release();
      compared.push(analyseVariant(v, result, baseResult, receptors, receptorCells));
    }
  }
  yield* release();
  const inputFiles = [...new Set([...baseline.inputFiles, ...prepared.variants.flatMap((v) => v.model.inputFiles)])];
  return { baseline: baseResult, baselineProblem, variants: compared, receptors, warnings, inputFiles };
}

/**
 * Why a variant cannot use the baseline's operator and solver, or null when it can: the grid, conductivity,
 * thickness, anisotropy, fixed heads (cells, heads, names) and solver method/relaxation (after `options`' overrides)
 * must all be equal.
 */
export function operatorDifference(baseline: ModelInput, variant: ModelInput, options: RunOptions = {}): string | null {
  if (gridDifference(baseline.grid, variant.grid) !== null) return 'the grid differs';
  if (!fieldsEqual(baseline.conductivity, variant.conductivity)) return 'aquifer.conductivity differs';
  if (!fieldsEqual(baseline.thickness, variant.thickness)) return 'aquifer.thickness differs';
  if (baseline.anisotropy !== variant.anisotropy) return 'aquifer.anisotropy differs';
  const a = baseline.fixedHeads;
  const b = variant.fixedHeads;
  if (a.length !== b.length) return 'fixedHeads differ';
  for (let g = 0; g < a.length; g++) {
    if (a[g]!.name !== b[g]!.name || !fieldsEqual(a[g]!.cells, b[g]!.cells) || !fieldsEqual(a[g]!.heads, b[g]!.heads))
      return 'fixedHeads differ';
  }
  const exchange = exchangeDifference(baseline, variant);
  if (exchange !== null) return exchange;
  if (options.method === undefined && baseline.solver.method !== variant.solver.method) return 'solver.method differs';
  if (options.relaxation === undefined && baseline.solver.relaxation !== variant.solver.relaxation) return 'solver.relaxation differs';
  return null;
}

function analyseVariant(
  v: PreparedVariant,
  result: SolveResult,
  base: SolveResult,
  receptors: PreparedComparison['receptors'],
  receptorCells: Int32Array,
): VariantComparison {
  const problem = resultProblem(result);
  const grid = base.model.grid;
  const drawdown = problem ? null : drawdownField(base.head, result.head);
  const noiseLevel = drawdownNoiseLevel([
    { relativeResidual: base.stats.relativeResidual, head: base.head, datum: base.system.datum },
    { relativeResidual: result.stats.relativeResidual, head: result.head, datum: result.system.datum },
  ]);
  // Changes at rounding level are no change: zero them before anything is read or drawn from the field.
  if (drawdown) zeroBelow(drawdown, noiseLevel);
  const wellbores = wellboreDrawdowns(
    { wellbore: base.wellbore, cells: wellCells(grid, base.model.wells), head: base.head },
    { wellbore: result.wellbore, cells: wellCells(result.model.grid, result.model.wells) },
    problem === null,
  );
  for (const w of wellbores) if (Math.abs(w.drawdown) < noiseLevel) w.drawdown = 0;
  const { maxDrawdown, maxRise } = drawdown ? drawdownExtremes(grid, drawdown) : { maxDrawdown: null, maxRise: 0 };
  const obsCells = locateObservations(base.system, base.model.observations);
  return {
    name: v.name,
    result,
    sharedOperator: v.shared,
    sharing: v.sharing,
    problem,
    drawdown,
    maxDrawdown,
    maxRise,
    observations: base.model.observations.map((o, k) => pointDrawdown(grid, drawdown, o.id, o.x, o.y, obsCells[k]!)),
    receptors: receptors.map((r, k) => pointDrawdown(grid, drawdown, r.id, r.x, r.y, receptorCells[k]!)),
    wellbores,
    noiseLevel,
    withdrawal: totalWithdrawal(result.model.wells),
    sources: sourcesOfWater(base.budget, result.budget),
    capture: captureChange(base, result, receptors, receptorCells),
  };
}
