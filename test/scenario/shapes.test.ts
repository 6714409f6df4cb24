/**
 * GeoJSON shapes as fixed heads and inactive areas: rasterisePolygon / rasteriseLine / interpolateAlong against
 * independent references, and the scenario keys end to end (fixedHeads[].shape, aquifer.inactiveShapes).
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { cellAt, type Grid } from '../../src/grid.js';
import { PiezomapError } from '../../src/errors.js';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { loadScenario } from '../../src/scenario/load.js';
import { interpolateAlong, rasteriseLine, rasterisePolygon } from '../../src/scenario/shapes.js';
import { solveModel } from '../../src/pipeline.js';

function grid(nx: number, ny: number, transform: [number, number, number, number, number, number], epsg = 32633): Grid {
  return { nx, ny, transform, crs: { epsg, geographic: false, geoKeys: {} } };
}

/** Interleaved x, y from a list of [x, y]. */
function xy(points: readonly (readonly [number, number])[]): Float64Array {
  return Float64Array.from(points.flat());
}

// ---------------------------------------------------------------------------------------------------------------
// Independent references, written here without the code under test.

/**
 * Crossing-number point-in-polygon over all rings (even-odd rule), as in W. R. Franklin's PNPOLY; the ray-crossing
 * test goes back to Shimrat 1962 (CACM Algorithm 112). Works in map coordinates.
 */
function insideRings(rings: readonly (readonly [number, number])[][], x: number, y: number): boolean {
  let inside = false;
  for (const ring of rings) {
    for (let i = 0, j = ring.length - 1; i < ring.length; j = i++) {
      const [xi, yi] = ring[i]!;
      const [xj, yj] = ring[j]!;
      if (yi > y !== yj > y && x < ((xj - xi) * (y - yi)) / (yj - yi) + xi) inside = !inside;
    }
  }
  return inside;
}

/** Distance from a point to a segment (plain vector geometry). */
function distanceToSegment(px: number, py: number, ax: number, ay: number, bx: number, by: number): number {
  const dx = bx - ax;
  const dy = by - ay;
  const l2 = dx * dx + dy * dy;
  const t = l2 > 0 ? Math.max(0, Math.min(1, ((px - ax) * dx + (py - ay) * dy) / l2)) : 0;
  return Math.hypot(px - ax - t * dx, py - ay - t * dy);
}

function distanceToRings(rings: readonly (readonly [number, number])[][], x: number, y: number): number {
  let best = Infinity;
  for (const ring of rings) {
    for (let i = 0, j = ring.length - 1; i < ring.length; j = i++) {
      best = Math.min(best, distanceToSegment(x, y, ring[j]![0], ring[j]![1], ring[i]![0], ring[i]![1]));
    }
  }
  return best;
}

// ---------------------------------------------------------------------------------------------------------------

