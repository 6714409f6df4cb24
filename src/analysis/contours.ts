/**
 * Head and drawdown contours: levels at a round interval, lines traced by marching squares (./contourTrace.ts, one
 * pass over the grid for all levels), GeoJSON out.
 *
 * How inactive cells are kept from making false lines. The tracer gives, for each level L, the rings that bound the
 * region {value >= L} on the grid of cell centres, treating NaN (inactive) and everything outside the raster as
 * below every level: the rings d3-contour gives without its smoothing (the tracer piezomap used before; the tests
 * compare the two line by line). Those rings are the true isoline plus pieces that run along the edge of the data
 * (inactive cells, raster border). Every ring vertex sits on the midpoint between two neighbouring cell centres; we
 * keep a vertex only when both of those cells are active (a genuine crossing of L between two heads); a ring is cut
 * wherever it touches a vertex with an inactive or outside cell. The genuine vertices are then placed by linear
 * interpolation between the two heads, as d3-contour's own smoothing does. Consequence: lines stop up to one cell
 * short of inactive areas and of the raster border, and never trace the outline of a hole.
 *
 * Coordinates: the tracer's unit is one cell and a cell's value sits at its centre, (col + 0.5, row + 0.5); so a
 * point (u, v) in that space maps to x = originX + u * pixelWidth, y = originY + v * pixelHeight.
 */
import type { Grid } from '../grid.js';
import { inputError } from '../errors.js';
import { type TracedRings, traceRings } from './contourTrace.js';

/** A polyline in map coordinates of the raster CRS: [x0, y0, x1, y1, ...]. Closed lines repeat the first point. */
export type Polyline = Float64Array;

export interface ContourLevel {
  level: number;
  lines: Polyline[];
}

export interface ContourSet {
  /** Every level asked for, in ascending order; a level may have no lines. */
  levels: ContourLevel[];
  /** Spacing between levels when they are evenly spaced, else null. */
  interval: number | null;
  /** Why the levels differ from those asked for (an interval widened to bound their number), when they do. */
  note?: string | null;
}

export interface ContourOptions {
  /** Spacing between levels (> 0). Default: automatic round interval, see `roundInterval`. */
  interval?: number;
  /** Explicit levels; overrides `interval`. */
  levels?: readonly number[];
  /** Levels are multiples of `interval` offset by `base`. Default 0. */
  base?: number;
}

/** Steps tried for an automatic interval, times a power of ten. */
const ROUND_STEPS = [1, 2, 2.5, 5] as const;
const MAX_AUTO_LEVELS = 25;
/**
 * Most levels one contour set may have, whoever asks: ten times the automatic number. Each level costs its lines in
 * the GeoJSON (and their tracing); without a bound an interval of 0.001 m wrote 121 MB in 41 s (with the tracer of
 * the time: a pass over the grid per level), and 1e-300 never ended. A requested interval that gives more is widened (contourField) or refused (contourLevels).
 */
export const MAX_CONTOUR_LEVELS = 10 * MAX_AUTO_LEVELS;
/**
 * Levels × cells one contour set may trace (a level's lines, and so their tracing and GeoJSON, grow with the grid):
 * on large grids the level bound shrinks so that contouring stays a matter of seconds, but never below the automatic
 * 25 levels.
 */
const MAX_LEVEL_CELLS = 2e8;

/** Most levels a requested interval may give on a grid of `cells` cells (see MAX_LEVEL_CELLS). */
export function contourLevelLimit(cells: number): number {
  return Math.max(MAX_AUTO_LEVELS, Math.min(MAX_CONTOUR_LEVELS, Math.floor(MAX_LEVEL_CELLS / Math.max(1, cells))));
}

/**
 * The smallest round interval (1, 2, 2.5 or 5 times a power of ten), at least `atLeast`, that gives at most
 * `maxLevels` levels across [min, max]; since consecutive round steps differ by at most 2.5x, the automatic
 * default (25 levels) gives about 10 to 25. Returns null when the range is empty or not finite.
 */
