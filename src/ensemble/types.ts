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