describe('rasterisePolygon', () => {
  it('fills a square lake with a hole by cell centre (literal 6 x 6 grid)', () => {
    // 1 m cells, origin (0, 6), north-up: cell (row, col) has its centre at (col + 0.5, 5.5 - row).
    const g = grid(6, 6, [0, 1, 0, 6, 0, -1]);
    const outer: [number, number][] = [
      [0.8, 0.8],
      [5.2, 0.8],
      [5.2, 5.2],
      [0.8, 5.2],
      [0.8, 0.8],
    ];
    const hole: [number, number][] = [
      [2.2, 2.2],
      [2.2, 3.8],
      [3.8, 3.8],
      [3.8, 2.2],
      [2.2, 2.2],
    ];
    const cells = Array.from(rasterisePolygon(g, [xy(outer), xy(hole)]));
    // Centres 1.5 .. 4.5 in x and y are inside the outer ring; 2.5 and 3.5 (both axes) are in the hole.
    const expected: number[] = [];
    for (let row = 1; row <= 4; row++) {
      for (let col = 1; col <= 4; col++) {
        const inHole = (row === 2 || row === 3) && (col === 2 || col === 3);
        if (!inHole) expected.push(row * 6 + col);
      }
    }
    expect(cells).toEqual(expected);
  });

  it('gives the same cells whether the ring is closed or not and whichever way it winds', () => {
    const g = grid(8, 5, [100, 10, 0, 200, 0, -10]);
    const ring: [number, number][] = [
      [103, 197],
      [171, 190],
      [150, 152],
      [112, 160],
    ];
    const closed = rasterisePolygon(g, [xy([...ring, ring[0]!])]);
    const reversed = rasterisePolygon(g, [xy([...ring].reverse())]);
    expect(closed.length).toBeGreaterThan(3);
    expect(Array.from(rasterisePolygon(g, [xy(ring)]))).toEqual(Array.from(closed));
    expect(Array.from(reversed)).toEqual(Array.from(closed));
  });

  const coordinate = (low: number, high: number) => fc.double({ min: low, max: high, noNaN: true, noDefaultInfinity: true });

  for (const [label, transform] of [
    ['north-up', [1000.25, 10, 0, 5000.5, 0, -7.5]],
    ['south-up', [1000.25, 10, 0, 4873.0, 0, 7.5]],
  ] as const) {
    it(`marks exactly the cells whose centre a ray-casting test puts inside (random polygons with holes, ${label})`, () => {
      const g = grid(23, 17, [...transform]);
      const [x0, dx, , y0, , dy] = transform;
      const xLow = x0 - 30;
      const xHigh = x0 + 23 * dx + 30;
      const yLow = Math.min(y0, y0 + 17 * dy) - 30;
      const yHigh = Math.max(y0, y0 + 17 * dy) + 30;
      const point = fc.tuple(coordinate(xLow, xHigh), coordinate(yLow, yHigh));
      const ringArb = fc.array(point, { minLength: 3, maxLength: 12 });
      fc.assert(
        fc.property(fc.array(ringArb, { minLength: 1, maxLength: 3 }), (rings) => {
          const cells = rasterisePolygon(
            g,
            rings.map((ring) => xy(ring)),
          );
          const got = new Set(cells);
          expect(got.size).toBe(cells.length); // no cell twice
          for (let k = 1; k < cells.length; k++) expect(cells[k]!).toBeGreaterThan(cells[k - 1]!);
          const wrong: string[] = [];
          for (let row = 0; row < g.ny; row++) {
            for (let col = 0; col < g.nx; col++) {
              const cx = x0 + (col + 0.5) * dx;
              const cy = y0 + (row + 0.5) * dy;
              const inside = insideRings(rings, cx, cy);
              // A centre on (or within rounding of) an edge may go either way; the convention is tested above.
              if (got.has(row * g.nx + col) !== inside && distanceToRings(rings, cx, cy) >= 1e-9 * dx) wrong.push(`(${row}, ${col})`);
            }
          }
          expect(wrong, 'cells where the fill and ray casting disagree').toEqual([]);
        }),
        { numRuns: 200, seed: 51 },
      );
    });
  }
});