export function roundInterval(min: number, max: number, maxLevels: number = MAX_AUTO_LEVELS, atLeast = 0): number | null {
  const range = max - min;
  if (!Number.isFinite(range) || range <= 0) return null;
  const start = Math.max(range / maxLevels, atLeast);
  let power = Math.pow(10, Math.floor(Math.log10(start)) - 1);
  // Bounded: each decade multiplies the interval by ten, and one interval of `range` gives no level at all;
  // a power that underflows to zero (ranges near the smallest double) starts at the smallest positive one.
  if (!(power > 0)) power = Number.MIN_VALUE;
  for (let decade = 0; decade < 700; decade++) {
    for (const step of ROUND_STEPS) {
      const interval = step * power;
      if (interval >= atLeast && countLevels(min, max, interval, 0) <= maxLevels) return interval;
    }
    power *= 10;
  }
  return null;
}

/**
 * Multiples of `interval` (offset by `base`) strictly between min and max, ascending. More than
 * MAX_CONTOUR_LEVELS of them is an input error (contourField widens the interval instead).
 */
export function contourLevels(min: number, max: number, interval: number, base = 0): number[] {
  if (!(interval > 0) || !Number.isFinite(interval)) {
    throw inputError(`contour interval must be a positive number, got ${interval}`, {
      key: 'contours.interval',
      hint: 'give a spacing in head units, e.g. 0.5',
    });
  }
  const levels: number[] = [];
  if (!(max > min)) return levels;
  const count = countLevels(min, max, interval, base);
  if (!(count <= MAX_CONTOUR_LEVELS)) {
    throw inputError(
      `contour interval ${interval} gives ${countText(count)} levels across ${min} to ${max}; at most ${MAX_CONTOUR_LEVELS} are drawn`,
      {
        key: 'contours.interval',
        hint: `give an interval of at least ${roundInterval(min, max, MAX_CONTOUR_LEVELS) ?? (max - min) / MAX_CONTOUR_LEVELS}`,
      },
    );
  }
  const first = Math.floor((min - base) / interval) + 1;
  // The loop counts levels, not multiples: beyond 2^53 a multiple k + 1 equals k, and a loop over k never ends.
  for (let i = 0; i < count; i++) {
    // Round to the interval's own decimals so that 0.1 * 3 prints and compares as 0.3.
    const level = roundTo(base + (first + i) * interval, decimalsOf(interval) + decimalsOf(base));
    if (level > min && level < max && level !== levels[levels.length - 1]) levels.push(level);
  }
  return levels;
}

/** Number of multiples of `interval` (offset by `base`) strictly between min and max (Infinity when not finite). */
function countLevels(min: number, max: number, interval: number, base: number): number {
  const count = Math.ceil((max - base) / interval) - 1 - Math.floor((min - base) / interval);
  return Number.isFinite(count) ? Math.max(0, count) : Infinity;
}

/** Number of decimals a round number needs to print exactly (0..9). */
export function decimalsOf(value: number): number {
  for (let d = 0; d < 9; d++) {
    const scaled = value * Math.pow(10, d);
    if (Math.abs(scaled - Math.round(scaled)) < 1e-7 * Math.max(1, Math.abs(scaled))) return d;
  }
  return 9;
}

function roundTo(value: number, decimals: number): number {
  const f = Math.pow(10, decimals);
  return Math.round(value * f) / f;
}

/** Finite minimum and maximum of a field, ignoring NaN; null when no value is finite. */
export function finiteRange(values: Float64Array): { min: number; max: number } | null {
  let min = Infinity;
  let max = -Infinity;
  for (let p = 0; p < values.length; p++) {
    const v = values[p]!;
    if (v < min) min = v;
    if (v > max) max = v;
  }
  return min <= max ? { min, max } : null;
}

/**
 * Contour lines of a cell-centred field (head or drawdown; NaN = inactive) in the raster's map coordinates.
 * Levels: `options.levels`, else multiples of `options.interval`, else an automatic round interval.
 */
export function contourField(grid: Grid, values: Float64Array, options: ContourOptions = {}): ContourSet {
  const plan = contourPlan(grid, values, options);
  return { levels: traceContourLevels(grid, values, plan.levels), interval: plan.interval, note: plan.note };
}

