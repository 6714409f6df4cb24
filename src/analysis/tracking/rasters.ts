/**
 * Where the water of every cell goes: forward Pollock tracks from cell centres (or from a regular pattern of
 * seeds inside each cell of a window), recording the stop label each track ends at and its travel time.
 * These rasters are what capture zones are outlined from (capture.ts); the work is one independent track per
 * seed, so rows can be split between worker threads (workers.ts).
 */
import { END_LABEL, END_STALLED, FaceCache, Tracker } from './pollock.js';
import type { TrackingField } from './field.js';

/** Marks a cell whose track ended without a stop label (edge, stagnation, time limit) or an inactive cell. */
export const NO_LABEL = -1;

export interface EndRasters {
  /** Label index where the water of each seed ends, NO_LABEL for none (and for inactive cells). */
  label: Int32Array;
  /** Travel time to that end (time units); NaN on inactive cells. */
  time: Float64Array;
  /** Tracks stopped by the safety limit on cell crossings (a fault: should be 0; they count as ending nowhere). */
  stalled: number;
}

/**
 * Forward tracks from the centre of every active cell in rows [rowStart, rowEnd), written into `out` at
 * index p - rowStart * nx (so `out` may hold just those rows). Allocates nothing per cell. Returns the number of
 * stalled tracks.
 */
export function trackCellCentres(
  field: TrackingField,
  rowStart: number,
  rowEnd: number,
  out: EndRasters,
  cache: FaceCache | null = null,
  order: Int32Array | null = null,
): number {
  const { nx, dx, dy, active } = field;
  const tracker = new Tracker(field);
  const offset = rowStart * nx;
  const count = (rowEnd - rowStart) * nx;
  let stalled = 0;
  for (let s = 0; s < count; s++) {
    const p = order ? order[s]! : offset + s;
    const k = p - offset;
    if (!active[p]) {
      out.label[k] = NO_LABEL;
      out.time[k] = NaN;
      continue;
    }
    const reason = tracker.track(p, 0.5 * dx, 0.5 * dy, 1, Infinity, null, cache);
    out.label[k] = reason === END_LABEL ? tracker.label : NO_LABEL;
    out.time[k] = tracker.time;
    if (reason === END_STALLED) stalled++;
  }
  return stalled;
}

export interface EndRasterOptions {
  /** Track every seed to its end (no FaceCache): exact everywhere, about ten times slower. Default false. */
  exact?: boolean;
  /** Travel times up to this are exact (FaceCache `exactTime`); default 0. */
  exactTime?: number;
  /** Cells every track crosses exactly before it may take over a recorded end; default 16. */
  exactCrossings?: number;
  /** Face parts per face of average flow for the FaceCache; default 4. */
  partsPerFace?: number;
  /**
   * Head (or any potential water flows down), one per cell: seeds are then tracked from the highest down, so that
   * upstream tracks record the faces later tracks cross (about five times fewer cells tracked than in row order).
   */
  potential?: Float64Array;
}

/**
 * Cells of rows [rowStart, rowEnd) in tracking order: tiles of 16 x 16 cells from the highest mean potential to
 * the lowest (tiles without a finite value last), cells row by row inside a tile. Upstream tiles go first so that
 * their tracks record the faces later tracks cross; whole tiles keep neighbouring cells (and their memory)
 * together. Deterministic: ties keep tile order.
 */
export function seedOrder(potential: Float64Array, nx: number, rowStart: number, rowEnd: number): Int32Array {
  const tile = 16;
  const rows = rowEnd - rowStart;
  const tilesX = Math.ceil(nx / tile);
  const tilesY = Math.ceil(rows / tile);
  const mean = new Float64Array(tilesX * tilesY);
  const count = new Int32Array(tilesX * tilesY);
  for (let i = 0; i < rows; i++) {
    for (let j = 0; j < nx; j++) {
      const v = potential[(rowStart + i) * nx + j]!;
      if (v === v) {
        const t = Math.floor(i / tile) * tilesX + Math.floor(j / tile);
        mean[t]! += v;
        count[t]!++;
      }
    }
  }
  const tiles = Array.from({ length: tilesX * tilesY }, (_, t) => t);
  const key = (t: number) => (count[t]! > 0 ? mean[t]! / count[t]! : -Infinity);
  tiles.sort((a, b) => key(b) - key(a) || a - b);
  const order = new Int32Array(rows * nx);
  let k = 0;
  for (const t of tiles) {
    const ti = Math.floor(t / tilesX);
    const tj = t - ti * tilesX;
    for (let i = ti * tile; i < Math.min(rows, (ti + 1) * tile); i++) {
      for (let j = tj * tile; j < Math.min(nx, (tj + 1) * tile); j++) order[k++] = (rowStart + i) * nx + j;
    }
  }
  return order;
}

