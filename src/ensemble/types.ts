/** What one realisation of an ensemble keeps for the statistics (src/ensemble/realisation.ts makes it). */

/** A point column of ensemble.csv: a well, observation or receptor, by id. */
export interface PointColumn {
  id: string;
  kind: 'well' | 'observation' | 'receptor';
  x: number;
  y: number;
}

/** One run (baseline or variant) of one realisation. */
export interface RunRecord {
  converged: boolean;
  /** Why not, when not. */
  reason: string | null;
  /** Head per cell (NaN inactive); null when not converged. */
  head: Float32Array | null;
  /** Variants: drawdown per cell against the realisation's baseline; null for the baseline or when unsound. */
  drawdown: Float32Array | null;
  /** Head at each point column; null where the run has no such point or is not converged. */
  points: Array<number | null>;
  /**
   * Capture zones of the run's withdrawal wells (when the setup has `capture`), one code per cell: -1 where no
   * listed well captures the cell, else k * (T + 1) + c for well k of the run's list (`EnsembleSetup.capture`) and
   * c the first capture time (of T, ascending) within which the water reaches the well, c = T: only in the
   * steady zone. Null when not converged or without capture.
   */
  capture: Int16Array | null;
}

/** What the statistics need of a run besides its per-cell fields: flags and point values. */
export type RunPoints = Pick<RunRecord, 'converged' | 'reason' | 'points'>;

/** A realisation's flags and point values (what ensemble.csv, the point statistics and the report read). */
export interface RealisationPoints {
  index: number;
  runs: RunPoints[];
}

/** A withdrawal well (or wells sharing a cell, ids joined with "+") whose capture zones are counted. */
export interface CaptureWell {
  id: string;
  /** File-name stem: the id with characters other than letters, digits, "-" and "_" replaced by "-", made unique. */
  stem: string;
}

/** Capture-zone probability settings of an ensemble: the capture times and each run's wells. */
export interface CaptureSetup {
  /** Capture times, ascending (scenario time units); the steady zone comes after them. */
  times: number[];
  /** Per run (baseline, then variants): its withdrawal wells, in scenario order. */
  wells: CaptureWell[][];
}

export interface RealisationRecord {
  index: number;
  /** Baseline first, then the variants in scenario order. */
  runs: RunRecord[];
}

/**
 * What the result files need besides the records, as plain JSON: written into every shard folder, so that a merge
 * needs neither the scenario nor its rasters, and taken through JSON in a one-machine run too (same numbers).
 */
export interface EnsembleSetup {
  /** Hash of the scenario as validated, the solver overrides and the program version: shards must agree. */
  fingerprint: string;
  title: string;
  scenario: string;
  units: { length: string; time: string };
  grid: import('../grid.js').Grid;
  realisations: number;
  seed: number;
  logConductivity: { sd: number; correlationLength: [number, number]; model: string };
  conditioning: { file: string; points: number } | null;
  embedding: { mx: number; my: number; minEigenvalue: number; maxEigenvalue: number; clipped: number };
  percentiles: number[];
  drawdownThresholds: number[];
  /** 'baseline', then the variant names. */
  runs: string[];
  /** Per run: the title of the baseline scenario, then of each variant as merged (for the maps' subtitles). */
  runTitles: string[];
  columns: PointColumn[];
  /** Per run (baseline, then variants): its wells, for the maps. */
  runWells: Array<Array<{ id: string; x: number; y: number; rate: number }>>;
  /** Capture-zone probability (scenario with `tracking` and `ensemble.captureProbability` not false); else null. */
  capture: CaptureSetup | null;
  warnings: string[];
}

/** What a run (timings, hosts, workers, shards) says about itself: the one part of summary.json that may differ. */
export interface EnsembleRunInfo {
  workers?: number;
  hosts: string[];
  shards?: Array<{ shard: string; realisations: [number, number]; host: string; workers: number; seconds: number }>;
  seconds: Record<string, number>;
}

export interface PointSummary {
  id: string;
  kind: string;
  mean: number | null;
  sd: number | null;
  count: number;
  percentiles: Record<string, number | null>;
}

/** One well's capture-zone probabilities in summary.json (per zone: each capture time, then steady = null). */
export interface CaptureSummary {
  well: string;
  zones: Array<{
    /** Capture time, null for the steady zone. */
    time: number | null;
    file: string;
    /** Sum over cells of probability x cell area (square length units): the mean zone area. */
    expectedArea: number;
    /** Area of the cells with probability >= 0.5 and >= 0.9. */
    areaP50: number;
    areaP90: number;
    /** Probability that each receptor's cell lies in the zone. */
    receptors: Array<{ id: string; probability: number | null }>;
  }>;
}

export interface EnsembleSummaryJson {
  piezomap: string;
  command: 'ensemble';
  caution: string;
  title: string;
  scenario: string;
  units: { length: string; time: string };
  realisations: number;
  seed: number;
  logConductivity: EnsembleSetup['logConductivity'];
  conditioning: EnsembleSetup['conditioning'];
  embedding: EnsembleSetup['embedding'];
  percentiles: number[];
  drawdownThresholds: number[];
  percentileMethod: string;
  /** With capture probability: the capture times of the zones (the steady zone comes after them). */
  captureTimes?: number[];
  runs: Array<{
    name: string;
    converged: number;
    notConverged: Array<{ realisation: number; reason: string }>;
    headAtPoints: PointSummary[];
    drawdownAtPoints?: Array<PointSummary & { exceedance: Array<{ threshold: number; probability: number | null }> }>;
    captureProbability?: CaptureSummary[];
  }>;
  files: string[];
  warnings: string[];
  run: EnsembleRunInfo;
}
