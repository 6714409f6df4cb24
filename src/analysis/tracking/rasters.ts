/**
 * Where the water of every cell goes: forward Pollock tracks from cell centres (or from a regular pattern of
 * seeds inside each cell of a window), recording the stop label each track ends at and its travel time.
 * These rasters are what capture zones are outlined from (capture.ts); the work is one independent track per
 * seed, so rows can be split between worker threads (workers.ts).
 */
import { END_LABEL, Tracker } from './pollock.js';
import type { TrackingField } from './field.js';

/** Marks a cell whose track ended without a stop label (edge, stagnation, time limit) or an inactive cell. */
export const NO_LABEL = -1;

export interface EndRasters {
  /** Label index where the water of each seed ends, NO_LABEL for none (and for inactive cells). */
  label: Int32Array;
  /** Travel time to that end (time units); NaN on inactive cells. */
  time: Float64Array;
}

/**
 * Forward tracks from the centre of every active cell in rows [rowStart, rowEnd), written into `out` at
 * index p - rowStart * nx (so `out` may hold just those rows). Allocates nothing per cell.
 */
export function trackCellCentres(field: TrackingField, rowStart: number, rowEnd: number, out: EndRasters, maxTime = Infinity): void {
  const { nx, dx, dy, active } = field;
  const tracker = new Tracker(field);
  const offset = rowStart * nx;
  for (let p = rowStart * nx; p < rowEnd * nx; p++) {
    const k = p - offset;
    if (!active[p]) {
      out.label[k] = NO_LABEL;
      out.time[k] = NaN;
      continue;
    }
    const reason = tracker.track(p, 0.5 * dx, 0.5 * dy, 1, maxTime, null);
    out.label[k] = reason === END_LABEL ? tracker.label : NO_LABEL;
    out.time[k] = tracker.time;
  }
}

/** Forward tracks from every active cell centre of the grid, in this thread. */
export function endRasters(field: TrackingField, maxTime = Infinity): EndRasters {
  const n = field.nx * field.ny;
  const out: EndRasters = { label: new Int32Array(n), time: new Float64Array(n) };
  trackCellCentres(field, 0, field.ny, out, maxTime);
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
  const out: EndRasters = { label: new Int32Array(width * height), time: new Float64Array(width * height) };
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
    }
  }
  return out;
}
