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
  columns: PointColumn[];
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
  runs: Array<{
    name: string;
    converged: number;
    notConverged: Array<{ realisation: number; reason: string }>;
    headAtPoints: PointSummary[];
    drawdownAtPoints?: Array<PointSummary & { exceedance: Array<{ threshold: number; probability: number | null }> }>;
  }>;
  files: string[];
  warnings: string[];
  run: EnsembleRunInfo;
}
