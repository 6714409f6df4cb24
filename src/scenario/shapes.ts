/**
 * Shapes on the raster grid: which cells a polygon covers and which cells a line crosses. Pure functions on map
 * coordinates (already in the raster CRS), no I/O. Coordinates are interleaved `x0, y0, x1, y1, ...` in
 * Float64Arrays; cells are indices `row * nx + col`.
 *
 * Both work in continuous grid coordinates u = (x - originX) / pixelWidth, v = (y - originY) / pixelHeight, where
 * cell (row, col) spans [col, col + 1) x [row, row + 1) and its centre is (col + 0.5, row + 0.5). The map is
 * affine, so inside/outside and crossings are the same as in map coordinates, for north-up and south-up grids alike.
 */
import type { Grid } from '../grid.js';
import { inputError } from '../errors.js';
import { featureHead, type HeadSpec, type ShapeCollection } from './geojson.js';

/**
 * Cells whose centre lies inside a polygon given as rings (outer ring and holes, closed or not: the last vertex
 * joins the first). Inside is the even-odd rule over all rings together, so a hole removes its cells; winding order
 * does not matter. A centre exactly on an edge counts as inside when the edge is its west (lower-u) boundary in
 * grid coordinates, the half-open convention of crossing-number tests (ray casting: Shimrat 1962; the half-open
 * rule for vertices on the ray is common practice). Returned cells are ascending.
 *
 * Scan-line fill: each edge is bucketed into the rows whose centre line it crosses, then each row's crossings are
 * sorted and the centres between pairs are filled. Work is proportional to edges x rows spanned plus cells filled.
 */
export function rasterisePolygon(grid: Grid, rings: readonly Float64Array[]): Int32Array {
  const { nx, ny } = grid;
  const [ox, pw, , oy, , ph] = grid.transform;
  // Pass 1: how many crossings each row gets. Edges are counted for rows r with centre v = r + 0.5 in [vLow, vHigh).
  const rowCount = new Int32Array(ny + 1);
  let crossings = 0;
  for (const ring of rings) {
    const m = ring.length >> 1;
    for (let k = 0; k < m; k++) {
      const k2 = k + 1 === m ? 0 : k + 1;
      const va = (ring[2 * k + 1]! - oy) / ph;
      const vb = (ring[2 * k2 + 1]! - oy) / ph;
      const first = Math.max(0, Math.ceil(Math.min(va, vb) - 0.5));
      const last = Math.min(ny, Math.ceil(Math.max(va, vb) - 0.5)) - 1;
      for (let r = first; r <= last; r++) rowCount[r]!++;
      if (last >= first) crossings += last - first + 1;
    }
  }
  if (crossings === 0) return new Int32Array(0);
  const rowStart = new Int32Array(ny + 1);
  for (let r = 0; r < ny; r++) rowStart[r + 1] = rowStart[r]! + rowCount[r]!;
  const fill = rowStart.slice(0, ny);
  const xs = new Float64Array(crossings);
  // Pass 2: the u of each crossing.
  for (const ring of rings) {
    const m = ring.length >> 1;
    for (let k = 0; k < m; k++) {
      const k2 = k + 1 === m ? 0 : k + 1;
      const ua = (ring[2 * k]! - ox) / pw;
      const va = (ring[2 * k + 1]! - oy) / ph;
      const ub = (ring[2 * k2]! - ox) / pw;
      const vb = (ring[2 * k2 + 1]! - oy) / ph;
      const first = Math.max(0, Math.ceil(Math.min(va, vb) - 0.5));
      const last = Math.min(ny, Math.ceil(Math.max(va, vb) - 0.5)) - 1;
      const slope = (ub - ua) / (vb - va);
      for (let r = first; r <= last; r++) xs[fill[r]!++] = ua + (r + 0.5 - va) * slope;
    }
  }
  // Pass 3: sort each row's crossings; centres u = c + 0.5 with xs[2k] <= u < xs[2k + 1] are inside.
  let total = 0;
  for (let r = 0; r < ny; r++) {
    const a = rowStart[r]!;
    const b = rowStart[r + 1]!;
    if (b - a < 2) continue;
    xs.subarray(a, b).sort();
    for (let k = a; k + 1 < b; k += 2) total += spanLength(xs[k]!, xs[k + 1]!, nx);
  }
  const cells = new Int32Array(total);
  let n = 0;
  for (let r = 0; r < ny; r++) {
    const a = rowStart[r]!;
    const b = rowStart[r + 1]!;
    for (let k = a; k + 1 < b; k += 2) {
      const c0 = Math.max(0, Math.ceil(xs[k]! - 0.5));
      const c1 = Math.min(nx, Math.ceil(xs[k + 1]! - 0.5));
      for (let c = c0; c < c1; c++) cells[n++] = r * nx + c;
    }
  }
  return cells;
}

