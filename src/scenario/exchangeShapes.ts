/**
 * Shapes of head-dependent boundaries on the raster grid (../shared/spec/physics.md): per cell, the wetted size a
 * feature has there (a line: its length inside the cell times its width; a polygon: the area of the cell inside
 * it), the stage or level, the bed bottom, and which feature (reach) gives the cell most of it. Pure functions on
 * shapes already in the raster CRS; the file is read in load.ts.
 *
 * Decisions (docs/scenario-shapes.md):
 * - With `leakance`, a cell's conductance is leakance x wetted size, summed over the features in the cell; the
 *   stage (and a river's bed bottom) is the conductance-weighted mean, which keeps the linear part of the
 *   exchange exact: sum_i C_i (H_i - h) = C (H - h).
 * - With `conductance` (one per cell), the cells are those a line crosses or whose centre a polygon covers (the
 *   rule of fixed-head shapes) and the stage is the length-weighted mean along lines.
 * - A cell shared by several features belongs to the reach with the largest share there (for reach sub-rows).
 */
import type { Grid } from '../grid.js';
import { featureHead, type FeatureHead, type ShapeCollection } from './geojson.js';
import { interpolateAlong, rasteriseLine, rasterisePolygon } from './shapes.js';

export interface ExchangeCells {
  /** Ascending unique cells. */
  cells: Int32Array;
  /** Wetted size per cell: leakance mode L^2 (line length x width, or area); conductance mode the weight used. */
  weight: Float64Array;
  heads: Float64Array;
  /** Bed bottom per cell (NaN when none), or null when no bottom property was asked for. */
  bottoms: Float64Array | null;
  /** Feature index (reach) per cell. */
  reach: Int32Array;
  /** Reach names: the feature's `name` property, else its `id`, else `feature N`. */
  reachNames: string[];
  /** Labels of features that reach no cell of the grid. */
  outside: string[];
  /** True when at least one feature is a line (then `width` is needed for leakance). */
  hasLines: boolean;
}

/**
 * Cells, wetted sizes, stages and bottoms of a collection. `width` multiplies line lengths (1 when the entry gives a
 * conductance per cell). `byArea` true: polygons count the cell area inside them; false: cells whose centre is inside
 * count with weight 1.
 */
export function exchangeCells(
  grid: Grid,
  collection: ShapeCollection,
  head: { head: number } | { headProperty: string },
  bottomProperty: string | null,
  width: number,
  byArea: boolean,
  where: string,
): ExchangeCells {
  const n = grid.nx * grid.ny;
  const heads: FeatureHead[] = collection.features.map((f) => featureHead(f, head, where));
  const bottoms: FeatureHead[] | null =
    bottomProperty === null ? null : collection.features.map((f) => featureHead(f, { headProperty: bottomProperty }, where));
  const weight = new Float64Array(n);
  const weightedHead = new Float64Array(n);
  const weightedBottom = new Float64Array(n);
  const best = new Float64Array(n);
  const reachOf = new Int32Array(n).fill(-1);
  // Per-feature share of each cell, reset after each feature over the cells it touched.
  const share = new Float64Array(n);
  const outside: string[] = [];
  let hasLines = false;
  const [, pw, , , , ph] = grid.transform;
  const cellArea = Math.abs(pw * ph);
  collection.features.forEach((feature, f) => {
    const touched: number[] = [];
    const add = (p: number, w: number, h: number, b: number) => {
      if (!(w > 0)) return;
      if (share[p] === 0) touched.push(p);
      share[p]! += w;
      weight[p]! += w;
      weightedHead[p]! += w * h;
      weightedBottom[p]! += w * b;
    };
    const fh = heads[f]!;
    const fb = bottoms ? bottoms[f]! : null;
    if (feature.geometry.type === 'polygon') {
      const h = fh.type === 'uniform' ? fh.head : NaN;
      const b = fb === null ? NaN : fb.type === 'uniform' ? fb.head : NaN;
      for (const rings of feature.geometry.polygons) {
        if (byArea) {
          const areas = polygonCellAreas(grid, rings);
          for (const [p, a] of areas) add(p, a * cellArea, h, b);
        } else {
          const cells = rasterisePolygon(grid, rings);
          for (let k = 0; k < cells.length; k++) add(cells[k]!, 1, h, b);
        }
      }
    } else {
      hasLines = true;
      feature.geometry.lines.forEach((line, i) => {
        const pieces = rasteriseLine(grid, line);
        for (let k = 0; k < pieces.cells.length; k++) {
          const length = pieces.to[k]! - pieces.from[k]!;
          const middle = 0.5 * (pieces.from[k]! + pieces.to[k]!);
          const h = fh.type === 'uniform' ? fh.head : interpolateAlong(pieces.vertexDistance, fh.heads[i]!, middle);
          const b = fb === null ? NaN : fb.type === 'uniform' ? fb.head : interpolateAlong(pieces.vertexDistance, fb.heads[i]!, middle);
          add(pieces.cells[k]!, length * width, h, b);
        }
      });
    }
    if (touched.length === 0) outside.push(feature.label);
    for (const p of touched) {
      if (share[p]! > best[p]!) {
        best[p] = share[p]!;
        reachOf[p] = f;
      }
      share[p] = 0;
    }
  });
  let count = 0;
  for (let p = 0; p < n; p++) if (weight[p]! > 0) count++;
  const out: ExchangeCells = {
    cells: new Int32Array(count),
    weight: new Float64Array(count),
    heads: new Float64Array(count),
    bottoms: bottoms ? new Float64Array(count) : null,
    reach: new Int32Array(count),
    reachNames: reachNames(collection),
    outside,
    hasLines,
  };
  for (let p = 0, k = 0; p < n; p++) {
    const w = weight[p]!;
    if (!(w > 0)) continue;
    out.cells[k] = p;
    out.weight[k] = w;
    out.heads[k] = weightedHead[p]! / w;
    if (out.bottoms) out.bottoms[k] = weightedBottom[p]! / w;
    out.reach[k] = reachOf[p]!;
    k++;
  }
  return out;
}

