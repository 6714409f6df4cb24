/**
 * Capture zones of withdrawal wells: which water reaches each well, and within which time.
 *
 * Zones come from where water goes, not from a hull of a few particle ends: a forward Pollock track from every
 * active cell centre (rasters.ts) gives the label each cell's water ends at and its travel time; the zone of well
 * W for time t is the indicator {end = W and time <= t}, outlined by d3-contour at 0.5 (the contour of the
 * indicator interpolated between cell centres, i.e. along cell edges with corners cut: the outline is smoothed to
 * the cell resolution). The steady zone (time null) is {end = W}. Because the indicator for t1 < t2 is pointwise
 * at most the one for t2, the outlines nest: zone(t1) inside zone(t2) inside the steady zone.
 * A well that captures fewer than `refineBelowCells` cell centres (a small well in fast flow) is outlined from
 * sub-cell seeds (`subdivisions` x `subdivisions` per cell) tracked exactly in a window around its zone.
 *
 * Backward pathlines start on the faces of each well cell, `particlesPerWell` spread evenly around its perimeter,
 * and run against the flow to where the water came from.
 *
 * Output geometry is GeoJSON-ready (RFC 7946 ring order: exterior rings counter-clockwise) in the grid's map
 * coordinates, or through the caller's `project` (the CRS of the outputs is the caller's choice). Areas are
 * measured in the grid's map units before projection.
 */
import { contours as d3Contours } from 'd3-contour';
import { inputError } from '../../errors.js';
import type { TrackingField, WeakSink } from './field.js';
import { END_STALLED, PathBuffer, Tracker } from './pollock.js';
import { endRasters, NO_LABEL, trackSeeds, type EndRasterOptions, type EndRasters } from './rasters.js';

/** Map coordinates out: [x, y] for a point in the grid's map coordinates. */
export type Project = (x: number, y: number) => [number, number];

export interface PolygonGeometry {
  type: 'Polygon';
  coordinates: number[][][];
}
export interface MultiPolygonGeometry {
  type: 'MultiPolygon';
  coordinates: number[][][][];
}
export interface LineStringGeometry {
  type: 'LineString';
  coordinates: number[][];
}

export interface CaptureZoneFeature {
  type: 'Feature';
  /** Null when no place reaches the well within the time (not expected: the well cell itself is always inside). */
  geometry: PolygonGeometry | MultiPolygonGeometry | null;
  properties: {
    well: string;
    /** Capture time, or null for the steady capture zone. */
    time: number | null;
    /** Area inside the outline (exterior minus holes), square map units of the grid. */
    area: number;
    /** Cell centres inside (or sub-cell seeds / subdivisions^2 for a refined well), times cell area: the raster's area. */
    cellArea: number;
  };
}

export interface PathlineFeature {
  type: 'Feature';
  geometry: LineStringGeometry;
  properties: {
    id: string;
    direction: 'backward' | 'forward';
    travelTime: number;
    /** Well id or boundary group name where the track ended, else `edge`, `stagnation` or `time-limit`. */
    endsAt: string;
    endReason: 'well' | 'boundary' | 'edge' | 'stagnation' | 'time-limit';
  };
}

export interface CaptureOptions {
  /** Capture times (> 0); zones for each, plus the steady zone. */
  captureTimes?: readonly number[];
  /** Label indices of the withdrawal wells; default every `well` label on a cell whose net exchange takes water. */
  wells?: readonly number[];
  /** Backward pathlines per well (0 = none); default 36. */
  particlesPerWell?: number;
  /** Time limit of the backward pathlines; default none. */
  maxTime?: number;
  /** Wells capturing fewer cell centres than this are outlined from sub-cell seeds; default 64. */
  refineBelowCells?: number;
  /** Seeds per cell side for those wells; default 4. */
  subdivisions?: number;
  /** Rasters options (FaceCache settings, `exact`, `potential`); exactTime defaults to the largest capture time. */
  rasters?: EndRasterOptions;
  /** Coordinates out; default the grid's own map coordinates. */
  project?: Project;
}

export interface WellCapture {
  id: string;
  label: number;
  /** Cell centres whose water ends at the well. */
  capturedCells: number;
  /** True when its zones come from sub-cell seeds. */
  refined: boolean;
}