/** The levels contourField traces, with its interval and note: the part that needs the whole field at once. */
export interface ContourPlan {
  levels: number[];
  interval: number | null;
  note: string | null;
}

/**
 * The levels, interval and note of `contourField` for these values and options, without tracing: each level is traced
 * on its own (`traceContourLevels`), so that the levels of one field can be traced in several threads.
 */
export function contourPlan(grid: Grid, values: Float64Array, options: ContourOptions = {}): ContourPlan {
  const { nx, ny } = grid;
  if (values.length !== nx * ny) {
    throw inputError(`contour field has ${values.length} values, the grid has ${nx * ny} cells`, {
      hint: 'pass one value per cell, row-major',
    });
  }
  const range = finiteRange(values);
  let levels: number[];
  let interval: number | null = null;
  let note: string | null = null;
  if (options.levels) {
    levels = [...options.levels].filter((l) => Number.isFinite(l)).sort((a, b) => a - b);
    if (levels.length > MAX_CONTOUR_LEVELS) {
      throw inputError(`${levels.length} contour levels given; at most ${MAX_CONTOUR_LEVELS} are drawn`, {
        key: 'contours.levels',
        hint: 'give fewer levels, or an interval',
      });
    }
  } else if (!range) {
    levels = [];
  } else {
    const base = options.base ?? 0;
    const limit = contourLevelLimit(nx * ny);
    interval = options.interval ?? roundInterval(range.min, range.max);
    if (
      interval !== null &&
      options.interval !== undefined &&
      interval > 0 &&
      !(countLevels(range.min, range.max, interval, base) <= limit)
    ) {
      const wider = roundInterval(range.min - base, range.max - base, limit, interval);
      if (wider !== null) {
        note = `contour interval ${interval} would give ${countText(countLevels(range.min, range.max, interval, base))} levels across ${fmtRange(range)}; widened to ${wider} (at most ${limit} levels are drawn on a grid of ${nx} x ${ny} cells)`;
        interval = wider;
      }
    }
    levels = interval === null ? [] : contourLevels(range.min, range.max, interval, base);
  }
  return { levels, interval, note };
}

/**
 * The lines of each of `levels` (in the order given), traced as contourField traces them. All levels are traced in
 * one pass over the grid (./contourTrace.ts). A level that is not finite, or lies outside the values' range, gets no
 * line: no cell is above it, or every vertex of its rings lies next to an inactive or outside cell.
 */
export function traceContourLevels(grid: Grid, values: Float64Array, levels: readonly number[]): ContourLevel[] {
  const { nx, ny } = grid;
  if (values.length !== nx * ny) {
    throw inputError(`contour field has ${values.length} values, the grid has ${nx * ny} cells`, {
      hint: 'pass one value per cell, row-major',
    });
  }
  // Distinct finite levels, ascending (a Set takes -0 and 0 as one: both give the same cells above and the same lines).
  const distinct = Float64Array.from(new Set(levels.filter((l) => Number.isFinite(l)))).sort();
  const linesOf: Polyline[][] = [];
  for (let k = 0; k < distinct.length; k++) linesOf.push([]);
  const traced = traceRings(grid, values, distinct);
  // Workspaces for the longest ring: its vertices placed, and which of them are genuine crossings.
  const xs = new Float64Array(traced.maxLength);
  const ys = new Float64Array(traced.maxLength);
  const genuine = new Uint8Array(traced.maxLength);
  for (let k = 0; k < distinct.length; k++) {
    for (let q = traced.levelStart[k]!; q < traced.levelStart[k + 1]!; q++) {
      collectGenuineRuns(grid, values, distinct[k]!, traced, traced.order[q]!, xs, ys, genuine, linesOf[k]!);
    }
  }
  const index = new Map<number, number>();
  for (let k = 0; k < distinct.length; k++) index.set(distinct[k]!, k);
  const handedOut = new Uint8Array(distinct.length);
  return levels.map((level) => {
    const k = index.get(level);
    if (k === undefined) return { level, lines: [] };
    // A level asked for twice gets its own copy of the lines.
    const lines = handedOut[k] ? linesOf[k]!.map((line) => line.slice()) : linesOf[k]!;
    handedOut[k] = 1;
    return { level, lines };
  });
}