/** Number of columns c in [0, nx) with uFrom <= c + 0.5 < uTo. */
function spanLength(uFrom: number, uTo: number, nx: number): number {
  const c0 = Math.max(0, Math.ceil(uFrom - 0.5));
  const c1 = Math.min(nx, Math.ceil(uTo - 0.5));
  return c1 > c0 ? c1 - c0 : 0;
}

/**
 * The pieces of a line inside the grid, cell by cell in order along the line. A cell the line enters more than once
 * (a meander) has one piece per visit. Distances are along the line in map units from its first vertex.
 */
export interface LinePieces {
  /** Cell of each piece. */
  cells: Int32Array;
  /** Along-line distance where each piece starts and ends (from <= to). */
  from: Float64Array;
  to: Float64Array;
  /** Along-line distance of each vertex (vertexDistance[0] = 0); the last one is the line's length. */
  vertexDistance: Float64Array;
}

/**
 * Every cell a polyline crosses, with where along the line it does: a grid traversal per segment (Amanatides & Woo
 * 1987, "A fast voxel traversal algorithm for ray tracing"), after clipping the segment to the grid (Liang & Barsky
 * 1984). A cell counts as crossed when the line runs through it over a positive length; where the line passes
 * exactly through a cell corner, the two cells that only touch the corner are not crossed. A line running exactly
 * along a cell edge belongs to the cells east/south of it in grid order (the rule of `cellAt`).
 */
export function rasteriseLine(grid: Grid, coords: Float64Array): LinePieces {
  const { nx, ny } = grid;
  const [ox, pw, , oy, , ph] = grid.transform;
  const m = coords.length >> 1;
  const vertexDistance = new Float64Array(m);
  for (let k = 1; k < m; k++) {
    vertexDistance[k] = vertexDistance[k - 1]! + Math.hypot(coords[2 * k]! - coords[2 * k - 2]!, coords[2 * k + 1]! - coords[2 * k - 1]!);
  }
  const out = new PieceList();
  for (let k = 0; k + 1 < m; k++) {
    const length = vertexDistance[k + 1]! - vertexDistance[k]!;
    if (!(length > 0)) continue;
    const u0 = (coords[2 * k]! - ox) / pw;
    const v0 = (coords[2 * k + 1]! - oy) / ph;
    const du = (coords[2 * k + 2]! - ox) / pw - u0;
    const dv = (coords[2 * k + 3]! - oy) / ph - v0;
    traverseSegment(u0, v0, du, dv, nx, ny, vertexDistance[k]!, length, out);
  }
  return { cells: out.cells.slice(0, out.count), from: out.from.slice(0, out.count), to: out.to.slice(0, out.count), vertexDistance };
}

/** Growable piece arrays: doubling typed arrays, no per-piece objects. */
class PieceList {
  count = 0;
  cells = new Int32Array(64);
  from = new Float64Array(64);
  to = new Float64Array(64);

  push(cell: number, from: number, to: number): void {
    if (this.count === this.cells.length) {
      const size = this.count * 2;
      const cells = new Int32Array(size);
      cells.set(this.cells);
      const f = new Float64Array(size);
      f.set(this.from);
      const t = new Float64Array(size);
      t.set(this.to);
      this.cells = cells;
      this.from = f;
      this.to = t;
    }
    this.cells[this.count] = cell;
    this.from[this.count] = from;
    this.to[this.count] = to;
    this.count++;
  }
}

/**
 * One segment (u0, v0) + t (du, dv), t in [0, 1], in grid coordinates; `start` and `length` turn t into along-line
 * distance. Boundaries are recomputed from u0, v0 at every step (no accumulated t increments), so long segments do
 * not drift.
 */
