/**
 * The one-way flow of a solve: load -> assemble -> solve -> analyse. Library users call these steps directly; the
 * CLI only parses arguments and formats what they return; result files are built and written in src/output/.
 *
 * The solve is a plan (src/executor/plan.ts) run either inline (`solveModel`, synchronous) or by an executor
 * (`solveModelWith`, e.g. the worker thread): one code path for both.
 */
import { assembleSystem, headsFromSolution, type FlowSystem } from './discretisation/assemble.js';
import { solveOuter } from './discretisation/outerLoop.js';
import { waterBudget } from './analysis/budget.js';
import { observationResults, wellResults, locateObservations, locateReceptors } from './analysis/points.js';
import { wellboreHeads, wellboreWarnings } from './analysis/wellbore.js';
import { sanityWarnings } from './analysis/sanity.js';
import { calibrationStatistics } from './analysis/calibration.js';
import { resultProblem, type SolveResult } from './analysis/result.js';
import { trackSolution, trackSolutionInWorkers } from './analysis/tracking/run.js';
import { closeSession, openSession, runInline, runOn, type Plan, type SessionHandle } from './executor/plan.js';
import type { Executor } from './executor/types.js';
import { loadScenario } from './scenario/load.js';
import { resolveSolverSettings, type SolverOverrides } from './scenario/solverSettings.js';
import type { ModelInput, SolverSettings } from './scenario/types.js';
import { leanestMethod, solverBytesPerCell } from './solvers/registry.js';
import { checkMemoryBudget, TRACKING_BYTES_PER_CELL } from './memory.js';

export interface RunOptions extends SolverOverrides {
  /** Progress of long stages; return false from a solver progress call to stop. */
  onProgress?: (event: ProgressEvent) => boolean | void;
}

export type ProgressEvent =
  | { stage: 'load' | 'assemble' | 'analyse' | 'write'; message: string }
  | { stage: 'solve'; iteration: number; relativeResidual: number; tolerance: number; maxIterations: number };

const now = () => performance.now() / 1000;

export function peakMemoryMiB(): number {
  // resourceUsage().maxRSS is in kilobytes.
  return process.resourceUsage().maxRSS / 1024;
}

/**
 * The model with the solver settings a run uses (the scenario's, with the options' overrides, validated once), so
 * that the solve and the summary see the tolerance, cap and method that applied. Shares every array with `model`.
 */
export function withSolverSettings(model: ModelInput, options: SolverOverrides): ModelInput {
  const solver = resolveSolverSettings(model.solver, options);
  const same = (Object.keys(solver) as Array<keyof SolverSettings>).every((k) => solver[k] === model.solver[k]);
  return same && Object.keys(solver).length === Object.keys(model.solver).length ? model : { ...model, solver };
}

/** Assemble, solve and analyse a loaded model in this thread. Does not throw on non-convergence: check `stats.converged`. */
export function solveModel(model: ModelInput, options: RunOptions = {}, timings: Record<string, number> = {}): SolveResult {
  const settled = withSolverSettings(model, options);
  const system = assembleModel(settled, options, timings);
  return runInline(solvePlan(settled, system, options, timings));
}

/** As solveModel, with the solves run by `executor` (e.g. workerExecutor, so that signals are answered at once). */
export async function solveModelWith(
  model: ModelInput,
  executor: Executor,
  options: RunOptions = {},
  timings: Record<string, number> = {},
): Promise<SolveResult> {
  const settled = withSolverSettings(model, options);
  // the solver's threads start while this one assembles
  executor.prepare?.(model.grid.nx * model.grid.ny, solverChoice(settled.solver));
  const system = assembleModel(settled, options, timings);
  // Tracking after the plan, its long part in worker threads, so that this thread stays free for signals.
  const result = await runOn(solvePlan(settled, system, options, timings, undefined, false), executor);
  await addTrackingInWorkers(settled, system, result);
  return result;
}

/**
 * Everything before the solver: the memory budget check, the assembly, and the observation points located.
 * `model.solver` is taken as resolved (withSolverSettings).
 */
export function assembleModel(model: ModelInput, options: RunOptions = {}, timings: Record<string, number> = {}): FlowSystem {
  const t = now();
  // Refuse a grid too large for this machine before the large allocations start.
  const method = model.solver.method;
  const tracking = model.tracking
    ? { bytesPerCell: TRACKING_BYTES_PER_CELL, what: 'particle tracking', hint: ', or drop "tracking"' }
    : null;
  checkMemoryBudget(model.grid, { method, bytesPerCell: solverBytesPerCell(method) }, leanestMethod(), undefined, tracking);
  options.onProgress?.({ stage: 'assemble', message: 'assembling the flow system' });
  const system = assembleSystem(model);
  // Points are checked before the long solve so bad input fails fast.
  locateObservations(system, model.observations);
  locateReceptors(system, model.receptors ?? []);
  timings.assemble = now() - t;
  return system;
}