function countText(count: number): string {
  return !Number.isFinite(count) ? 'unboundedly many' : count < 1e9 ? String(count) : count.toExponential(1);
}

function fmtRange(range: { min: number; max: number }): string {
  return `${range.min.toPrecision(6)} to ${range.max.toPrecision(6)}`;
}

/**
 * Split ring r of a trace into runs of genuine crossings and append each run (2+ points) to `out` as a
 * map-coordinate polyline. A ring with no boundary vertex stays one closed line.
 */
function collectGenuineRuns(
  grid: Grid,
  values: Float64Array,
  level: number,
  traced: TracedRings,
  r: number,
  xs: Float64Array,
  ys: Float64Array,
  genuine: Uint8Array,
  out: Polyline[],
): void {
  const n = traced.length[r]!;
  if (n < 2) return;
  const { nodeCode, nodeNext } = traced;
  let firstBoundary = -1;
  let k = 0;
  for (let node = traced.head[r]!; node >= 0; node = nodeNext[node]!, k++) {
    if (placeVertex(grid, values, level, nodeCode[node]!, xs, ys, k)) genuine[k] = 1;
    else {
      genuine[k] = 0;
      if (firstBoundary < 0) firstBoundary = k;
    }
  }
  if (firstBoundary < 0) {
    const line = new Float64Array(2 * (n + 1));
    for (let k = 0; k < n; k++) {
      line[2 * k] = xs[k]!;
      line[2 * k + 1] = ys[k]!;
    }
    line[2 * n] = xs[0]!;
    line[2 * n + 1] = ys[0]!;
    out.push(line);
    return;
  }
  // Walk once round the ring starting just after a boundary vertex, so no run is split at the seam.
  let runStart = -1;
  for (let step = 1; step <= n; step++) {
    const k = (firstBoundary + step) % n;
    if (genuine[k]) {
      if (runStart < 0) runStart = step;
    } else if (runStart >= 0) {
      pushRun(xs, ys, n, firstBoundary, runStart, step, out);
      runStart = -1;
    }
  }
}

function pushRun(xs: Float64Array, ys: Float64Array, n: number, origin: number, from: number, to: number, out: Polyline[]): void {
  const count = to - from;
  if (count < 2) return;
  const line = new Float64Array(2 * count);
  for (let s = 0; s < count; s++) {
    const k = (origin + from + s) % n;
    line[2 * s] = xs[k]!;
    line[2 * s + 1] = ys[k]!;
  }
  out.push(line);
}

/**
 * Place ring vertex `code` (./contourTrace.ts) in map coordinates at xs[k], ys[k]. Vertices sit on the midpoint
 * between two cell centres: (X, r + 0.5) between cells (r, X-1) and (r, X); (c + 0.5, Y) between cells (Y-1, c) and
 * (Y, c); the level's crossing is placed by linear interpolation between the two heads. Returns false (boundary
 * vertex) when either cell is outside the raster or inactive.
 */
function placeVertex(
  grid: Grid,
  values: Float64Array,
  level: number,
  code: number,
  xs: Float64Array,
  ys: Float64Array,
  k: number,
): boolean {
  const { nx, ny, transform: t } = grid;
  const w = nx + 1;
  const hCount = ny * w;
  let uu: number;
  let vv: number;
  if (code < hCount) {
    const row = (code / w) | 0;
    const X = code - row * w;
    if (X <= 0 || X >= nx) return false;
    const a = values[row * nx + X - 1]!;
    const b = values[row * nx + X]!;
    if (!Number.isFinite(a) || !Number.isFinite(b)) return false;
    uu = X - 0.5 + crossing(a, b, level);
    vv = row + 0.5;
  } else {
    const v = code - hCount;
    const Y = (v / nx) | 0;
    const col = v - Y * nx;
    if (Y <= 0 || Y >= ny) return false;
    const a = values[(Y - 1) * nx + col]!;
    const b = values[Y * nx + col]!;
    if (!Number.isFinite(a) || !Number.isFinite(b)) return false;
    uu = col + 0.5;
    vv = Y - 0.5 + crossing(a, b, level);
  }
  xs[k] = t[0] + uu * t[1];
  ys[k] = t[3] + vv * t[5];
  return true;
}

