import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { contours as d3Contours } from 'd3-contour';
import fc from 'fast-check';
import proj4 from 'proj4';
import { describe, expect, it } from 'vitest';
import {
  contourField,
  contourLevelLimit,
  contourLevels,
  contoursToGeoJson,
  decimalsOf,
  MAX_CONTOUR_LEVELS,
  roundInterval,
  type ContourSet,
} from '../../src/analysis/contours.js';
import { cellCentre, type Grid } from '../../src/grid.js';

/** An invented north-up grid in a UTM zone (coordinates are made up, no real place). */
function makeGrid(nx: number, ny: number, dx = 10, dy = 10, originX = 500000, originY = 4100000): Grid {
  return {
    nx,
    ny,
    transform: [originX, dx, 0, originY, 0, -dy],
    crs: { epsg: 32633, geographic: false, geoKeys: {} },
  };
}

/** Head linear in map x: h = h0 - g * (x - x0). */
function linearField(grid: Grid, h0: number, g: number): Float64Array {
  const values = new Float64Array(grid.nx * grid.ny);
  for (let i = 0; i < grid.ny; i++) {
    for (let j = 0; j < grid.nx; j++) values[i * grid.nx + j] = h0 - g * (cellCentre(grid, i, j).x - grid.transform[0]);
  }
  return values;
}

function allPoints(set: ContourSet, level: number): Array<[number, number]> {
  const found = set.levels.find((l) => l.level === level);
  const points: Array<[number, number]> = [];
  for (const line of found?.lines ?? []) for (let k = 0; k < line.length; k += 2) points.push([line[k]!, line[k + 1]!]);
  return points;
}

describe('roundInterval', () => {
  it('picks 1, 2, 2.5 or 5 times a power of ten giving 10 to 25 levels (common practice for contour intervals)', () => {
    fc.assert(
      fc.property(fc.double({ min: -1e4, max: 1e4, noNaN: true }), fc.double({ min: 1e-3, max: 1e4, noNaN: true }), (min, range) => {
        const max = min + range;
        const interval = roundInterval(min, max)!;
        const mantissa = interval / Math.pow(10, Math.floor(Math.log10(interval) + 1e-9));
        expect([1, 2, 2.5, 5].some((m) => Math.abs(m - mantissa) < 1e-9)).toBe(true);
        const count = contourLevels(min, max, interval).length;
        expect(count).toBeGreaterThanOrEqual(10);
        expect(count).toBeLessThanOrEqual(25);
      }),
      { numRuns: 300 },
    );
  });

  it('returns null for an empty or non-finite range', () => {
    expect(roundInterval(5, 5)).toBeNull();
    expect(roundInterval(NaN, 5)).toBeNull();
  });
});

describe('contourLevels', () => {
  it('gives round multiples of the interval strictly inside the range', () => {
    expect(contourLevels(97.3, 100.1, 0.5)).toEqual([97.5, 98, 98.5, 99, 99.5, 100]);
    expect(contourLevels(0, 1, 0.1)).toEqual([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9]);
    expect(contourLevels(0, 10, 2.5, 1)).toEqual([1, 3.5, 6, 8.5]);
  });

  it('rejects a non-positive interval with an input error', () => {
    expect(() => contourLevels(0, 1, 0)).toThrow(/positive/);
    expect(() => contourLevels(0, 1, -1)).toThrowError(expect.objectContaining({ code: 'input' }));
  });

  it('refuses an interval that gives more than MAX_CONTOUR_LEVELS levels, naming the interval and the count', () => {
    // 0.001 across 45..50 is 4999 levels (an interval of 0.001 m wrote 121 MB of GeoJSON in 41 s before).
    expect(() => contourLevels(45, 50, 0.001)).toThrowError(expect.objectContaining({ code: 'input' }));
    expect(() => contourLevels(45, 50, 0.001)).toThrow(/interval 0\.001 gives 4999 levels .* at most 250/);
    expect(contourLevels(45, 50, 0.02)).toHaveLength(MAX_CONTOUR_LEVELS - 1);
  });

  it('ends for intervals and offsets where a level counter passes 2^53, and for ranges near the smallest double', () => {
    // Before: 1e-300 looped forever (k + 1 === k beyond 2^53), as did levels near 1e17, and a range of 5e-324.
    expect(() => contourLevels(45, 50, 1e-300)).toThrow(/unboundedly many|e\+300 levels/);
    // Around 1e17 (beyond 2^53) doubles are 16 apart: the multiples 1e17 + 1, 1e17 + 2, ... of 1 round to 1e17 + 16k.
    const far = contourLevels(1e17, 1e17 + 64, 1);
    expect(far).toEqual([1e17 + 16, 1e17 + 32, 1e17 + 48]);
    expect(roundInterval(0, 5e-324)).not.toBe(0);
  });

  it('decimalsOf counts the decimals of a round step', () => {
    expect([decimalsOf(5), decimalsOf(0.25), decimalsOf(0.1), decimalsOf(2.5e-3)]).toEqual([0, 2, 1, 4]);
  });
});