function traverseSegment(
  u0: number,
  v0: number,
  du: number,
  dv: number,
  nx: number,
  ny: number,
  start: number,
  length: number,
  out: PieceList,
): void {
  // Liang-Barsky clip against [0, nx] x [0, ny]: boundary i has p_i t <= q_i.
  let tIn = 0;
  let tOut = 1;
  for (let i = 0; i < 4; i++) {
    const pi = i === 0 ? -du : i === 1 ? du : i === 2 ? -dv : dv;
    const qi = i === 0 ? u0 : i === 1 ? nx - u0 : i === 2 ? v0 : ny - v0;
    if (pi === 0) {
      // Parallel to this boundary: outside when beyond it, or exactly on the far (east/south) one, which belongs to no cell.
      if (qi < 0 || (qi === 0 && (i === 1 || i === 3))) return;
      continue;
    }
    const t = qi / pi;
    if (pi < 0) {
      if (t > tIn) tIn = t;
    } else if (t < tOut) {
      tOut = t;
    }
  }
  if (!(tOut > tIn)) return;

  const uIn = u0 + tIn * du;
  const vIn = v0 + tIn * dv;
  // The cell the segment is in just after tIn: on a boundary, the one it moves into.
  let col = du < 0 ? Math.ceil(uIn) - 1 : Math.floor(uIn);
  let row = dv < 0 ? Math.ceil(vIn) - 1 : Math.floor(vIn);
  col = col < 0 ? 0 : col >= nx ? nx - 1 : col;
  row = row < 0 ? 0 : row >= ny ? ny - 1 : row;
  const stepCol = du > 0 ? 1 : du < 0 ? -1 : 0;
  const stepRow = dv > 0 ? 1 : dv < 0 ? -1 : 0;
  // Crossing times closer than this are one corner crossing.
  const tieTolerance = 1e-10 * Math.min(du !== 0 ? 1 / Math.abs(du) : Infinity, dv !== 0 ? 1 / Math.abs(dv) : Infinity);

  let t = tIn;
  for (;;) {
    const tCol = stepCol === 0 ? Infinity : (col + (stepCol > 0 ? 1 : 0) - u0) / du;
    const tRow = stepRow === 0 ? Infinity : (row + (stepRow > 0 ? 1 : 0) - v0) / dv;
    const tNext = Math.min(tCol, tRow, tOut);
    if (tNext > t) out.push(row * nx + col, start + t * length, start + tNext * length);
    if (tNext >= tOut) return;
    if (Math.abs(tCol - tRow) <= tieTolerance) {
      col += stepCol;
      row += stepRow;
    } else if (tCol < tRow) {
      col += stepCol;
    } else {
      row += stepRow;
    }
    if (col < 0 || col >= nx || row < 0 || row >= ny) return;
    t = tNext;
  }
}

/**
 * Head at along-line distance `distance`, interpolated linearly by distance between the nearest vertices that carry
 * a value (NaN = no value at that vertex). Common practice for river stages between gauged points. The first and
 * last vertex must carry values (checked when the file is read), so there is no extrapolation.
 */
export function interpolateAlong(vertexDistance: Float64Array, vertexHeads: Float64Array, distance: number): number {
  const m = vertexDistance.length;
  // Last valued vertex at or before `distance`, first valued vertex after it.
  let before = 0;
  for (let k = 0; k < m; k++) {
    if (vertexDistance[k]! > distance) break;
    if (!Number.isNaN(vertexHeads[k]!)) before = k;
  }
  let after = -1;
  for (let k = before + 1; k < m; k++) {
    if (!Number.isNaN(vertexHeads[k]!)) {
      after = k;
      break;
    }
  }
  const h0 = vertexHeads[before]!;
  if (after < 0) return h0;
  const d0 = vertexDistance[before]!;
  const span = vertexDistance[after]! - d0;
  if (!(span > 0)) return h0;
  const w = Math.min(1, Math.max(0, (distance - d0) / span));
  return h0 + w * (vertexHeads[after]! - h0);
}

/** Cells and heads a shape entry fixes, and the features that reach no cell of the grid (for a warning). */
export interface ShapeHeads {
  /** Ascending cell indices. */
  cells: Int32Array;
  heads: Float64Array;
  /** Labels of features with no cell on the grid, e.g. `feature 2`. */
  outside: string[];
}

/**
 * The fixed heads of a collection of shapes (already in the raster CRS): polygons fix the cells whose centre lies
 * inside, lines every cell they cross. A line with per-vertex heads gives a crossed cell the mean head over the
 * part of the line inside it (length-weighted over the pieces, each piece's head taken at its middle, which is
 * exact because the head is linear along a piece). Where features overlap, the later one in the file wins.
 * `where` names the file in messages. Every feature's head is checked before any cell is filled.
 */
