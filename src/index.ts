/**
 * piezomap as a library, for scripts that run many scenarios or variants without the CLI.
 * Re-exports only: each function lives in the module of its one job (see DEVELOPERS.md).
 *
 *   load a scenario      loadScenario, resolveScenario, mergeVariant, parseScenarioJson,
 *                        checkMagnitudes (what resolveScenario checks, for a ModelInput built by hand)
 *   solve it             solveScenarioFile, solveModel, prepareSolver + solveSystem, writeSolveResults
 *   compare variants     compareScenario, compareModels, resolveVariants, writeComparisonResults
 *   analyse              waterBudget, sourcesOfWater, wellboreHeads, calibrationStatistics, headAtPoint
 *   rasters              readRaster, encodeFloat32GeoTiff
 */
export { PiezomapError, inputError, exitCodeFor, type ErrorCode, type ErrorDetail } from './errors.js';
export { CAUTION } from './caution.js';
export { VERSION } from './version.js';
export { cellAt, cellCentre, cellWidth, cellHeight, crsLabel, type Grid, type Crs } from './grid.js';

export { loadScenario, resolveScenario, mergeVariant, type ScenarioJson, type VariantJson } from './scenario/load.js';
export { parseScenarioJson } from './scenario/schema.js';
export { checkMagnitudes, CARRIED_RANGE, HEAD_LIMIT } from './scenario/magnitudes.js';
export type { ModelInput, WellInput, ObservationInput, ReceptorInput, FixedHeadInput, SolverSettings, Units } from './scenario/types.js';

export {
  solveScenarioFile,
  solveModel,
  solveSystem,
  prepareSolver,
  resultProblem,
  resultFiles,
  writeSolveResults,
  BUDGET_DISCREPANCY_LIMIT_PERCENT,
  type RunOptions,
  type ProgressEvent,
  type SolveResult,
} from './pipeline.js';
export {
  compareScenario,
  compareModels,
  prepareComparison,
  resolveVariants,
  operatorDifference,
  drawdownField,
  comparisonFiles,
  writeComparisonResults,
  comparisonProblem,
  type CompareOptions,
  type ComparisonResult,
  type VariantComparison,
  type PreparedComparison,
  type PreparedVariant,
  type PointDrawdown,
  type WellboreDrawdown,
} from './compare.js';

export { assembleSystem, withSources, headsFromSolution, type FlowSystem } from './discretisation/assemble.js';
export { createSolver, solverMethodNames, chooseAutoMethod } from './solvers/registry.js';
export type { Solver, SolveStats, SolveOptions, StopReason } from './solvers/types.js';

export { waterBudget, type WaterBudget, type BudgetTerm } from './analysis/budget.js';
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
