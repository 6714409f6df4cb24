/**
 * Particle-tracking results through the command line, read back by GDAL (the reference reader of GIS formats) and
 * its SQLite/SpatiaLite dialect (an independent geometry engine): capture-zones.geojson and pathlines.geojson with
 * the contract's properties (../shared/spec/interface.md `tracking`), zones that nest, areas that agree with
 * SpatiaLite's, the capturing-well and travel-time rasters, and `compare` naming a receptor that a new well's
 * capture zone takes in. Runs the demo (data/valley.json: 1- and 10-year zones and the steady zone of each supply
 * well, a forward track from `spill-site`). Skips with a message where GDAL is absent, except on CI (CI=true).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync, spawnSync } from 'node:child_process';
import { cpSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';

const gdalPresent =
  spawnSync('gdalinfo', ['--version'], { encoding: 'utf8' }).status === 0 && spawnSync('ogrinfo', ['--version']).status === 0;
const onCi = process.env.CI === 'true';
if (!gdalPresent && !onCi) console.warn('tracking-outputs.test.ts: gdalinfo/ogrinfo not on PATH; skipped (install gdal-bin to run it)');

const BIN = resolve(__dirname, '../../bin/piezomap.js');
const DATA = resolve(__dirname, '../../data');
let dir: string;
let solveOut: string;
let printout: string;

function cli(args: string[]): { status: number | null; stdout: string; stderr: string } {
  const run = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', env: { ...process.env, FORCE_COLOR: '0' } });
  return { status: run.status, stdout: run.stdout, stderr: run.stderr };
}

/** Attribute values of every feature, in order, as ogrinfo prints them (`name (Type) = value`). */
function attributes(path: string, layer?: string): Array<Record<string, string>> {
  const text = execFileSync('ogrinfo', ['-ro', '-al', '-geom=NO', path, ...(layer ? [layer] : [])], {
    encoding: 'utf8',
    maxBuffer: 64 << 20,
  });
  const features: Array<Record<string, string>> = [];
  for (const line of text.split('\n')) {
    if (/^OGRFeature/.test(line)) features.push({});
    const m = /^\s+(\w+) \((\w+)\) = (.*)$/.exec(line);
    if (m && features.length) features[features.length - 1]![m[1]!] = m[3]!;
  }
  return features;
}

/** One SQL query in GDAL's SQLite dialect (SpatiaLite functions) on a GeoJSON file; rows of `name = value`. */
function sql(path: string, query: string): Array<Record<string, string>> {
  const text = execFileSync('ogrinfo', ['-ro', '-dialect', 'SQLite', '-sql', query, path], { encoding: 'utf8', maxBuffer: 64 << 20 });
  const rows: Array<Record<string, string>> = [];
  for (const line of text.split('\n')) {
    if (/^OGRFeature/.test(line)) rows.push({});
    const m = /^\s+(\w+) \((\w+)\) = (.*)$/.exec(line);
    if (m && rows.length) rows[rows.length - 1]![m[1]!] = m[3]!;
  }
  return rows;
}

/** Raster values by cell, read by GDAL (`gdal_translate -of XYZ`): x, y of the cell centre and the value. */
function xyz(path: string): Array<[number, number, number]> {
  const text = execFileSync('gdal_translate', ['-q', '-of', 'XYZ', path, '/vsistdout/'], { encoding: 'utf8', maxBuffer: 64 << 20 });
  return text
    .trim()
    .split('\n')
    .map((l) => l.trim().split(/\s+/).map(Number) as [number, number, number]);
}