describe('contourField', () => {
  it('widens an interval that gives too many levels to a round one, with a note saying so', () => {
    const grid = makeGrid(30, 20);
    const head = linearField(grid, 50, 5 / 300); // 50 down to about 45
    for (const asked of [0.001, 1e-300]) {
      const set = contourField(grid, head, { interval: asked });
      expect(set.levels.length).toBeLessThanOrEqual(MAX_CONTOUR_LEVELS);
      expect(set.levels.length).toBeGreaterThan(MAX_CONTOUR_LEVELS / 2.5 - 2); // the smallest round interval that fits
      expect(set.interval).toBeGreaterThan(asked);
      expect(set.note).toMatch(new RegExp(`contour interval ${asked} would give .* levels .*; widened to ${set.interval}`));
    }
    // An interval within the bound is kept as asked, without a note.
    const kept = contourField(grid, head, { interval: 0.5 });
    expect(kept.interval).toBe(0.5);
    expect(kept.note ?? null).toBeNull();
  });

  it('allows fewer levels on large grids (levels x cells at most 2e8), never fewer than the automatic 25', () => {
    expect(contourLevelLimit(30 * 20)).toBe(MAX_CONTOUR_LEVELS);
    expect(contourLevelLimit(2000 * 2000)).toBe(50);
    expect(contourLevelLimit(20000 * 20000)).toBe(25);
  });

  it('refuses more explicit levels than MAX_CONTOUR_LEVELS', () => {
    const grid = makeGrid(4, 3);
    const levels = Array.from({ length: MAX_CONTOUR_LEVELS + 1 }, (_, i) => i);
    expect(() => contourField(grid, new Float64Array(12).fill(1), { levels })).toThrow(/251 contour levels given; at most 250/);
  });

  it('puts every automatic level within the head range', () => {
    const grid = makeGrid(30, 20);
    const head = linearField(grid, 112.34, 0.0137);
    const set = contourField(grid, head);
    let min = Infinity;
    let max = -Infinity;
    for (const h of head) {
      min = Math.min(min, h);
      max = Math.max(max, h);
    }
    expect(set.levels.length).toBeGreaterThanOrEqual(10);
    for (const { level, lines } of set.levels) {
      expect(level).toBeGreaterThan(min);
      expect(level).toBeLessThan(max);
      expect(lines.length).toBeGreaterThan(0);
    }
  });

  it('draws a linear 1-D head field as straight lines at the analytical position x = x0 + (h0 - L)/g', () => {
    // Linear interpolation between cell centres is exact for a linear field, so each contour is the
    // straight line where h0 - g (x - x0) = L.
    const grid = makeGrid(20, 12, 10, 15);
    const h0 = 100;
    const g = 0.05; // head drops 0.5 per 10 m cell
    const set = contourField(grid, linearField(grid, h0, g), { interval: 1 });
    expect(set.levels.map((l) => l.level)).toEqual([91, 92, 93, 94, 95, 96, 97, 98, 99]);
    const top = cellCentre(grid, 0, 0).y;
    const bottom = cellCentre(grid, grid.ny - 1, 0).y;
    for (const { level, lines } of set.levels) {
      expect(lines).toHaveLength(1);
      const expectedX = grid.transform[0] + (h0 - level) / g;
      const points = allPoints(set, level);
      for (const [x] of points) expect(x).toBeCloseTo(expectedX, 9);
      const ys = points.map((p) => p[1]);
      // The line runs the full height between the first and last row of cell centres.
      expect(Math.max(...ys)).toBeCloseTo(top, 9);
      expect(Math.min(...ys)).toBeCloseTo(bottom, 9);
    }
  });

  it('makes no false contours around a hole of inactive cells', () => {
    const grid = makeGrid(24, 18);
    const h0 = 50;
    const g = 0.04;
    const head = linearField(grid, h0, g);
    // An inactive block in the middle and an inactive corner.
    for (let i = 6; i < 12; i++) for (let j = 8; j < 15; j++) head[i * grid.nx + j] = NaN;
    for (let i = 0; i < 3; i++) for (let j = 20; j < 24; j++) head[i * grid.nx + j] = NaN;
    const levels = [42, 43, 44, 45, 46, 47, 48, 49];
    const set = contourField(grid, head, { levels });

    // Plain d3-contour smoothing, run on the same field, traces the hole's outline (the hazard we remove).
    const raw = d3Contours()
      .size([grid.nx, grid.ny])
      .contour(head as unknown as number[], 45);
    const rawXs = raw.coordinates.flat(2).map((p) => grid.transform[0] + p[0]! * grid.transform[1]);
    expect(rawXs.some((x) => Math.abs(x - (grid.transform[0] + (h0 - 45) / g)) > 1)).toBe(true);

    for (const level of levels) {
      const expectedX = grid.transform[0] + (h0 - level) / g;
      const points = allPoints(set, level);
      expect(points.length).toBeGreaterThan(1);
      // Any vertex off the analytical line would be a false contour along the hole or the border.
      for (const [x] of points) expect(x).toBeCloseTo(expectedX, 9);
      // No vertex inside the hole (cell-centre bounds of the inactive block, rows 6..11, cols 8..14).
      for (const [x, y] of points) {
        const col = (x - grid.transform[0]) / grid.transform[1] - 0.5;
        const row = (y - grid.transform[3]) / grid.transform[5] - 0.5;
        expect(col > 7 && col < 15 && row > 5 && row < 12).toBe(false);
      }
    }
    // Level 45 crosses the hole (x = 125 m, column 12): it is cut into a piece above and a piece below.
    expect(set.levels.find((l) => l.level === 45)!.lines).toHaveLength(2);
  });

  it('closes the contours of a radial field into rings near the analytical radius', () => {
    // h = distance from the centre: contour L is the circle of radius L (within linear-interpolation error
    // dx^2 / (8 r), the standard bound for linear interpolation of a function with |h''| <= 1/r).
    const grid = makeGrid(41, 41, 1, 1, 0, 41);
    const cx = 20.5;
    const cy = 20.5;
    const head = new Float64Array(grid.nx * grid.ny);
    for (let i = 0; i < grid.ny; i++) {
      for (let j = 0; j < grid.nx; j++) {
        const c = cellCentre(grid, i, j);
        head[i * grid.nx + j] = Math.hypot(c.x - cx, c.y - cy);
      }
    }
    const set = contourField(grid, head, { levels: [6, 10, 15] });
    for (const { level, lines } of set.levels) {
      expect(lines).toHaveLength(1);
      const line = lines[0]!;
      expect(line[0]).toBe(line[line.length - 2]);
      expect(line[1]).toBe(line[line.length - 1]);
      for (let k = 0; k < line.length; k += 2) {
        expect(Math.abs(Math.hypot(line[k]! - cx, line[k + 1]! - cy) - level)).toBeLessThan(1 / (8 * level) + 1e-9);
      }
    }
  });

  it('gives empty levels for a field with no finite value', () => {
    const grid = makeGrid(3, 3);
    expect(contourField(grid, new Float64Array(9).fill(NaN)).levels).toEqual([]);
  });
});