export interface CaptureResult {
  zones: CaptureZoneFeature[];
  pathlines: PathlineFeature[];
  wells: WellCapture[];
  /** Per cell: index into `wells` of the well its water reaches, -1 for none (or inactive). */
  capturingWell: Int32Array;
  /** Per cell: travel time to that well; NaN where no well captures the cell. */
  travelTime: Float64Array;
  /** Per cell: 1 where that travel time is sure to be exact (at most `exactTime`), 0 where it may be a FaceCache estimate. */
  travelTimeExact: Uint8Array;
  /** The time up to which every travel time is exact. */
  exactTime: number;
  /** The rasters of every end (labels, not only wells). */
  ends: EndRasters;
  /** Labelled cells that take only part of their inflow, and whether the rule stopped particles there (field.ts). */
  weakSinks: WeakSink[];
  /** Remarks for the summary: weak sinks met, stalled tracks (a fault). */
  warnings: string[];
}

/** The capture times, checked: finite and > 0, ascending, duplicates removed. */
export function checkCaptureTimes(times: readonly number[]): number[] {
  times.forEach((t, i) => {
    if (!(typeof t === 'number' && Number.isFinite(t) && t > 0)) {
      throw inputError(`capture time must be a positive number, got ${String(t)}`, {
        key: `tracking.captureTimes[${i}]`,
        hint: 'give travel times in the scenario time unit, e.g. [365, 3650] for 1 and 10 years in days',
      });
    }
  });
  return [...new Set(times)].sort((a, b) => a - b);
}

/** Label indices of `well` labels on cells that take water out (withdrawal wells), in label order. */
export function withdrawalWells(field: TrackingField, stopLabel: Int32Array): number[] {
  const takes = new Uint8Array(field.labels.length);
  for (let p = 0; p < stopLabel.length; p++) {
    const l = stopLabel[p]!;
    if (l >= 0 && field.labels[l]!.kind === 'well' && field.netSource[p]! < 0) takes[l] = 1;
  }
  const out: number[] = [];
  takes.forEach((t, l) => {
    if (t) out.push(l);
  });
  return out;
}

/**
 * Capture zones, backward pathlines and the capturing-well rasters. `stopLabel` is the same array the field was
 * built from (it says which cells belong to which well). `ends` may be given when computed elsewhere (e.g. in
 * worker threads) with the same options.
 */
