/**
 * The reference tracer for the contour tests: contour lines as piezomap traced them before its own tracer
 * (src/analysis/contourTrace.ts), on d3-contour's marching squares (d3-contour 4.0.3, `contours().contour(values,
 * level)` without smoothing: its rings, cut at vertices next to inactive or outside cells, vertices placed by linear
 * interpolation). Kept verbatim so that the new tracer is checked against an outside library, line by line.
 */
import { contours as d3Contours } from 'd3-contour';
import type { ContourLevel, Polyline } from '../../src/analysis/contours.js';
import type { Grid } from '../../src/grid.js';

/** Finite minimum and maximum of a field, ignoring NaN; null when no value is finite. */
function finiteRange(values: Float64Array): { min: number; max: number } | null {
  let min = Infinity;
  let max = -Infinity;
  for (let p = 0; p < values.length; p++) {
    const v = values[p]!;
    if (v < min) min = v;
    if (v > max) max = v;
  }
  return min <= max ? { min, max } : null;
}

/** The lines of each of `levels` (in the order given), one d3-contour pass per level. */
export function referenceContourLevels(grid: Grid, values: Float64Array, levels: readonly number[]): ContourLevel[] {
  const { nx, ny } = grid;
  const range = finiteRange(values);
  const generator = d3Contours().size([nx, ny]).smooth(false);
  const array = values as unknown as number[];
  const result: ContourLevel[] = [];
  for (const level of levels) {
    const lines: Polyline[] = [];
    if (range && level >= range.min && level <= range.max) {
      const shape = generator.contour(array, level);
      for (const polygon of shape.coordinates) {
        for (const ring of polygon) collectGenuineRuns(grid, values, level, ring as number[][], lines);
      }
    }
    result.push({ level, lines });
  }
  return result;
}

function collectGenuineRuns(grid: Grid, values: Float64Array, level: number, ring: number[][], out: Polyline[]): void {
  // d3 rings repeat the first point at the end; work on the distinct vertices.
  const n = ring.length - 1;
  if (n < 2) return;
  const xs = new Float64Array(n);
  const ys = new Float64Array(n);
  const genuine = new Uint8Array(n);
  let firstBoundary = -1;
  for (let k = 0; k < n; k++) {
    const point = ring[k]!;
    if (placeVertex(grid, values, level, point[0]!, point[1]!, xs, ys, k)) genuine[k] = 1;
    else if (firstBoundary < 0) firstBoundary = k;
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

function placeVertex(
  grid: Grid,
  values: Float64Array,
  level: number,
  u: number,
  v: number,
  xs: Float64Array,
  ys: Float64Array,
  k: number,
): boolean {
  const { nx, ny, transform: t } = grid;
  let a: number;
  let b: number;
  let uu = u;
  let vv = v;
  if (Number.isInteger(u)) {
    const row = Math.floor(v);
    if (u <= 0 || u >= nx || row < 0 || row >= ny) return false;
    a = values[row * nx + u - 1]!;
    b = values[row * nx + u]!;
    if (!Number.isFinite(a) || !Number.isFinite(b)) return false;
    uu = u - 0.5 + crossing(a, b, level);
  } else {
    const col = Math.floor(u);
    if (v <= 0 || v >= ny || col < 0 || col >= nx) return false;
    a = values[(v - 1) * nx + col]!;
    b = values[v * nx + col]!;
    if (!Number.isFinite(a) || !Number.isFinite(b)) return false;
    vv = v - 0.5 + crossing(a, b, level);
  }
  xs[k] = t[0] + uu * t[1];
  ys[k] = t[3] + vv * t[5];
  return true;
}

function crossing(a: number, b: number, level: number): number {
  const d = b - a;
  if (d === 0) return 0.5;
  const f = (level - a) / d;
  return f < 0 ? 0 : f > 1 ? 1 : f;
}