/** Fraction of the way from a to b where the level is crossed (linear interpolation; 0.5 if a == b). */
function crossing(a: number, b: number, level: number): number {
  const d = b - a;
  if (d === 0) return 0.5;
  const f = (level - a) / d;
  return f < 0 ? 0 : f > 1 ? 1 : f;
}

// ---------------------------------------------------------------------------------------------------------
// GeoJSON

export interface GeoJsonOptions {
  /** What the field is; goes into each feature's `quantity` property. */
  quantity: 'head' | 'drawdown';
  /** Length unit label of the levels (e.g. "m"). */
  units: string;
  /**
   * Map (raster CRS) -> WGS 84 longitude/latitude, for RFC 7946 output. When omitted, coordinates stay in the
   * raster CRS and the collection says so in its `coordinateSystem` member (then it is not RFC 7946 GeoJSON:
   * write it under a name that says so, e.g. `head-contours.native.geojson`).
   */
  toLonLat?: (x: number, y: number) => { x: number; y: number };
  /** Label of the raster CRS for native output, e.g. "EPSG:32633". */
  crsLabel?: string;
  /** Decimals kept in coordinates. Default 7 for lon/lat (about 1 cm), 3 for native coordinates. */
  decimals?: number;
}

export interface GeoJsonFeatureCollection {
  type: 'FeatureCollection';
  [member: string]: unknown;
  features: GeoJsonFeature[];
}

export interface GeoJsonFeature {
  type: 'Feature';
  properties: { level: number; quantity: string; units: string; interval: number | null };
  geometry: { type: 'LineString'; coordinates: number[][] } | { type: 'MultiLineString'; coordinates: number[][][] };
}

/**
 * One Feature per level that has lines (LineString for one line, MultiLineString for several), properties
 * `level`, `quantity`, `units`, `interval`. With `toLonLat`: RFC 7946 (WGS 84, lon/lat order, no `crs` member).
 */
export function contoursToGeoJson(set: ContourSet, options: GeoJsonOptions): GeoJsonFeatureCollection {
  const project = options.toLonLat;
  const decimals = options.decimals ?? (project ? 7 : 3);
  const features: GeoJsonFeature[] = [];
  for (const { level, lines } of set.levels) {
    const parts: number[][][] = [];
    for (const line of lines) {
      const coords: number[][] = [];
      for (let k = 0; k < line.length; k += 2) {
        let x = line[k]!;
        let y = line[k + 1]!;
        if (project) {
          const p = project(x, y);
          x = p.x;
          y = p.y;
        }
        const point = [roundTo(x, decimals), roundTo(y, decimals)];
        const last = coords[coords.length - 1];
        // Rounding can merge neighbouring vertices; RFC 7946 LineStrings need two or more distinct positions.
        if (!last || last[0] !== point[0] || last[1] !== point[1]) coords.push(point);
      }
      if (coords.length >= 2) parts.push(coords);
    }
    if (parts.length === 0) continue;
    const properties = { level, quantity: options.quantity, units: options.units, interval: set.interval };
    features.push(
      parts.length === 1
        ? { type: 'Feature', properties, geometry: { type: 'LineString', coordinates: parts[0]! } }
        : { type: 'Feature', properties, geometry: { type: 'MultiLineString', coordinates: parts } },
    );
  }
  const collection: GeoJsonFeatureCollection = { type: 'FeatureCollection', features };
  if (!project) {
    collection.coordinateSystem = `${options.crsLabel ?? 'raster CRS'} (the raster's own coordinates, not WGS 84: not RFC 7946 GeoJSON; assign this CRS when loading)`;
  }
  return collection;
}