/** Reach names: the feature's `name` property, else its `id` property, else `feature N`; made unique by a suffix. */
export function reachNames(collection: ShapeCollection): string[] {
  const used = new Set<string>();
  return collection.features.map((feature) => {
    const props = feature.properties;
    const given =
      typeof props.name === 'string' && props.name.trim()
        ? props.name.trim()
        : typeof props.id === 'string' || typeof props.id === 'number'
          ? String(props.id)
          : `feature ${feature.index}`;
    let name = given;
    for (let k = 2; used.has(name); k++) name = `${given} (${k})`;
    used.add(name);
    return name;
  });
}

/**
 * The area of each cell inside a polygon (outer ring and holes; even-odd as for fixed-head shapes, holes assumed
 * inside the outer ring), in units of the cell area (0..1). Each ring is clipped to each cell of its bounding box
 * (Sutherland & Hodgman 1974, "Reentrant polygon clipping") and measured with the shoelace formula; the area inside
 * is the outer ring's minus the holes'. Work: cells of the bounding box x vertices.
 */
export function polygonCellAreas(grid: Grid, rings: readonly Float64Array[]): Map<number, number> {
  const { nx, ny } = grid;
  const [ox, pw, , oy, , ph] = grid.transform;
  const result = new Map<number, number>();
  if (rings.length === 0) return result;
  // Grid coordinates of every ring.
  const uv = rings.map((ring) => {
    const out = new Float64Array(ring.length);
    for (let k = 0; k < ring.length; k += 2) {
      out[k] = (ring[k]! - ox) / pw;
      out[k + 1] = (ring[k + 1]! - oy) / ph;
    }
    return out;
  });
  const outer = uv[0]!;
  let u0 = Infinity,
    u1 = -Infinity,
    v0 = Infinity,
    v1 = -Infinity;
  for (let k = 0; k < outer.length; k += 2) {
    u0 = Math.min(u0, outer[k]!);
    u1 = Math.max(u1, outer[k]!);
    v0 = Math.min(v0, outer[k + 1]!);
    v1 = Math.max(v1, outer[k + 1]!);
  }
  const c0 = Math.max(0, Math.floor(u0));
  const c1 = Math.min(nx, Math.ceil(u1));
  const r0 = Math.max(0, Math.floor(v0));
  const r1 = Math.min(ny, Math.ceil(v1));
  const maxVertices = Math.max(...uv.map((r) => r.length >> 1));
  const a = new Float64Array(2 * (maxVertices + 8) * 2);
  const b = new Float64Array(a.length);
  for (let r = r0; r < r1; r++) {
    for (let c = c0; c < c1; c++) {
      let area = 0;
      uv.forEach((ring, i) => {
        const clipped = clippedArea(ring, c, c + 1, r, r + 1, a, b);
        area += i === 0 ? clipped : -clipped;
      });
      if (area > 1e-12) result.set(r * nx + c, Math.min(1, area));
    }
  }
  return result;
}

/** |area| of a ring clipped to [ua, ub] x [va, vb], using two scratch buffers (each 2 x (vertices + 8) x 2 long). */
function clippedArea(ring: Float64Array, ua: number, ub: number, va: number, vb: number, bufA: Float64Array, bufB: Float64Array): number {
  let m = ring.length >> 1;
  // A closed ring repeats its first vertex: drop it.
  if (m > 1 && ring[0] === ring[2 * m - 2] && ring[1] === ring[2 * m - 1]) m--;
  let src = bufA;
  let dst = bufB;
  if (src.length < 4 * m + 16) {
    src = new Float64Array(4 * m + 16);
    dst = new Float64Array(4 * m + 16);
  }
  src.set(ring.subarray(0, 2 * m));
  // Four half-planes: u >= ua, u <= ub, v >= va, v <= vb.
  for (let side = 0; side < 4 && m > 0; side++) {
    // One half-plane clip emits at most two vertices per edge.
    if (dst.length < 4 * m) dst = new Float64Array(4 * m);
    const axis = side < 2 ? 0 : 1;
    const bound = side === 0 ? ua : side === 1 ? ub : side === 2 ? va : vb;
    const keepAbove = side === 0 || side === 2;
    let out = 0;
    for (let k = 0; k < m; k++) {
      const j = k === 0 ? m - 1 : k - 1;
      const pu = src[2 * j]!,
        pv = src[2 * j + 1]!;
      const qu = src[2 * k]!,
        qv = src[2 * k + 1]!;
      const pc = axis === 0 ? pu : pv;
      const qc = axis === 0 ? qu : qv;
      const pIn = keepAbove ? pc >= bound : pc <= bound;
      const qIn = keepAbove ? qc >= bound : qc <= bound;
      if (qIn !== pIn) {
        const t = (bound - pc) / (qc - pc);
        dst[out++] = pu + t * (qu - pu);
        dst[out++] = pv + t * (qv - pv);
      }
      if (qIn) {
        dst[out++] = qu;
        dst[out++] = qv;
      }
    }
    m = out >> 1;
    const swap = src;
    src = dst;
    dst = swap;
  }
  let twice = 0;
  for (let k = 0; k < m; k++) {
    const j = k + 1 === m ? 0 : k + 1;
    twice += src[2 * k]! * src[2 * j + 1]! - src[2 * j]! * src[2 * k + 1]!;
  }
  return Math.abs(twice) / 2;
}