describe('rasteriseLine', () => {
  it('marks every cell a shallow diagonal crosses, and only those (literal 5 x 3 grid)', () => {
    // 1 m cells, origin (0, 3), north-up. The line y = 2.5 - (x - 0.5) / 2 meets column lines at x = 1, 2, 3, 4
    // (y = 2.25, 1.75, 1.25, 0.75) and row lines at y = 2 (x = 1.5) and y = 1 (x = 3.5); worked out by hand.
    const g = grid(5, 3, [0, 1, 0, 3, 0, -1]);
    const pieces = rasteriseLine(
      g,
      xy([
        [0.5, 2.5],
        [4.5, 0.5],
      ]),
    );
    expect(Array.from(pieces.cells)).toEqual([0, 1, 6, 7, 8, 13, 14]);
    // Piece ends at the crossings, as along-line distances (length of the line per unit of x: sqrt(1.25)).
    const s = Math.sqrt(1.25);
    const ends = [1, 1.5, 2, 3, 3.5, 4, 4.5].map((x) => (x - 0.5) * s);
    ends.forEach((d, k) => expect(pieces.to[k]).toBeCloseTo(d, 12));
    expect(pieces.from[0]).toBe(0);
    expect(pieces.vertexDistance[1]).toBeCloseTo(4 * s, 12);
  });

  it('does not mark the cells a 45 degree line only touches at their corners', () => {
    const g = grid(4, 4, [0, 1, 0, 4, 0, -1]);
    const pieces = rasteriseLine(
      g,
      xy([
        [0, 4],
        [4, 0],
      ]),
    );
    expect(Array.from(pieces.cells)).toEqual([0, 5, 10, 15]);
    // Passing a rounding error away from the corners (as after a reprojection) changes nothing.
    const nearly = rasteriseLine(
      g,
      xy([
        [0, 4 + 1e-13],
        [4, 1e-13],
      ]),
    );
    expect(Array.from(nearly.cells)).toEqual([0, 5, 10, 15]);
  });

  it('puts a line along a cell edge in the cells south of it (the rule of cellAt)', () => {
    const g = grid(3, 3, [0, 1, 0, 3, 0, -1]);
    const pieces = rasteriseLine(
      g,
      xy([
        [0.2, 2],
        [2.7, 2],
      ]),
    );
    expect(Array.from(pieces.cells)).toEqual([3, 4, 5]);
  });

  it('keeps only the part inside the grid, with distances still measured from the first vertex', () => {
    const g = grid(4, 1, [0, 10, 0, 10, 0, -10]);
    const pieces = rasteriseLine(
      g,
      xy([
        [-25, 5],
        [15, 5],
      ]),
    );
    expect(Array.from(pieces.cells)).toEqual([0, 1]);
    expect(pieces.from[0]).toBeCloseTo(25, 12);
    expect(pieces.to[1]).toBeCloseTo(40, 12);
  });

  it('agrees with a dense sampling of random polylines (every sampled cell marked; unsampled ones crossed only briefly)', () => {
    const transform = [2000.5, 12, 0, 900.25, 0, -9] as const;
    const g = grid(19, 14, [...transform]);
    const [x0, dx, , y0, , dy] = transform;
    const point = fc.tuple(
      fc.double({ min: x0 - 40, max: x0 + 19 * dx + 40, noNaN: true, noDefaultInfinity: true }),
      fc.double({ min: y0 + 14 * dy - 40, max: y0 + 40, noNaN: true, noDefaultInfinity: true }),
    );
    fc.assert(
      fc.property(fc.array(point, { minLength: 2, maxLength: 6 }), (points) => {
        const pieces = rasteriseLine(g, xy(points));
        const lengthIn = new Map<number, number>();
        for (let k = 0; k < pieces.cells.length; k++) {
          expect(pieces.to[k]!).toBeGreaterThan(pieces.from[k]!);
          lengthIn.set(pieces.cells[k]!, (lengthIn.get(pieces.cells[k]!) ?? 0) + pieces.to[k]! - pieces.from[k]!);
          // The middle of each piece lies in its cell.
          const middle = pointAlong(points, 0.5 * (pieces.from[k]! + pieces.to[k]!));
          const cell = cellAt(g, middle[0], middle[1]);
          expect(cell && cell.row * g.nx + cell.col).toBe(pieces.cells[k]);
        }
        // Dense sampling: 4000 points per segment.
        const step = new Map<number, number>();
        const sampled = new Set<number>();
        for (let s = 0; s + 1 < points.length; s++) {
          const [ax, ay] = points[s]!;
          const [bx, by] = points[s + 1]!;
          const spacing = Math.hypot(bx - ax, by - ay) / 4000;
          for (let i = 0; i <= 4000; i++) {
            const cell = cellAt(g, ax + ((bx - ax) * i) / 4000, ay + ((by - ay) * i) / 4000);
            if (!cell) continue;
            const p = cell.row * g.nx + cell.col;
            sampled.add(p);
            step.set(p, Math.max(step.get(p) ?? 0, spacing));
          }
        }
        // Each sample's cell is marked, except a sample exactly on a cell edge or corner, which cellAt assigns
        // east/south even when the line only touches that cell; random doubles practically never land there.
        for (const p of sampled) expect(lengthIn.has(p), `sampled cell ${p}`).toBe(true);
        // A marked cell that no sample hit is crossed over less than two sample spacings.
        let longestSegment = 0;
        for (let s = 0; s + 1 < points.length; s++)
          longestSegment = Math.max(longestSegment, Math.hypot(points[s + 1]![0] - points[s]![0], points[s + 1]![1] - points[s]![1]));
        for (const [p, length] of lengthIn) {
          if (!sampled.has(p)) expect(length, `unsampled cell ${p}`).toBeLessThan((2 * longestSegment) / 4000);
        }
      }),
      { numRuns: 200, seed: 7 },
    );
  });
});

/** The point at along-line distance `d` of a polyline (plain linear interpolation, independent of shapes.ts). */
function pointAlong(points: readonly (readonly [number, number])[], d: number): [number, number] {
  let start = 0;
  for (let s = 0; s + 1 < points.length; s++) {
    const [ax, ay] = points[s]!;
    const [bx, by] = points[s + 1]!;
    const length = Math.hypot(bx - ax, by - ay);
    if (d <= start + length || s + 2 === points.length) {
      const w = length > 0 ? (d - start) / length : 0;
      return [ax + w * (bx - ax), ay + w * (by - ay)];
    }
    start += length;
  }
  return [points[0]![0], points[0]![1]];
}

