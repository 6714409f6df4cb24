/**
 * piezomap as a library, for scripts that run many scenarios or variants without the CLI.
 * Re-exports only: each function lives in the module of its one job (see DEVELOPERS.md).
 *
 *   load a scenario      loadScenario, resolveScenario, mergeVariant, parseScenarioJson,
 *                        checkMagnitudes (what resolveScenario checks, for a ModelInput built by hand)
 *   solve it             solveScenarioFile, solveModel (inline) or solveModelWith (an executor), writeSolveResults
 *   compare variants     compareScenario, compareModels, compareModelsWith, resolveVariants, writeComparisonResults
 *   analyse              waterBudget, sourcesOfWater, wellboreHeads, calibrationStatistics, headAtPoint
 *   rasters              readRaster, encodeFloat32GeoTiff
 *   the bundled demo     demoScenarioPath
 */
export { PiezomapError, inputError, exitCodeFor, type ErrorCode, type ErrorDetail } from './errors.js';
export { CAUTION } from './caution.js';
export { VERSION } from './version.js';
export { demoScenarioPath } from './demoPath.js';
export { cellAt, cellCentre, cellWidth, cellHeight, crsLabel, type Grid, type Crs } from './grid.js';

export { loadScenario, resolveScenario, mergeVariant, type ScenarioJson, type VariantJson } from './scenario/load.js';
export { parseScenarioJson } from './scenario/schema.js';
export { checkMagnitudes, CARRIED_RANGE, HEAD_LIMIT } from './scenario/magnitudes.js';
export type {
  ModelInput,
  WellInput,
  ObservationInput,
  ReceptorInput,
  FixedHeadInput,
  HeadDependentInput,
  HeadDependentKind,
  LeakageInput,
  SolverSettings,
  Units,
} from './scenario/types.js';

export {
  solveScenarioFile,
  solveModel,
  solveModelWith,
  assembleModel,
  solvePlan,
  type RunOptions,
  type ProgressEvent,
} from './pipeline.js';
export { resultProblem, BUDGET_DISCREPANCY_LIMIT_PERCENT, type SolveResult } from './analysis/result.js';
export { resultFiles, writeSolveResults } from './output/solveFiles.js';
export { resolveSolverSettings, parseSolverOption, type SolverOverrides } from './scenario/solverSettings.js';
export { inlineExecutor } from './executor/inline.js';
export { workerExecutor, workerAvailable } from './executor/worker.js';
export { runInline, runOn, type Plan } from './executor/plan.js';
export type { Executor, SolverSession, SolverChoice } from './executor/types.js';
export {
  compareScenario,
  compareModels,
  compareModelsWith,
  prepareComparison,
  resolveVariants,
  operatorDifference,
  type CompareOptions,
} from './compare/run.js';
export {
  comparisonProblem,
  type ComparisonResult,
  type VariantComparison,
  type PreparedComparison,
  type PreparedVariant,
  type PointDrawdown,
  type WellboreDrawdown,
} from './compare/types.js';
export { drawdownField } from './analysis/drawdown.js';
export { comparisonFiles, writeComparisonResults } from './output/comparisonFiles.js';

export { assembleSystem, withSources, headsFromSolution, type FlowSystem } from './discretisation/assemble.js';
export { TERM_KINDS } from './discretisation/terms/registry.js';
export type { FlowTerm, TermKind } from './discretisation/terms/types.js';
export { createSolver, solverMethodNames, chooseAutoMethod } from './solvers/registry.js';
export type { Solver, SolveStats, SolveOptions, StopReason } from './solvers/types.js';

export { waterBudget, type WaterBudget, type BudgetTerm, type BudgetPart } from './analysis/budget.js';
export { sourcesOfWater, type SourcesOfWater, type SourceOfWater } from './analysis/sources.js';
export {
  wellboreHeads,
  equivalentBlockRadius,
  peacemanWellboreHead,
  DEFAULT_WELL_RADIUS,
  type WellboreResult,
} from './analysis/wellbore.js';
export { calibrationStatistics, type CalibrationStatistics } from './analysis/calibration.js';
export { headAtPoint, type WellResult, type ObservationResult } from './analysis/points.js';

export { readRaster, encodeFloat32GeoTiff, type RasterData, type EncodeOptions } from './raster/index.js';
export { buildSummary, formatSummary, type SummaryJson } from './output/summary.js';
export { comparisonCsv, comparisonSummary, formatComparison, type ComparisonSummaryJson } from './output/comparison.js';
export {
  trackSolution,
  compareCapture,
  buildTrackingField,
  captureZones,
  trackPoints,
  trackingInputFromSystem,
  type TrackingRun,
  type CaptureResult,
  type CaptureComparison,
  type PointTrack,
  type TrackingInput,
  type TrackingField,
} from './analysis/tracking/index.js';
export { saturatedThickness } from './discretisation/thickness.js';

// Uncertainty ensembles (docs/ensembles.md).
export { runEnsemble, loadEnsemble, parseShard, shardRange, type EnsembleOptions, type EnsembleRun } from './ensemble/run.js';
export {
  ensembleFiles,
  ensembleCsv,
  shardFiles,
  recordSource,
  captureCounts,
  type EnsembleSource,
  type EnsembleFileOptions,
  type EnsembleSummaryJson,
} from './ensemble/files.js';
export { readShards } from './ensemble/shard.js';
export { GaussianFieldGenerator, covariance, type FieldSpec, type CovarianceModel } from './ensemble/field.js';
export { Conditioner, type ConditioningDatum } from './ensemble/conditioning.js';
export { cellStatistics, pointStatistics, quantileSorted } from './ensemble/stats.js';
export type { EnsembleSetup, RealisationRecord, RunRecord, PointColumn } from './ensemble/types.js';