/**
 * Seeds are tracked in this many bands of rows, each with a fresh FaceCache, so that bands can run in worker
 * threads (workers.ts) and give the same rasters, value for value, as one thread: the result never depends on the
 * number of workers. (Splitting hardly changes the work: upstream tiles of each band record what its later tracks
 * need.)
 */
export const SEED_BANDS = 4;

/** Rows [start, end) of band k of `bands` on a grid of ny rows. */
export function bandRows(ny: number, k: number, bands = SEED_BANDS): [number, number] {
  const size = Math.ceil(ny / bands);
  return [Math.min(ny, k * size), Math.min(ny, (k + 1) * size)];
}

/** Forward tracks from the centres of band k's cells into `out` (the band's rows only); returns stalled tracks. */
export function trackBand(
  field: TrackingField,
  k: number,
  out: EndRasters,
  cache: FaceCache | null,
  options: EndRasterOptions = {},
): number {
  const [rowStart, rowEnd] = bandRows(field.ny, k);
  cache?.reset();
  const order = options.potential ? seedOrder(options.potential, field.nx, rowStart, rowEnd) : null;
  return trackCellCentres(field, rowStart, rowEnd, out, cache, order);
}

/** Forward tracks from every active cell centre of the grid, in this thread. */
export function endRasters(field: TrackingField, options: EndRasterOptions = {}): EndRasters {
  const { nx, ny } = field;
  const out: EndRasters = { label: new Int32Array(nx * ny), time: new Float64Array(nx * ny), stalled: 0 };
  const cache = options.exact ? null : new FaceCache(field, options);
  for (let k = 0; k < SEED_BANDS; k++) {
    const [rowStart, rowEnd] = bandRows(ny, k);
    const band = { label: out.label.subarray(rowStart * nx, rowEnd * nx), time: out.time.subarray(rowStart * nx, rowEnd * nx), stalled: 0 };
    out.stalled += trackBand(field, k, band, cache, options);
  }
  return out;
}

/** A window of whole cells, each split into `subdivisions` x `subdivisions` seeds. */
export interface SeedWindow {
  col0: number;
  row0: number;
  cols: number;
  rows: number;
  subdivisions: number;
}

/**
 * Forward tracks from sub-cell seeds: the centres of the subdivisions^2 equal parts of every cell in the window.
 * The rasters are (cols * s) x (rows * s), row-major, north to south like the grid.
 */
export function trackSeeds(field: TrackingField, window: SeedWindow, maxTime = Infinity): EndRasters {
  const { nx, dx, dy, active } = field;
  const s = window.subdivisions;
  const width = window.cols * s;
  const height = window.rows * s;
  const out: EndRasters = { label: new Int32Array(width * height), time: new Float64Array(width * height), stalled: 0 };
  const tracker = new Tracker(field);
  for (let fi = 0; fi < height; fi++) {
    const row = window.row0 + Math.floor(fi / s);
    const y = ((fi % s) + 0.5) * (dy / s);
    for (let fj = 0; fj < width; fj++) {
      const col = window.col0 + Math.floor(fj / s);
      const p = row * nx + col;
      const k = fi * width + fj;
      if (!active[p]) {
        out.label[k] = NO_LABEL;
        out.time[k] = NaN;
        continue;
      }
      const x = ((fj % s) + 0.5) * (dx / s);
      const reason = tracker.track(p, x, y, 1, maxTime, null);
      out.label[k] = reason === END_LABEL ? tracker.label : NO_LABEL;
      out.time[k] = tracker.time;
      if (reason === END_STALLED) out.stalled++;
    }
  }
  return out;
}