describe('interpolateAlong', () => {
  it('falls linearly between valued vertices, skipping vertices without a value', () => {
    const distance = Float64Array.from([0, 30, 45, 100]);
    const heads = Float64Array.from([50, NaN, 48, 40]);
    // Between 0 and 45: 50 -> 48; between 45 and 100: 48 -> 40.
    expect(interpolateAlong(distance, heads, 0)).toBe(50);
    expect(interpolateAlong(distance, heads, 30)).toBeCloseTo(50 - (2 * 30) / 45, 12);
    expect(interpolateAlong(distance, heads, 45)).toBeCloseTo(48, 12);
    expect(interpolateAlong(distance, heads, 72.5)).toBeCloseTo(44, 12);
    expect(interpolateAlong(distance, heads, 100)).toBe(40);
  });
});

// ---------------------------------------------------------------------------------------------------------------
// Scenario files with shapes.

let dir: string;

function writeRaster(name: string, g: Grid, values: ArrayLike<number>): void {
  writeFileSync(join(dir, name), encodeFloat32GeoTiff(g, values, { nodata: -9999 }));
}

function writeJson(name: string, json: unknown): string {
  const path = join(dir, name);
  writeFileSync(path, JSON.stringify(json));
  return path;
}

function feature(geometry: unknown, properties: Record<string, unknown> | null = {}, id?: string): Record<string, unknown> {
  return { type: 'Feature', ...(id ? { id } : {}), geometry, properties };
}

function collection(features: unknown[], crs?: string): Record<string, unknown> {
  return { type: 'FeatureCollection', ...(crs ? { crs: { type: 'name', properties: { name: crs } } } : {}), features };
}

/** A closed circle of `n` vertices. */
function circle(cx: number, cy: number, r: number, n = 180): [number, number][] {
  const ring: [number, number][] = [];
  for (let k = 0; k < n; k++) ring.push([cx + r * Math.cos((2 * Math.PI * k) / n), cy + r * Math.sin((2 * Math.PI * k) / n)]);
  ring.push(ring[0]!);
  return ring;
}

async function loadError(path: string): Promise<PiezomapError> {
  try {
    await loadScenario(path);
  } catch (thrown) {
    if (thrown instanceof PiezomapError) return thrown;
    throw thrown;
  }
  throw new Error(`expected ${path} to fail`);
}

// Lon/lat <-> WGS 84 / UTM zone 33N pairs computed with GDAL 3.6.2: gdaltransform -s_srs EPSG:32633 -t_srs EPSG:4326 -output_xy
// (and the reverse); GDAL's command-line tools use longitude, latitude order.
const UTM_TO_LONLAT: Array<{ utm: [number, number]; lonLat: [number, number] }> = [
  { utm: [611450, 4911650], lonLat: [16.3983322944157, 44.3495629473253] },
  { utm: [612550, 4910950], lonLat: [16.4119782719776, 44.3430930225393] },
  { utm: [611050, 4910550], lonLat: [16.3930805535276, 44.33972394018] },
];
const LONLAT_TO_UTM: Array<{ lonLat: [number, number]; utm: [number, number] }> = [
  { lonLat: [16.39, 44.355], utm: [610775.651362973, 4912242.62486655] },
  { lonLat: [16.405, 44.348], utm: [611984.409052055, 4911485.48479891] },
];

// 30 x 25 cells of 100 m in EPSG:32633 over an invented valley.
const utmGrid = grid(30, 25, [610500, 100, 0, 4912500, 0, -100]);

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-shapes-'));
  writeRaster('k.tif', utmGrid, new Float64Array(30 * 25).fill(5));
});

afterAll(() => {
  rmSync(dir, { recursive: true, force: true });
});

