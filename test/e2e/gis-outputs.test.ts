/**
 * Every GeoTIFF and GeoJSON that `solve` and `compare` write opens in GDAL (the reference reader of GIS
 * formats): rasters with the input's size, geotransform, CRS and nodata; vector files as line layers in WGS 84.
 * Skips with a message where GDAL is absent, except on CI (CI=true), where it must run.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, readdirSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { solveScenarioFile } from '../../src/pipeline.js';
import { writeSolveResults } from '../../src/output/solveFiles.js';
import { compareScenario } from '../../src/compare/run.js';
import { writeComparisonResults } from '../../src/output/comparisonFiles.js';

const gdalPresent =
  spawnSync('gdalinfo', ['--version'], { encoding: 'utf8' }).status === 0 && spawnSync('ogrinfo', ['--version']).status === 0;
const onCi = process.env.CI === 'true';
if (!gdalPresent && !onCi) console.warn('gis-outputs.test.ts: gdalinfo/ogrinfo not on PATH; skipped (install gdal-bin to run it)');

const demo = resolve(__dirname, '../../data/valley.json');
let dir: string;

function walk(folder: string): string[] {
  return readdirSync(folder).flatMap((name) => {
    const path = join(folder, name);
    return statSync(path).isDirectory() ? walk(path) : [path];
  });
}

describe.runIf(gdalPresent || onCi)('GIS files written by solve and compare', () => {
  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'piezomap-gis-'));
    const solved = await solveScenarioFile(demo);
    await writeSolveResults(solved, join(dir, 'solve'), { nativeContours: true });
    const comparison = await compareScenario(demo);
    await writeComparisonResults(comparison, join(dir, 'compare'), {});
  }, 180_000);
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('GDAL is installed on CI', () => {
    expect(gdalPresent, 'gdalinfo/ogrinfo not found; install gdal-bin').toBe(true);
  });

  it('gdalinfo reads every GeoTIFF with the demo grid, EPSG:32633 and nodata -9999', () => {
    const rasters = walk(dir).filter((f) => f.endsWith('.tif'));
    // solve: head, three flux rasters, velocity (the demo has a porosity), capture-well and travel-time (it tracks),
    // two exchange rasters (river, field drains); compare: the same for baseline and variant, plus drawdown.tif.
    expect(rasters.length).toBe(9 + 9 + 10);
    for (const path of rasters) {
      const info = JSON.parse(execFileSync('gdalinfo', ['-json', path], { encoding: 'utf8' }));
      expect(info.size, path).toEqual([240, 180]);
      expect(info.geoTransform, path).toEqual([500000, 50, 0, 4110000, 0, -50]);
      expect(info.bands, path).toHaveLength(1);
      expect(info.bands[0].type, path).toBe('Float32');
      expect(info.bands[0].noDataValue, path).toBe(-9999);
      expect(JSON.stringify(info.coordinateSystem), path).toMatch(/ID\[\\"EPSG\\",32633\]/);
    }
  });

  it('ogrinfo reads every contour GeoJSON: line layers with a level field, WGS 84 over the demo area for RFC 7946 files', () => {
    // Capture zones and pathlines are checked in tracking-outputs.test.ts.
    const vectors = walk(dir).filter((f) => /-contours(\.native)?\.geojson$/.test(f));
    expect(vectors.length).toBeGreaterThanOrEqual(4); // solve head (+native), baseline head, variant head and drawdown
    for (const path of vectors) {
      const text = execFileSync('ogrinfo', ['-ro', '-al', '-so', path], { encoding: 'utf8' });
      // A layer mixing LineString and MultiLineString features reports "Unknown (any)": count the geometries.
      expect(text, path).toMatch(/Geometry: ((Multi )?Line String|Unknown \(any\))/);
      const count = Number(/Feature Count: (\d+)/.exec(text)?.[1]);
      expect(count, path).toBeGreaterThan(0);
      const full = execFileSync('ogrinfo', ['-ro', '-al', path], { encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 });
      const lines = full.match(/^\s*(MULTI)?LINESTRING \(/gm) ?? [];
      expect(lines.length, path).toBe(count);
      expect(text, path).toMatch(/level: (Real|Integer)/); // whole-metre levels read as Integer
      if (path.endsWith('.native.geojson')) continue; // native coordinates: no CRS member, by RFC 7946
      expect(text, path).toMatch(/WGS 84/);
      // Longitude/latitude extent of the invented demo (UTM 33N around 505 km E, 4105 km N).
      const extent = /Extent: \(([-\d.]+), ([-\d.]+)\) - \(([-\d.]+), ([-\d.]+)\)/.exec(text);
      expect(extent, path).not.toBeNull();
      const [minLon, minLat, maxLon, maxLat] = extent!.slice(1).map(Number);
      expect(minLon).toBeGreaterThan(14.9);
      expect(maxLon).toBeLessThan(15.2);
      expect(minLat).toBeGreaterThan(37.0);
      expect(maxLat).toBeLessThan(37.2);
    }
  });
});