export function captureZones(field: TrackingField, stopLabel: Int32Array, options: CaptureOptions = {}, ends?: EndRasters): CaptureResult {
  const { nx, ny, dx, dy } = field;
  const n = nx * ny;
  const times = checkCaptureTimes(options.captureTimes ?? []);
  const particlesPerWell = options.particlesPerWell ?? 36;
  if (!(Number.isInteger(particlesPerWell) && particlesPerWell >= 0)) {
    throw inputError(`particles per well must be a whole number >= 0, got ${particlesPerWell}`, { key: 'tracking.particlesPerWell' });
  }
  const subdivisions = options.subdivisions ?? 4;
  const refineBelowCells = options.refineBelowCells ?? 64;
  const project = options.project ?? null;
  const exactTime = times.length ? times[times.length - 1]! : 0;
  const rasterOptions: EndRasterOptions = { exactTime, ...options.rasters };
  const exactUpTo = rasterOptions.exact ? Infinity : (rasterOptions.exactTime ?? 0);
  const rasters = ends ?? endRasters(field, rasterOptions);
  const wellLabels = options.wells ? [...options.wells] : withdrawalWells(field, stopLabel);

  const wellIndexOfLabel = new Int32Array(field.labels.length).fill(-1);
  wellLabels.forEach((l, k) => {
    if (!(l >= 0 && l < field.labels.length)) throw inputError(`well label ${l} is not in the list of ${field.labels.length} labels`);
    wellIndexOfLabel[l] = k;
  });
  const capturingWell = new Int32Array(n).fill(-1);
  const travelTime = new Float64Array(n).fill(NaN);
  const travelTimeExact = new Uint8Array(n);
  const counts = new Int32Array(wellLabels.length);
  // Bounding box of each well's captured cells and of its own cells, for the contour windows.
  const box = new Int32Array(4 * wellLabels.length);
  for (let k = 0; k < wellLabels.length; k++) box.set([ny, nx, -1, -1], 4 * k);
  const grow = (k: number, p: number) => {
    const row = (p / nx) | 0;
    const col = p - row * nx;
    if (row < box[4 * k]!) box[4 * k] = row;
    if (col < box[4 * k + 1]!) box[4 * k + 1] = col;
    if (row > box[4 * k + 2]!) box[4 * k + 2] = row;
    if (col > box[4 * k + 3]!) box[4 * k + 3] = col;
  };
  for (let p = 0; p < n; p++) {
    const l = rasters.label[p]!;
    if (l !== NO_LABEL) {
      const k = wellIndexOfLabel[l]!;
      if (k >= 0) {
        capturingWell[p] = k;
        travelTime[p] = rasters.time[p]!;
        travelTimeExact[p] = rasters.time[p]! <= exactUpTo ? 1 : 0;
        counts[k]!++;
        grow(k, p);
      }
    }
    const own = stopLabel[p]!;
    if (own >= 0 && wellIndexOfLabel[own]! >= 0) grow(wellIndexOfLabel[own]!, p);
  }

  const zones: CaptureZoneFeature[] = [];
  const wells: WellCapture[] = [];
  let stalled = rasters.stalled;
  const cellArea = dx * dy;
  for (let k = 0; k < wellLabels.length; k++) {
    const label = wellLabels[k]!;
    const id = field.labels[label]!.name;
    const refined = counts[k]! < refineBelowCells && subdivisions > 1;
    wells.push({ id, label, capturedCells: counts[k]!, refined });
    if (box[4 * k + 2]! < 0) continue; // a label with no cell: nothing to outline
    // Window: the box plus a margin (one cell, two for refined wells whose sub-cell zone may reach further).
    const margin = refined ? 2 : 1;
    const row0 = Math.max(0, box[4 * k]! - margin);
    const col0 = Math.max(0, box[4 * k + 1]! - margin);
    const row1 = Math.min(ny - 1, box[4 * k + 2]! + margin);
    const col1 = Math.min(nx - 1, box[4 * k + 3]! + margin);
    const window = { col0, row0, cols: col1 - col0 + 1, rows: row1 - row0 + 1, subdivisions: refined ? subdivisions : 1 };
    let values: EndRasters;
    if (refined) {
      values = trackSeeds(field, window);
      stalled += values.stalled;
    } else {
      values = { label: new Int32Array(window.cols * window.rows), time: new Float64Array(window.cols * window.rows), stalled: 0 };
      for (let i = 0; i < window.rows; i++) {
        const src = (row0 + i) * nx + col0;
        values.label.set(rasters.label.subarray(src, src + window.cols), i * window.cols);
        values.time.set(rasters.time.subarray(src, src + window.cols), i * window.cols);
      }
    }
    for (const time of [...times, null]) {
      const outline = outlineZone(values, window, label, time, field, project);
      zones.push({
        type: 'Feature',
        geometry: outline.geometry,
        properties: {
          well: id,
          time,
          area: outline.area,
          cellArea: (outline.seeds * cellArea) / (window.subdivisions * window.subdivisions),
        },
      });
    }
  }

  const pathlines: PathlineFeature[] = [];
  if (particlesPerWell > 0) {
    const tracker = new Tracker(field);
    const path = new PathBuffer();
    // The cells of every well, in one pass over the grid (not one pass per well).
    const cellsOf: number[][] = wellLabels.map(() => []);
    for (let p = 0; p < n; p++) {
      const l = stopLabel[p]!;
      if (l >= 0 && wellIndexOfLabel[l]! >= 0) cellsOf[wellIndexOfLabel[l]!]!.push(p);
    }
    for (let k = 0; k < wellLabels.length; k++) {
      const label = wellLabels[k]!;
      const cells = cellsOf[k]!;
      if (!cells.length) continue;
      const id = field.labels[label]!.name;
      for (let m = 0; m < particlesPerWell; m++) {
        // Spread over the well's cells, then evenly around each cell's perimeter (never on a corner).
        const cell = cells[m % cells.length]!;
        const perCell = Math.ceil(particlesPerWell / cells.length);
        const along = ((Math.floor(m / cells.length) + 0.5) / perCell) * 2 * (dx + dy);
        const [x, y] = perimeterPoint(along, dx, dy);
        if (tracker.track(cell, x, y, -1, options.maxTime ?? Infinity, path) === END_STALLED) stalled++;
        pathlines.push(pathlineFeature(`${id}-${m + 1}`, 'backward', tracker, path, project));
      }
    }
  }
  const warnings: string[] = [];
  const weakWells = field.weakSinks.filter((w) => w.direction === 'forward' && w.stops && wellIndexOfLabel[w.label]! >= 0);
  if (weakWells.length) {
    const list = weakWells.map((w) => `${w.name} (takes ${(100 * w.fraction).toFixed(0)} % of the water entering its cell)`).join(', ');
    warnings.push(`weak-sink well cells: ${list}; their capture zones hold all water entering the cell, so they may be drawn too large`);
  }
  if (stalled > 0) warnings.push(`${stalled} track(s) stopped by the safety limit on cell crossings; they count as captured by no well`);
  return {
    zones,
    pathlines,
    wells,
    capturingWell,
    travelTime,
    travelTimeExact,
    exactTime: exactUpTo,
    ends: rasters,
    weakSinks: field.weakSinks,
    warnings,
  };
}