describe('fixedHeads shape entries', () => {
  it('reprojects lon/lat polygons into the cells whose centres GDAL puts there', async () => {
    // A square of +-0.0002 degrees (about 16 m east-west, 22 m north-south) around each reference point holds exactly
    // the centre of the 100 m cell the point is the centre of.
    const features = UTM_TO_LONLAT.map(({ lonLat: [lon, lat] }, k) =>
      feature(
        {
          type: 'Polygon',
          coordinates: [
            [
              [lon - 2e-4, lat - 2e-4],
              [lon + 2e-4, lat - 2e-4],
              [lon + 2e-4, lat + 2e-4],
              [lon - 2e-4, lat + 2e-4],
              [lon - 2e-4, lat - 2e-4],
            ],
          ],
        },
        { stage: 90 + k },
      ),
    );
    writeJson('ponds.geojson', collection(features));
    const path = writeJson('ponds.json', {
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [{ shape: 'ponds.geojson', headProperty: 'stage' }],
    });
    const { model } = await loadScenario(path);
    const group = model.fixedHeads[0]!;
    expect(group.name).toBe('ponds');
    const expected = UTM_TO_LONLAT.map(({ utm: [x, y] }, k) => {
      const cell = cellAt(utmGrid, x, y)!;
      return { cell: cell.row * utmGrid.nx + cell.col, head: 90 + k };
    }).sort((a, b) => a.cell - b.cell);
    expect(Array.from(group.cells)).toEqual(expected.map((e) => e.cell));
    expect(Array.from(group.heads)).toEqual(expected.map((e) => e.head));
    expect(model.warnings).toEqual([]);
  });

  it('reprojects a lon/lat river line onto the cells its GDAL-reprojected vertices cross', async () => {
    writeJson(
      'river.geojson',
      collection([feature({ type: 'LineString', coordinates: LONLAT_TO_UTM.map((p) => p.lonLat) }, { stages: [101, 99] })]),
    );
    const path = writeJson('river.json', {
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [{ shape: 'river.geojson', headProperty: 'stages', name: 'river' }],
    });
    const { model } = await loadScenario(path);
    const reference = rasteriseLine(utmGrid, xy(LONLAT_TO_UTM.map((p) => p.utm)));
    const expectedCells = [...new Set(reference.cells)].sort((a, b) => a - b);
    const group = model.fixedHeads[0]!;
    expect(Array.from(group.cells)).toEqual(expectedCells);
    // Stages fall linearly from 101 to 99 along the line, so each cell's head lies between them and
    // decreases eastwards (the line runs east-south-east).
    const length = reference.vertexDistance[1]!;
    for (let k = 0; k < group.cells.length; k++) {
      expect(group.heads[k]!).toBeLessThanOrEqual(101);
      expect(group.heads[k]!).toBeGreaterThanOrEqual(99);
    }
    // The cell at the first vertex: the mean stage over its piece equals the stage at the piece's middle.
    const first = reference.cells[0]!;
    const middle = 0.5 * (reference.from[0]! + reference.to[0]!);
    expect(group.heads[group.cells.indexOf(first)]).toBeCloseTo(101 - (2 * middle) / length, 6);
  });

  it('reads the legacy crs member GDAL writes: the river in lon/lat and as reprojected by ogr2ogr give the same cells and stages', async () => {
    const lonLat = [
      [16.39, 44.355],
      [16.4, 44.35],
      [16.405, 44.348],
    ];
    writeJson('river-lonlat.geojson', collection([feature({ type: 'LineString', coordinates: lonLat }, { stage: [101, null, 99] })]));
    // Output of GDAL 3.6.2: ogr2ogr -f GeoJSON -t_srs EPSG:32633 river-utm.geojson river-lonlat.geojson (verbatim).
    writeFileSync(
      join(dir, 'river-utm.geojson'),
      `{
"type": "FeatureCollection",
"name": "in",
"crs": { "type": "name", "properties": { "name": "urn:ogc:def:crs:EPSG::32633" } },
"features": [
{ "type": "Feature", "properties": { "stage": [ 101, null, 99 ] }, "geometry": { "type": "LineString", "coordinates": [ [ 610775.651362973032519, 4912242.624866549856961 ], [ 611582.090892973123118, 4911700.815276828594506 ], [ 611984.409052055329084, 4911485.484798914752901 ] ] } }
]
}
`,
    );
    const load = async (file: string) =>
      (
        await loadScenario(
          writeJson(`${file}.json`, {
            aquifer: { conductivity: 'k.tif', thickness: 10 },
            fixedHeads: [{ shape: `${file}.geojson`, headProperty: 'stage' }],
          }),
        )
      ).model.fixedHeads[0]!;
    const a = await load('river-lonlat');
    const b = await load('river-utm');
    expect(a.cells.length).toBeGreaterThan(10);
    expect(Array.from(a.cells)).toEqual(Array.from(b.cells));
    for (let k = 0; k < a.heads.length; k++) expect(a.heads[k]).toBeCloseTo(b.heads[k]!, 6);
  });

  it('gives a river cell the mean of the linearly interpolated stage over the line inside it', async () => {
    // 10 x 3 cells of 10 m, in the raster CRS through a legacy crs member. The river runs along the middle row from
    // x = 0 to 100 with stages 50 (x = 0), unknown (x = 30), 48 (x = 45), 40 (x = 100).
    const g = grid(10, 3, [600000, 10, 0, 4900030, 0, -10]);
    writeRaster('k-small.tif', g, new Float64Array(30).fill(5));
    const y = 4900015;
    writeJson(
      'stages.geojson',
      collection(
        [
          feature(
            {
              type: 'LineString',
              coordinates: [
                [600000, y],
                [600030, y],
                [600045, y],
                [600100, y],
              ],
            },
            { stage: [50, null, 48, 40] },
          ),
        ],
        'urn:ogc:def:crs:EPSG::32633',
      ),
    );
    const path = writeJson('stages.json', {
      aquifer: { conductivity: 'k-small.tif', thickness: 10 },
      fixedHeads: [{ shape: 'stages.geojson', headProperty: 'stage' }],
    });
    const { model } = await loadScenario(path);
    const group = model.fixedHeads[0]!;
    expect(Array.from(group.cells)).toEqual([10, 11, 12, 13, 14, 15, 16, 17, 18, 19]);
    // The stage is piecewise linear in x; the mean of a linear function over an interval is its value at the middle
    // (midpoint rule, exact for linear functions), so cell c gets h(10c + 5), except cell 4, which holds the vertex
    // at x = 45 and gets the mean of both halves.
    const stage = (x: number) => (x <= 45 ? 50 - (2 * x) / 45 : 48 - (8 * (x - 45)) / 55);
    for (let c = 0; c < 10; c++) {
      const expected = c === 4 ? 0.5 * (stage(42.5) + stage(47.5)) : stage(10 * c + 5);
      expect(group.heads[c]).toBeCloseTo(expected, 9);
    }
  });

  it('solves a wellfield inside a ring-shaped lake: the budget closes, the lake supplies the well, drawdown follows Thiem', async () => {
    // 45 x 45 cells of 10 m; a lake ring (outer radius 200 m, inner 180 m: a polygon with a hole) at head 100 around
    // a well at the centre of the middle cell; everything outside the ring made inactive by an inactive shape
    // (the grid's square with the circle cut out as a hole).
    const n = 45;
    const dx = 10;
    const x0 = 500000;
    const y0 = 4100450;
    const g = grid(n, n, [x0, dx, 0, y0, 0, -dx]);
    const conductivity = 10;
    const thickness = 20;
    writeRaster('k-lake.tif', g, new Float64Array(n * n).fill(conductivity));
    const cx = x0 + 22.5 * dx;
    const cy = y0 - 22.5 * dx;
    const crs = 'EPSG:32633';
    writeJson(
      'lake.geojson',
      collection(
        [feature({ type: 'Polygon', coordinates: [circle(cx, cy, 200), circle(cx, cy, 180).reverse()] }, { level: 100 }, 'ring-lake')],
        crs,
      ),
    );
    const square: [number, number][] = [
      [x0 - 1, y0 + 1],
      [x0 + n * dx + 1, y0 + 1],
      [x0 + n * dx + 1, y0 - n * dx - 1],
      [x0 - 1, y0 - n * dx - 1],
      [x0 - 1, y0 + 1],
    ];
    writeJson('outside.geojson', collection([feature({ type: 'Polygon', coordinates: [square, circle(cx, cy, 200.5)] })], crs));
    const rate = -500;
    const path = writeJson('lake.json', {
      aquifer: { conductivity: 'k-lake.tif', thickness, inactiveShapes: ['outside.geojson'] },
      fixedHeads: [{ shape: 'lake.geojson', headProperty: 'level', name: 'lake' }],
      wells: [{ id: 'W1', x: cx, y: cy, rate }],
      solver: { tolerance: 1e-12 },
    });
    const { model } = await loadScenario(path);
    expect(model.warnings).toEqual([]);
    // The corner cell lies outside the circle: inactive.
    expect(Number.isNaN(model.conductivity[0]!)).toBe(true);
    const result = solveModel(model);
    expect(result.stats.converged).toBe(true);
    expect(Number.isNaN(result.head[0]!)).toBe(true);
    // Water budget: in steady state the lake gives exactly what the well takes.
    expect(Math.abs(result.budget.discrepancyPercent)).toBeLessThan(1e-6);
    const lake = result.budget.terms.find((term) => term.term === 'lake')!;
    expect(lake.inflow - lake.outflow).toBeCloseTo(-rate, 6);
    // Thiem (1906): s(r1) - s(r2) = Q / (2 pi T) ln(r2 / r1) between two radii, independent of the outer radius.
    // Finite-difference heads 50 m and 100 m east of the well (cell centres), within 2 %.
    const centre = 22 * n + 22;
    const h50 = result.head[centre + 5]!;
    const h100 = result.head[centre + 10]!;
    const thiem = (-rate / (2 * Math.PI * conductivity * thickness)) * Math.log(100 / 50);
    expect((h100 - h50) / thiem).toBeGreaterThan(0.98);
    expect((h100 - h50) / thiem).toBeLessThan(1.02);
  });
});