/**
 * Solve and analyse an assembled system (model.solver resolved). With `session`, the solver set up for an equal
 * operator is reused (e.g. pumping variants on the baseline's operator) and its set-up time is not counted again;
 * otherwise a session is opened and closed here.
 */
export function* solvePlan(
  model: ModelInput,
  system: FlowSystem,
  options: RunOptions = {},
  timings: Record<string, number> = {},
  session?: SessionHandle,
  track = true,
): Plan<SolveResult> {
  const t = now();
  const { tolerance, maxIterations } = model.solver;
  const own = session === undefined;
  const used = session ?? (yield* openSession(system.operator, solverChoice(model.solver)));
  const answer = yield* solveOuter(system, used, {
    tolerance,
    maxIterations,
    onProgress: (iteration, relativeResidual) =>
      options.onProgress?.({ stage: 'solve', iteration, relativeResidual, tolerance, maxIterations }),
  });
  if (own) yield* closeSession(used);
  answer.stats.setupSeconds = own ? used.setupSeconds : 0;
  timings.solve = now() - t;
  const result = analyseSolution(model, system, answer.x, answer.stats, timings);
  result.outer = answer.outer;
  if (track) addTracking(model, system, result);
  return result;
}

/**
 * Particle tracking (scenario key `tracking`) on a sound result only: tracks on an unconverged head field would
 * look like results. Its warnings join the result's.
 */
export function addTracking(model: ModelInput, system: FlowSystem, result: SolveResult): void {
  if (!model.tracking || resultProblem(result) !== null) return;
  const tracking = trackSolution(model, system, result.head)!;
  result.tracking = tracking;
  for (const w of tracking.warnings) result.warnings.push(w);
  result.timings.tracking = tracking.seconds;
}

/** As addTracking, with the end rasters computed in worker threads (trackSolutionInWorkers); the same result. */
export async function addTrackingInWorkers(model: ModelInput, system: FlowSystem, result: SolveResult): Promise<void> {
  if (!model.tracking || resultProblem(result) !== null) return;
  const tracking = (await trackSolutionInWorkers(model, system, result.head))!;
  result.tracking = tracking;
  for (const w of tracking.warnings) result.warnings.push(w);
  result.timings.tracking = tracking.seconds;
}

/** The solver a session sets up for these settings (threads: 'auto' unless set). */
export function solverChoice(settings: SolverSettings): { method: string; relaxation?: number; threads: number | 'auto' } {
  const threads = settings.threads ?? 'auto';
  return settings.relaxation === undefined
    ? { method: settings.method, threads }
    : { method: settings.method, relaxation: settings.relaxation, threads };
}

/** Everything after the solver: heads from the solution x = h - datum, the water budget, point results and warnings. */
export function analyseSolution(
  model: ModelInput,
  system: FlowSystem,
  x: Float64Array,
  stats: SolveResult['stats'],
  timings: Record<string, number> = {},
): SolveResult {
  const t = now();
  const head = headsFromSolution(system, x);
  const budget = waterBudget(system, head);
  const warnings = [...model.warnings];
  for (const term of system.terms) warnings.push(...term.notes(true));
  const observations = observationResults(system, model.observations, head);
  const wellbore = wellboreHeads(model, system, head);
  // One warning per well is possible: appended by a loop, as spreading a long list into push overflows the stack.
  for (const w of wellboreWarnings(wellbore, model.units.length)) warnings.push(w);
  for (const w of sanityWarnings(model, system, head, wellbore)) warnings.push(w);
  const result: SolveResult = {
    model,
    system,
    head,
    stats,
    outer: { iterations: 1, stopReason: 'linear', history: [], innerIterations: stats.iterations },
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

export async function solveScenarioFile(path: string, options: RunOptions = {}, executor?: Executor): Promise<SolveResult> {
  const timings: Record<string, number> = {};
  const t = now();
  options.onProgress?.({ stage: 'load', message: `reading ${path}` });
  const { model } = await loadScenario(path);
  timings.load = now() - t;
  return executor ? solveModelWith(model, executor, options, timings) : solveModel(model, options, timings);
}