describe('contoursToGeoJson', () => {
  const grid = makeGrid(20, 12, 10, 15);
  const h0 = 100;
  const g = 0.05;
  const set = contourField(grid, linearField(grid, h0, g), { interval: 2 });
  const utm33 = '+proj=utm +zone=33 +datum=WGS84 +units=m +no_defs';
  const toLonLat = (x: number, y: number) => {
    const [lon, lat] = proj4(utm33, 'EPSG:4326', [x, y]);
    return { x: lon!, y: lat! };
  };

  it('writes RFC 7946 features: WGS 84 lon/lat, level and units as properties, no crs member', () => {
    const collection = contoursToGeoJson(set, { quantity: 'head', units: 'm', toLonLat });
    expect(collection.type).toBe('FeatureCollection');
    expect('crs' in collection).toBe(false); // RFC 7946 sec. 4: no crs member
    expect(collection.features).toHaveLength(4);
    for (const feature of collection.features) {
      expect(feature.properties).toMatchObject({ quantity: 'head', units: 'm', interval: 2 });
      expect(feature.geometry.type).toBe('LineString'); // RFC 7946 sec. 3.1.4: two or more positions
      const coords = feature.geometry.coordinates as number[][];
      expect(coords.length).toBeGreaterThanOrEqual(2);
      // UTM zone 33 spans 12..18 degrees east; the invented grid lies near 37 degrees north.
      for (const [lon, lat] of coords) {
        expect(lon).toBeGreaterThan(12);
        expect(lon).toBeLessThan(18);
        expect(lat).toBeGreaterThan(36);
        expect(lat).toBeLessThan(38);
      }
      // Back through proj4 (reference library), the line sits at the analytical easting.
      const expectedX = grid.transform[0] + (h0 - feature.properties.level) / g;
      for (const [lon, lat] of coords) {
        const [x] = proj4('EPSG:4326', utm33, [lon!, lat!]);
        expect(Math.abs(x! - expectedX)).toBeLessThan(0.02); // 7 decimals of a degree are about 1 cm
      }
    }
  });

  it('keeps native coordinates when no transform is given and says which CRS they are in', () => {
    const collection = contoursToGeoJson(set, { quantity: 'head', units: 'm', crsLabel: 'EPSG:32633' });
    expect(String(collection.coordinateSystem)).toMatch(/EPSG:32633.*not RFC 7946/);
    const first = collection.features[0]!;
    const expectedX = grid.transform[0] + (h0 - first.properties.level) / g;
    for (const [x] of first.geometry.coordinates as number[][]) expect(x).toBeCloseTo(expectedX, 3);
  });

  it('is read by GDAL (ogrinfo) when GDAL is installed', () => {
    const probe = spawnSync('ogrinfo', ['--version'], { encoding: 'utf8' });
    if (probe.error || probe.status !== 0) {
      if (process.env.CI === 'true') throw new Error('ogrinfo (Debian package gdal-bin) is required in CI');
      console.warn('skipped: ogrinfo not installed (apt-get install gdal-bin) - GeoJSON not checked by GDAL');
      return;
    }
    const dir = join('test', 'tmp', 'contours');
    mkdirSync(dir, { recursive: true });
    const wgs = join(dir, 'head-contours.geojson');
    const native = join(dir, 'head-contours.native.geojson');
    writeFileSync(wgs, JSON.stringify(contoursToGeoJson(set, { quantity: 'head', units: 'm', toLonLat })));
    writeFileSync(native, JSON.stringify(contoursToGeoJson(set, { quantity: 'head', units: 'm', crsLabel: 'EPSG:32633' })));
    const info = execFileSync('ogrinfo', ['-ro', '-al', '-so', wgs], { encoding: 'utf8' });
    expect(info).toMatch(/Feature Count: 4/);
    expect(info).toMatch(/Geometry: Line String/);
    expect(info).toMatch(/level: (Real|Integer)/); // GDAL types the column from the values
    expect(info).toMatch(/WGS 84/);
    const nativeInfo = execFileSync('ogrinfo', ['-ro', '-al', '-so', native], { encoding: 'utf8' });
    expect(nativeInfo).toMatch(/Feature Count: 4/);
    expect(nativeInfo).toMatch(/Extent: \(50\d{4}\.\d+, 40\d{5}\.\d+\)/);
  });
});