describe('aquifer.inactiveShapes', () => {
  it('makes the cells a line crosses inactive, a barrier the five-point stencil cannot cross', async () => {
    // 6 x 4 cells of 10 m; a line from (600005, 4900040) to (600055, 4900000) in the raster CRS.
    const g = grid(6, 4, [600000, 10, 0, 4900040, 0, -10]);
    writeRaster('k-wall.tif', g, new Float64Array(24).fill(5));
    const line = [
      [600005, 4900040],
      [600055, 4900000],
    ];
    writeJson('wall.geojson', collection([feature({ type: 'LineString', coordinates: line })], 'EPSG:32633'));
    const path = writeJson('wall.json', {
      aquifer: { conductivity: 'k-wall.tif', thickness: 10, inactiveShapes: ['wall.geojson'] },
      fixedHeads: [{ edge: 'west', head: 1 }],
    });
    const { model } = await loadScenario(path);
    const expected = new Set(rasteriseLine(g, xy(line as [number, number][])).cells);
    expect(expected.size).toBeGreaterThan(4);
    for (let p = 0; p < 24; p++) expect(Number.isNaN(model.conductivity[p]!), `cell ${p}`).toBe(expected.has(p));
    // A barrier for the five-point stencil: the active cells fall apart into the two sides of the line (4-connected
    // components by breadth-first search), even where the line steps through a cell corner (at x = 600030, y = 4900020).
    const component = new Int32Array(24).fill(-1);
    let components = 0;
    for (let start = 0; start < 24; start++) {
      if (Number.isNaN(model.conductivity[start]!) || component[start] !== -1) continue;
      const queue = [start];
      component[start] = components;
      while (queue.length) {
        const p = queue.pop()!;
        const row = Math.floor(p / 6);
        const col = p % 6;
        const neighbours = [col > 0 ? p - 1 : -1, col < 5 ? p + 1 : -1, row > 0 ? p - 6 : -1, row < 3 ? p + 6 : -1];
        for (const q of neighbours) {
          if (q >= 0 && !Number.isNaN(model.conductivity[q]!) && component[q] === -1) {
            component[q] = components;
            queue.push(q);
          }
        }
      }
      components++;
    }
    expect(components).toBe(2);
    expect(component[5]).not.toBe(component[18]); // north-east corner vs south-west corner
  });
});

