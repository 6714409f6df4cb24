import type { Grid } from '../grid.js';

/** Units are labels carried into outputs; the user keeps inputs consistent. */
export interface Units {
  length: 'm' | 'ft';
  time: 's' | 'd';
}

export interface WellInput {
  id: string;
  /** Map coordinates in the raster CRS (already reprojected from pointCrs). */
  x: number;
  y: number;
  /** length^3/time, negative = withdrawal. */
  rate: number;
  /** Well-bore radius, length units, when given. */
  radius?: number;
  /** Lowest acceptable well-bore head (pump intake, aquifer top), when given: a warning below it. */
  minimumHead?: number;
  /** Where it came from, for messages: e.g. `wells[2]` or `wells.csv line 4`. */
  source: string;
}

export interface ObservationInput {
  id: string;
  x: number;
  y: number;
  head: number;
  source: string;
}

/** A point where drawdown is reported (neighbour's well, spring, wetland edge), in the raster CRS. */
export interface ReceptorInput {
  id: string;
  x: number;
  y: number;
  source: string;
}

/** One fixed-head group, resolved to cells. */
export interface FixedHeadInput {
  name: string;
  /** Where it came from, for messages: e.g. `fixedHeads[1]`. */
  source: string;
  /** Cell indices this entry fixes (before removing inactive cells) and the head at each. */
  cells: Int32Array;
  heads: Float64Array;
  /**
   * True when the entry by definition fixes only active cells (an edge: "the active cells of that outer
   * column/row"), so its cells on inactive ground are not reported as ignored.
   */
  activeOnly?: boolean;
}

/** How a head-dependent entry exchanges water (../shared/spec/physics.md). */
export type HeadDependentKind = 'linear' | 'river' | 'drain';

/** One head-dependent entry (`headDependent[i]`), resolved to cells; built into a flow term in discretisation/terms. */
export interface HeadDependentInput {
  name: string;
  kind: HeadDependentKind;
  /** Where it came from, for messages: e.g. `headDependent[1]`. */
  source: string;
  /** Cells of the entry, ascending and unique (before removing inactive cells). */
  cells: Int32Array;
  /** Stage (river, linear) or level (drain) per cell. */
  heads: Float64Array;
  /** Conductance per cell, L^2/T (>= 0). */
  conductance: Float64Array;
  /** River only: elevation of the bed bottom per cell (NaN: none given, the loss is not limited). */
  bottom: Float64Array | null;
  /**
   * Reaches, for entries given as shapes with several features: the feature index each cell belongs to (the one
   * that gives the cell most of its conductance), and the reaches' names. null when the entry has one reach.
   */
  reach: Int32Array | null;
  reachNames: string[];
  /** True for an edge (by definition only its active cells): cells on inactive ground are not reported. */
  activeOnly?: boolean;
}

/** Areal leakage through a confining bed (`leakage`). */
export interface LeakageInput {
  name: string;
  /** Head on the far side of the confining bed, per cell or one number (NaN: no leakage at that cell). */
  sourceHead: Float64Array | number;
  /** Leakance K'/b' (1/T), per cell or one number (NaN: no leakage at that cell). */
  leakance: Float64Array | number;
}

/** Particle tracking settings (scenario key `tracking`), points in the raster CRS. */
export interface TrackingSettings {
  /** Capture times (> 0, ascending, unique), time units. */
  captureTimes: number[];
  particlesPerWell: number;
  points: Array<{ id: string; x: number; y: number; source: string }>;
  /** Time limit of every track, when given. */
  maxTime?: number;
}

export interface SolverSettings {
  method: string;
  tolerance: number;
  maxIterations: number;
  relaxation?: number;
  /** Threads of the solve: a whole number >= 1 or 'auto' (absent: 'auto'). */
  threads?: number | 'auto';
}

/** A scenario with every raster read, every path resolved and every point in the raster CRS. */
export interface ModelInput {
  title: string;
  units: Units;
  /** Absolute path of the scenario file (or '<inline>'). */
  scenarioPath: string;
  grid: Grid;
  /** Conductivity per cell; NaN or <= 0 = inactive. */
  conductivity: Float64Array;
  /**
   * Thickness per cell, or one number. For unconfined and convertible aquifers it only marks the active cells (top -
   * bottom where a top is given, else 1): their transmissivity comes from the heads (src/discretisation/aquifer.ts).
   */
  thickness: Float64Array | number;
  /** Absent = confined. Unconfined and convertible need aquiferBottom (and convertible aquiferTop). */
  aquiferType?: 'confined' | 'unconfined' | 'convertible';
  /** Starting heads of the outer iteration (water-table aquifers), when given. */
  initialHead?: Float64Array | number;
  anisotropy: number;
  /** Effective porosity per cell or one number, when given (for average linear velocities). */
  porosity?: Float64Array | number;
  /** Elevations (length units; NaN where a raster has no data), when given: for the physical sanity warnings only. */
  aquiferTop?: Float64Array | number;
  aquiferBottom?: Float64Array | number;
  groundSurface?: Float64Array | number;
  fixedHeads: FixedHeadInput[];
  /** Recharge per cell (length/time), or one number. */
  recharge: Float64Array | number;
  /** Head-dependent boundaries (rivers, drains, linear exchanges), in scenario order; absent = none. */
  headDependent?: HeadDependentInput[];
  /** Areal leakage through a confining bed; absent = none. */
  leakage?: LeakageInput;
  wells: WellInput[];
  observations: ObservationInput[];
  /** Receptors (optional key; absent = none). */
  receptors?: ReceptorInput[];
  solver: SolverSettings;
  /** Particle tracking (optional key; absent = none). Needs `porosity`. */
  tracking?: TrackingSettings;
  /** Uncertainty ensemble settings (`ensemble` key; absent = none). */
  ensemble?: EnsembleInput;
  /** Input files read, for the summary. */
  inputFiles: string[];
  /** Non-fatal remarks found while loading. */
  warnings: string[];
}

/** A measured conductivity for conditioning an ensemble, in the raster CRS. */
export interface ConditioningPoint {
  id: string;
  x: number;
  y: number;
  k: number;
  source: string;
}

/** The `ensemble` key, resolved: correlation lengths as [along x, along y], conditioning points read. */
export interface EnsembleInput {
  realisations: number;
  seed: number;
  sd: number;
  correlationLength: [number, number];
  model: 'exponential' | 'gaussian';
  conditioning: ConditioningPoint[];
  /** The conditioning file as given (for messages), when there is one. */
  conditioningFile?: string;
  drawdownThresholds: number[];
  percentiles: number[];
  /** With `tracking`: capture-zone probability per well (false: no tracking in the realisations). */
  captureProbability: boolean;
}