/** A point at distance `along` around a cell's perimeter, clockwise from its north-west corner (y southward). */
function perimeterPoint(along: number, dx: number, dy: number): [number, number] {
  if (along < dx) return [along, 0];
  along -= dx;
  if (along < dy) return [dx, along];
  along -= dy;
  if (along < dx) return [dx - along, dy];
  along -= dx;
  return [0, Math.max(0, dy - along)];
}

/** A finished track as a GeoJSON LineString feature (a track that never moved gets its point twice). */
export function pathlineFeature(
  id: string,
  direction: 'backward' | 'forward',
  tracker: Tracker,
  path: PathBuffer,
  project: Project | null,
): PathlineFeature {
  const coordinates: number[][] = [];
  const v = path.data;
  for (let i = 0; i < path.count; i++) coordinates.push(project ? project(v[2 * i]!, v[2 * i + 1]!) : [v[2 * i]!, v[2 * i + 1]!]);
  if (coordinates.length === 1) coordinates.push([...coordinates[0]!]);
  return {
    type: 'Feature',
    geometry: { type: 'LineString', coordinates },
    properties: { id, direction, travelTime: tracker.time, endsAt: tracker.endsAt(), endReason: tracker.endReason() },
  };
}

interface Window {
  col0: number;
  row0: number;
  cols: number;
  rows: number;
  subdivisions: number;
}

/** The d3-contour outline at 0.5 of the indicator {label and time <= t} on a window, in map coordinates. */
function outlineZone(
  values: EndRasters,
  window: Window,
  label: number,
  time: number | null,
  field: TrackingField,
  project: Project | null,
): { geometry: PolygonGeometry | MultiPolygonGeometry | null; area: number; seeds: number } {
  const s = window.subdivisions;
  const width = window.cols * s;
  const height = window.rows * s;
  const indicator = new Float64Array(width * height);
  let seeds = 0;
  for (let k = 0; k < indicator.length; k++) {
    if (values.label[k] === label && (time === null || values.time[k]! <= time)) {
      indicator[k] = 1;
      seeds++;
    }
  }
  if (!seeds) return { geometry: null, area: 0, seeds };
  const [multi] = d3Contours().size([width, height]).thresholds([0.5]).smooth(true)(Array.from(indicator));
  const polygons: number[][][][] = [];
  let area = 0;
  const cw = field.dx / s;
  const ch = field.dy / s;
  const ox = field.x0 + window.col0 * field.dx;
  const oy = field.y0 - window.row0 * field.dy;
  for (const polygon of multi!.coordinates) {
    const rings: number[][][] = [];
    polygon.forEach((ring, r) => {
      const native = ring.map(([u, v]) => [ox + u! * cw, oy - v! * ch]);
      const signed = signedArea(native);
      area += r === 0 ? Math.abs(signed) : -Math.abs(signed);
      let out = project ? native.map(([x, y]) => project(x!, y!)) : native;
      // RFC 7946: exterior rings counter-clockwise, holes clockwise (checked after projection).
      const ccw = signedArea(out) > 0;
      if ((r === 0) !== ccw) out = out.reverse();
      rings.push(out);
    });
    polygons.push(rings);
  }
  const geometry: PolygonGeometry | MultiPolygonGeometry =
    polygons.length === 1 ? { type: 'Polygon', coordinates: polygons[0]! } : { type: 'MultiPolygon', coordinates: polygons };
  return { geometry, area, seeds };
}

/** Shoelace area, positive for counter-clockwise rings (x east, y north). */
export function signedArea(ring: readonly number[][]): number {
  let sum = 0;
  for (let i = 0, j = ring.length - 1; i < ring.length; j = i++) {
    sum += (ring[j]![0]! - ring[i]![0]!) * (ring[j]![1]! + ring[i]![1]!);
  }
  return sum / 2;
}