describe('shape errors name the file and the feature', () => {
  async function shapeError(
    name: string,
    geojson: unknown,
    entry: Record<string, unknown> = { headProperty: 'stage' },
  ): Promise<PiezomapError> {
    writeJson(`${name}.geojson`, geojson);
    const path = writeJson(`${name}.json`, {
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [{ shape: `${name}.geojson`, ...entry }],
    });
    const error = await loadError(path);
    expect(error.code).toBe('input');
    expect(error.message).toContain(`fixedHeads[0].shape "${name}.geojson"`);
    return error;
  }
  const square = (x: number, y: number) => ({
    type: 'Polygon',
    coordinates: [
      [
        [x, y],
        [x + 1e-3, y],
        [x + 1e-3, y + 1e-3],
        [x, y + 1e-3],
        [x, y],
      ],
    ],
  });
  const lon = 16.4;
  const lat = 44.345;

  it('a feature without geometry', async () => {
    const error = await shapeError('nogeom', collection([feature(square(lon, lat), { stage: 1 }), feature(null, { stage: 2 }, 'pond-b')]));
    expect(error.message).toContain('feature 1 (id "pond-b") has no geometry');
  });

  it('a Point feature', async () => {
    const error = await shapeError('point', collection([feature({ type: 'Point', coordinates: [lon, lat] }, { stage: 1 })]));
    expect(error.message).toMatch(/feature 0 is a Point/);
  });

  it('a GeometryCollection', async () => {
    const error = await shapeError('gc', collection([feature({ type: 'GeometryCollection', geometries: [] }, { stage: 1 })]));
    expect(error.message).toContain('feature 0 is a GeometryCollection');
  });

  it('a missing head property, listing the properties there are', async () => {
    const error = await shapeError(
      'noprop',
      collection([feature(square(lon, lat), { stage: 1 }), feature(square(lon, lat), { level: 2 })]),
    );
    expect(error.message).toContain('feature 1 has no property "stage"');
    expect(error.detail.hint).toContain('level');
    expect(error.detail.key).toBe('fixedHeads[0].headProperty');
  });

  it('a head that is text or not finite', async () => {
    expect((await shapeError('text', collection([feature(square(lon, lat), { stage: '101,5' })]))).message).toContain(
      'feature 0: property "stage" is the text "101,5", not a number',
    );
    // JSON has no Infinity, but 1e999 parses to it.
    writeFileSync(
      join(dir, 'inf.geojson'),
      `{"type":"FeatureCollection","features":[{"type":"Feature","properties":{"stage":1e999},"geometry":${JSON.stringify(square(lon, lat))}}]}`,
    );
    const path = writeJson('inf.json', {
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [{ shape: 'inf.geojson', headProperty: 'stage' }],
    });
    expect((await loadError(path)).message).toContain('feature 0: property "stage" is Infinity, not a finite head');
  });

  it('per-vertex heads that do not match the line', async () => {
    const line = {
      type: 'LineString',
      coordinates: [
        [lon, lat],
        [lon + 0.01, lat],
        [lon + 0.02, lat],
      ],
    };
    expect((await shapeError('short', collection([feature(line, { stage: [1, 2] })]))).message).toContain(
      'has 2 value(s) for a line of 3 vertices',
    );
    expect((await shapeError('open', collection([feature(line, { stage: [1, 2, null] })]))).message).toContain(
      'the first and last vertex need a head',
    );
    expect((await shapeError('onpoly', collection([feature(square(lon, lat), { stage: [1, 2] })]))).message).toContain(
      'per-vertex heads are only for lines',
    );
  });

  it('invalid coordinates, with their place in the geometry', async () => {
    const bad = {
      type: 'Polygon',
      coordinates: [
        [
          [lon, lat],
          [lon + 1e-3, 'x'],
          [lon, lat + 1e-3],
        ],
      ],
    };
    expect(
      (await shapeError('coords', collection([feature(square(lon, lat), { stage: 1 }), feature(bad, { stage: 1 })]))).message,
    ).toContain('feature 1: coordinates[0][1] is not a position');
    const degenerate = {
      type: 'LineString',
      coordinates: [
        [lon, lat],
        [lon, lat],
      ],
    };
    const zero = await shapeError('zero', collection([feature(degenerate, { stage: 1 })]));
    expect(zero.message).toContain('feature 0: the line has zero length');
    expect(zero.detail.key).toBe('fixedHeads[0].shape');
  });

  it('projected coordinates without a crs member, with a hint about RFC 7946 longitude/latitude', async () => {
    const error = await shapeError(
      'utm',
      collection([
        feature(
          {
            type: 'Polygon',
            coordinates: [
              [
                [611000, 4911000],
                [611300, 4911000],
                [611300, 4911300],
                [611000, 4911000],
              ],
            ],
          },
          { stage: 1 },
        ),
      ]),
    );
    expect(error.message).toContain('feature 0');
    expect(error.detail.hint).toContain('"crs" member');
  });

  it('a crs member that names no EPSG code', async () => {
    const error = await shapeError('crs', {
      ...collection([feature(square(lon, lat), { stage: 1 })]),
      crs: { type: 'name', properties: { name: 'my-local-grid' } },
    });
    expect(error.message).toContain('"my-local-grid"');
  });

  it('not JSON, with line and column', async () => {
    writeFileSync(join(dir, 'broken.geojson'), '{"type": "FeatureCollection",\n "features": [ }');
    const path = writeJson('broken.json', {
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [{ shape: 'broken.geojson', head: 5 }],
    });
    const error = await loadError(path);
    expect(error.message).toMatch(/fixedHeads\[0\]\.shape "broken\.geojson" line 2, column \d+: invalid JSON/);
  });

  it('head and headProperty together, or neither, in the scenario', async () => {
    writeJson('ok.geojson', collection([feature(square(lon, lat), { stage: 1 })]));
    for (const entry of [{ shape: 'ok.geojson', head: 1, headProperty: 'stage' }, { shape: 'ok.geojson' }]) {
      const error = await loadError(writeJson('both.json', { aquifer: { conductivity: 'k.tif', thickness: 10 }, fixedHeads: [entry] }));
      expect(error.code).toBe('input');
      expect(error.message).toMatch(/fixedHeads\[0\]\.(head|headProperty): /);
    }
  });

  it('a feature outside the grid is a warning, not an error', async () => {
    writeJson(
      'partly.geojson',
      collection([
        feature(square(16.3983322944157 - 2e-4, 44.3495629473253 - 2e-4), { stage: 1 }),
        feature(square(17.5, 45.5), { stage: 2 }, 'far-away'),
      ]),
    );
    const path = writeJson('partly.json', {
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [{ shape: 'partly.geojson', headProperty: 'stage' }],
    });
    const { model } = await loadScenario(path);
    expect(model.fixedHeads[0]!.cells.length).toBe(1);
    expect(model.warnings.join('\n')).toContain('feature 1 (id "far-away") covers no cell of the grid');
  });
});