export function shapeFixedHeads(grid: Grid, collection: ShapeCollection, spec: HeadSpec, where: string): ShapeHeads {
  const n = grid.nx * grid.ny;
  const featureHeads = collection.features.map((feature) => featureHead(feature, spec, where));
  checkLineLengths(collection, where);
  const head = new Float64Array(n).fill(NaN);
  let sum: Float64Array | null = null;
  let weight: Float64Array | null = null;
  const outside: string[] = [];
  collection.features.forEach((feature, f) => {
    const value = featureHeads[f]!;
    let touched = 0;
    if (feature.geometry.type === 'polygon') {
      // Only a uniform head reaches here: featureHead refuses per-vertex lists on polygons.
      const h = value.type === 'uniform' ? value.head : NaN;
      for (const rings of feature.geometry.polygons) {
        const cells = rasterisePolygon(grid, rings);
        for (let k = 0; k < cells.length; k++) head[cells[k]!] = h;
        touched += cells.length;
      }
    } else if (value.type === 'uniform') {
      for (const line of feature.geometry.lines) {
        const pieces = rasteriseLine(grid, line);
        for (let k = 0; k < pieces.cells.length; k++) head[pieces.cells[k]!] = value.head;
        touched += pieces.cells.length;
      }
    } else {
      sum ??= new Float64Array(n);
      weight ??= new Float64Array(n);
      const allPieces = feature.geometry.lines.map((line, i) => {
        const pieces = rasteriseLine(grid, line);
        const vertexHeads = value.heads[i]!;
        for (let k = 0; k < pieces.cells.length; k++) {
          const length = pieces.to[k]! - pieces.from[k]!;
          const middle = 0.5 * (pieces.from[k]! + pieces.to[k]!);
          sum![pieces.cells[k]!]! += length * interpolateAlong(pieces.vertexDistance, vertexHeads, middle);
          weight![pieces.cells[k]!]! += length;
        }
        return pieces.cells;
      });
      for (const cells of allPieces) {
        for (let k = 0; k < cells.length; k++) {
          const p = cells[k]!;
          if (weight[p]! > 0) {
            head[p] = sum[p]! / weight[p]!;
            sum[p] = 0;
            weight[p] = 0;
          }
        }
        touched += cells.length;
      }
    }
    if (touched === 0) outside.push(feature.label);
  });
  let count = 0;
  for (let p = 0; p < n; p++) if (!Number.isNaN(head[p]!)) count++;
  const cells = new Int32Array(count);
  const heads = new Float64Array(count);
  let k = 0;
  for (let p = 0; p < n; p++) {
    if (!Number.isNaN(head[p]!)) {
      cells[k] = p;
      heads[k] = head[p]!;
      k++;
    }
  }
  return { cells, heads, outside };
}

/**
 * Mark in `mask` (one byte per cell) every cell a collection's shapes cover: polygon cells whose centre lies inside,
 * line cells the line crosses. Returns the labels of features with no cell on the grid.
 */
export function markShapeCells(grid: Grid, collection: ShapeCollection, mask: Uint8Array, where: string): string[] {
  checkLineLengths(collection, where);
  const outside: string[] = [];
  for (const feature of collection.features) {
    let touched = 0;
    const parts = feature.geometry.type === 'polygon' ? feature.geometry.polygons : feature.geometry.lines;
    for (const part of parts) {
      const cells =
        feature.geometry.type === 'polygon'
          ? rasterisePolygon(grid, part as Float64Array[])
          : rasteriseLine(grid, part as Float64Array).cells;
      for (let k = 0; k < cells.length; k++) mask[cells[k]!] = 1;
      touched += cells.length;
    }
    if (touched === 0) outside.push(feature.label);
  }
  return outside;
}

/** A line whose vertices all coincide (after reprojection) crosses nothing: an error rather than a silent no-op. */
export function checkLineLengths(collection: ShapeCollection, where: string): void {
  for (const feature of collection.features) {
    if (feature.geometry.type !== 'line') continue;
    feature.geometry.lines.forEach((line, i) => {
      let length = 0;
      for (let k = 2; k < line.length; k += 2) length += Math.hypot(line[k]! - line[k - 2]!, line[k + 1]! - line[k - 1]!);
      if (!(length > 0)) {
        throw inputError(
          `${where} ${feature.label}: ${feature.geometry.type === 'line' && feature.geometry.lines.length > 1 ? `line ${i}` : 'the line'} has zero length (all its vertices are at one place)`,
          {
            hint: 'a line needs two different vertices; for a single place use a small polygon',
          },
        );
      }
    });
  }
}