describe.runIf(gdalPresent || onCi)('tracking files of solve and compare, read by GDAL', () => {
  beforeAll(() => {
    dir = mkdtempSync(join(tmpdir(), 'piezomap-tracking-'));
    solveOut = join(dir, 'solve');
    const run = cli(['solve', join(DATA, 'valley.json'), '-o', solveOut, '--native-contours']);
    expect(run.status, run.stderr).toBe(0);
    printout = run.stdout;
  }, 180_000);
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('GDAL is installed on CI', () => {
    expect(gdalPresent, 'gdalinfo/ogrinfo not found; install gdal-bin').toBe(true);
  });

  it('capture-zones.geojson: WGS 84 polygons, one per supply well and capture time plus the steady zone, properties well and time', () => {
    const path = join(solveOut, 'capture-zones.geojson');
    const summary = execFileSync('ogrinfo', ['-ro', '-al', '-so', path], { encoding: 'utf8' });
    expect(summary).toMatch(/WGS 84/);
    expect(summary).toMatch(/Geometry: ((Multi )?Polygon|Unknown \(any\))/);
    expect(summary).toMatch(/well: String/);
    expect(summary).toMatch(/time: (Integer|Real)/);
    const full = execFileSync('ogrinfo', ['-ro', '-al', path], { encoding: 'utf8', maxBuffer: 64 << 20 });
    expect((full.match(/^\s*(MULTI)?POLYGON \(/gm) ?? []).length).toBe(6);
    const features = attributes(path);
    expect(features.map((f) => `${f.well}@${f.time}`).sort()).toEqual(
      ['PW-1@(null)', 'PW-1@365', 'PW-1@3650', 'PW-2@(null)', 'PW-2@365', 'PW-2@3650'].sort(),
    );
    // Longitude/latitude of the invented demo area (UTM 33N around 505 km E, 4105 km N).
    const extent = /Extent: \(([-\d.]+), ([-\d.]+)\) - \(([-\d.]+), ([-\d.]+)\)/.exec(summary)!.slice(1).map(Number);
    expect(extent[0]).toBeGreaterThan(14.9);
    expect(extent[2]).toBeLessThan(15.2);
    expect(extent[1]).toBeGreaterThan(37.0);
    expect(extent[3]).toBeLessThan(37.2);
  });

  it('zones nest: each time zone lies inside the later ones and the steady zone of its well (SpatiaLite difference area)', () => {
    const path = join(solveOut, 'capture-zones.native.geojson');
    const rows = sql(
      path,
      'SELECT a.well AS well, a.time AS inner_time, b.time AS outer_time, COALESCE(ST_Area(ST_Difference(a.geometry, b.geometry)), 0) / ST_Area(a.geometry) AS outside, ST_Area(a.geometry) AS inner_area ' +
        'FROM "capture-zones.native" a JOIN "capture-zones.native" b ON a.well = b.well AND a.time IS NOT NULL AND (b.time IS NULL OR a.time < b.time)',
    );
    // 2 wells x (365 in 3650, 365 in steady, 3650 in steady).
    expect(rows).toHaveLength(6);
    for (const r of rows) {
      expect(Number(r.inner_area), JSON.stringify(r)).toBeGreaterThan(0); // a real polygon, so an empty difference means inside
      expect(Number(r.outside), JSON.stringify(r)).toBeLessThan(1e-9);
    }
    // And they grow: the steady zone is larger than the 10-year zone, which is larger than the 1-year zone.
    const areas = sql(path, 'SELECT well, time, ST_Area(geometry) AS a FROM "capture-zones.native"');
    for (const well of ['PW-1', 'PW-2']) {
      const of = (t: string) => Number(areas.find((r) => r.well === well && r.time === t)!.a);
      expect(of('365')).toBeLessThan(of('3650'));
      expect(of('3650')).toBeLessThan(of('(null)'));
    }
  });

  it('the area property equals the planar area SpatiaLite computes from the native polygons', () => {
    const rows = sql(
      join(solveOut, 'capture-zones.native.geojson'),
      'SELECT area, ST_Area(geometry) AS measured FROM "capture-zones.native"',
    );
    expect(rows).toHaveLength(6);
    for (const r of rows) expect(Math.abs(Number(r.area) - Number(r.measured)) / Number(r.measured)).toBeLessThan(1e-6);
  });

  it('pathlines.geojson: backward lines from every supply well and the forward track of spill-site, contract properties', () => {
    const path = join(solveOut, 'pathlines.geojson');
    const summary = execFileSync('ogrinfo', ['-ro', '-al', '-so', path], { encoding: 'utf8' });
    expect(summary).toMatch(/WGS 84/);
    expect(summary).toMatch(/Geometry: Line String/);
    for (const field of ['id: String', 'direction: String', /travelTime: (Real|Integer)/, 'endsAt: String']) expect(summary).toMatch(field);
    const features = attributes(path);
    const backward = features.filter((f) => f.direction === 'backward');
    const forward = features.filter((f) => f.direction === 'forward');
    expect(backward).toHaveLength(2 * 24); // particlesPerWell 24 in the demo
    expect(new Set(backward.map((f) => (f.id ?? '').replace(/-\d+$/, '')))).toEqual(new Set(['PW-1', 'PW-2']));
    for (const f of backward) {
      expect(Number(f.travelTime)).toBeGreaterThan(0);
      expect(['river', 'field-drains', 'downstream-edge', 'gravel-pit', 'edge', 'stagnation']).toContain(f.endsAt);
    }
    expect(forward).toHaveLength(1);
    expect(forward[0]!.id).toBe('spill-site');
    expect(forward[0]!.endsAt).toBe('PW-1');
    expect(printout).toMatch(/spill-site \(forward\): reaches well PW-1 after [\d,]+ d/);
    const tracked = JSON.parse(readFileSync(join(solveOut, 'summary.json'), 'utf8')).tracking;
    expect(tracked.points[0]).toMatchObject({ id: 'spill-site', endsAt: 'PW-1', endReason: 'well' });
    expect(Number(forward[0]!.travelTime)).toBeCloseTo(tracked.points[0].travelTime, 3);
  });

  it('capture-well.tif and travel-time.tif: the wells by number on the demo grid, travel times inside the steady zones only', () => {
    const wells = xyz(join(solveOut, 'capture-well.tif'));
    const times = xyz(join(solveOut, 'travel-time.tif'));
    expect(wells).toHaveLength(240 * 180);
    const numbers = new Set(wells.map((v) => v[2]).filter((v) => v !== -9999));
    expect([...numbers].sort()).toEqual([0, 1, 2]);
    const summary = JSON.parse(readFileSync(join(solveOut, 'summary.json'), 'utf8')).tracking;
    expect(summary.wells.map((w: { id: string; rasterValue: number }) => [w.id, w.rasterValue])).toEqual([
      ['PW-1', 1],
      ['PW-2', 2],
    ]);
    let captured = 0;
    for (let k = 0; k < wells.length; k++) {
      const w = wells[k]![2];
      const t = times[k]![2];
      if (w >= 1) {
        captured++;
        expect(t).toBeGreaterThanOrEqual(0);
      } else {
        expect(t).toBe(-9999);
      }
    }
    // The cells counted by the raster are those of the steady zones (cell area 50 m x 50 m).
    const steady = summary.wells.reduce((sum: number, w: { capturedCells: number }) => sum + w.capturedCells, 0);
    expect(captured).toBe(steady);
  });

  it('compare: zones per variant, area changes per well, and a receptor inside the new well\u2019s capture zone named', () => {
    // The demo's comparison once, to find (with GDAL) a cell that the new well PW-3 captures and no well did before.
    const first = join(dir, 'compare-1');
    const run1 = cli(['compare', join(DATA, 'valley.json'), '-o', first]);
    expect(run1.status, run1.stderr).toBe(0);
    for (const folder of ['baseline', 'expanded']) {
      const features = attributes(join(first, folder, 'capture-zones.geojson'));
      expect(features.length).toBeGreaterThanOrEqual(6);
    }
    const variantSummary = JSON.parse(readFileSync(join(first, 'expanded', 'summary.json'), 'utf8')).tracking;
    const pw3 = variantSummary.wells.find((w: { id: string }) => w.id === 'PW-3').rasterValue as number;
    const before = xyz(join(first, 'baseline', 'capture-well.tif'));
    const after = xyz(join(first, 'expanded', 'capture-well.tif'));
    const k = after.findIndex((v, i) => v[2] === pw3 && before[i]![2] === 0);
    expect(k).toBeGreaterThanOrEqual(0);
    const [x, y] = after[k]!;
    // Zone area changes against each run's own summary.
    const comparison = JSON.parse(readFileSync(join(first, 'summary.json'), 'utf8'));
    const baseWells = JSON.parse(readFileSync(join(first, 'baseline', 'summary.json'), 'utf8')).tracking.wells;
    const zones = comparison.variants[0].capture.zones as Array<{
      well: string;
      time: number | null;
      baselineArea: number | null;
      variantArea: number | null;
      areaChange: number;
    }>;
    const pw1Steady = zones.find((z) => z.well === 'PW-1' && z.time === null)!;
    const pw1Base = baseWells.find((w: { id: string }) => w.id === 'PW-1').zones.find((z: { time: number | null }) => z.time === null).area;
    expect(pw1Steady.baselineArea).toBeCloseTo(pw1Base, 3);
    expect(pw1Steady.areaChange).toBeCloseTo(pw1Steady.variantArea! - pw1Base, 3);
    const pw3Zones = zones.filter((z) => z.well === 'PW-3');
    expect(pw3Zones).toHaveLength(3);
    for (const z of pw3Zones) {
      expect(z.baselineArea).toBeNull();
      expect(z.areaChange).toBe(z.variantArea);
    }
    expect(comparison.variants[0].capture.receptorsInNewCaptureZones.map((r: { receptor: string }) => r.receptor)).not.toContain(
      'spring-new',
    );

    // The same comparison with a spring placed in that cell: it is named in the summary, printout and report.
    const copy = join(dir, 'data');
    cpSync(DATA, copy, { recursive: true });
    const scenario = JSON.parse(readFileSync(join(copy, 'valley.json'), 'utf8'));
    scenario.receptors.push({ id: 'spring-new', x, y });
    writeFileSync(join(copy, 'valley.json'), JSON.stringify(scenario));
    const second = join(dir, 'compare-2');
    const run2 = cli(['compare', join(copy, 'valley.json'), '-o', second]);
    expect(run2.status, run2.stderr).toBe(0);
    expect(run2.stdout).toMatch(/expanded: receptor spring-new lies inside a new capture zone of PW-3, travel time [\d,.]+ d/);
    const named = JSON.parse(readFileSync(join(second, 'summary.json'), 'utf8')).variants[0].capture.receptorsInNewCaptureZones;
    // The demo's own receptors named in the first run are named again, and the spring is added.
    const firstNamed = (comparison.variants[0].capture.receptorsInNewCaptureZones as Array<{ receptor: string }>).map((r) => r.receptor);
    expect(named.map((r: { receptor: string }) => r.receptor).sort()).toEqual([...firstNamed, 'spring-new'].sort());
    expect(named.find((r: { receptor: string }) => r.receptor === 'spring-new')).toMatchObject({ well: 'PW-3', baselineWell: null });
    const report = readFileSync(join(second, 'report.html'), 'utf8');
    expect(report).toMatch(/Receptors inside a new capture zone[^]*spring-new[^]*PW-3/);
  }, 120_000);
});
