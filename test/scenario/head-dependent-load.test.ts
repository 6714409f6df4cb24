/**
 * Loading `headDependent` entries and `leakage`: wetted areas of polygons (checked against the shoelace area of the
 * whole polygon and hand-worked partial cells), line conductances (leakance x length x width), reaches, and the
 * warnings for perched river reaches, drains below the aquifer bottom and shapes outside the grid.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Grid } from '../../src/grid.js';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { loadScenario } from '../../src/scenario/load.js';
import { polygonCellAreas } from '../../src/scenario/exchangeShapes.js';
import { exchangeDifference } from '../../src/scenario/loadHeadDependent.js';
import { solveModel } from '../../src/pipeline.js';

const CRS = 'urn:ogc:def:crs:EPSG::32633';
// 20 x 10 cells of 10 m, north-up, upper-left corner (500000, 4100100).
const X0 = 500000,
  Y0 = 4100100,
  CELL = 10,
  NX = 20,
  NY = 10;
const g: Grid = { nx: NX, ny: NY, transform: [X0, CELL, 0, Y0, 0, -CELL], crs: { epsg: 32633, geographic: false, geoKeys: {} } };

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-hd-'));
  writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(g, new Float64Array(NX * NY).fill(5), { nodata: -9999 }));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function shapes(name: string, features: unknown[]): string {
  writeFileSync(join(dir, name), JSON.stringify({ type: 'FeatureCollection', crs: { type: 'name', properties: { name: CRS } }, features }));
  return name;
}

function line(coords: Array<[number, number]>, properties: Record<string, unknown> = {}) {
  return { type: 'Feature', properties, geometry: { type: 'LineString', coordinates: coords } };
}

function scenario(name: string, extra: Record<string, unknown>): string {
  const path = join(dir, name);
  writeFileSync(
    path,
    JSON.stringify({
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [{ edge: 'west', head: 50 }],
      solver: { tolerance: 1e-12 },
      ...extra,
    }),
  );
  return path;
}

describe('polygonCellAreas', () => {
  const unit: Grid = { nx: 6, ny: 6, transform: [0, 1, 0, 6, 0, -1], crs: null as unknown as Grid['crs'] };

  it('gives a rectangle its partial cells by hand (0.5 x 0.25 of a cell at the corners)', () => {
    // x 0.5 .. 3.0, y 2.0 .. 3.75 (map), i.e. rows 2.25 .. 4 (grid): row 2 is covered 0.75 of its height.
    const ring = Float64Array.from([0.5, 2, 3, 2, 3, 3.75, 0.5, 3.75, 0.5, 2]);
    const areas = polygonCellAreas(unit, [ring]);
    expect(areas.get(2 * 6 + 0)).toBeCloseTo(0.5 * 0.75, 12);
    expect(areas.get(2 * 6 + 1)).toBeCloseTo(0.75, 12);
    expect(areas.get(3 * 6 + 0)).toBeCloseTo(0.5, 12);
    expect(areas.get(3 * 6 + 2)).toBeCloseTo(1, 12);
    expect(areas.has(2 * 6 + 3)).toBe(false);
    let total = 0;
    for (const a of areas.values()) total += a;
    expect(total).toBeCloseTo(2.5 * 1.75, 12);
  });

  it('sums to the shoelace area of a polygon with a hole (Gauss area formula), inside the grid', () => {
    const outer: number[] = [];
    for (let k = 0; k < 40; k++) outer.push(3 + 2.4 * Math.cos((2 * Math.PI * k) / 40), 3 + 2.1 * Math.sin((2 * Math.PI * k) / 40));
    const hole = [2.5, 2.5, 3.5, 2.5, 3.5, 3.2, 2.5, 3.2];
    const shoelace = (r: number[]) => {
      let s = 0;
      for (let k = 0; k < r.length; k += 2) {
        const j = (k + 2) % r.length;
        s += r[k]! * r[j + 1]! - r[j]! * r[k + 1]!;
      }
      return Math.abs(s) / 2;
    };
    const areas = polygonCellAreas(unit, [Float64Array.from(outer), Float64Array.from(hole)]);
    let total = 0;
    for (const a of areas.values()) {
      expect(a).toBeGreaterThan(0);
      expect(a).toBeLessThanOrEqual(1);
      total += a;
    }
    expect(total).toBeCloseTo(shoelace(outer) - shoelace(hole), 10);
  });
});

describe('headDependent entries from shapes', () => {
  it('gives line cells leakance x length x width, names the reaches by their "name", and sums reach sub-rows to the term', async () => {
    // Two reaches along row 4 (y = Y0 - 45): x 55..105 and 105..175, i.e. 5 and 7 cells of 10 m.
    const y = Y0 - 45;
    shapes('creek.geojson', [
      line(
        [
          [X0 + 55, y],
          [X0 + 105, y],
        ],
        { name: 'upper', stage: 49.5 },
      ),
      line(
        [
          [X0 + 105, y],
          [X0 + 175, y],
        ],
        { name: 'lower', stage: 49 },
      ),
    ]);
    const path = scenario('creek.json', {
      headDependent: [{ name: 'creek', kind: 'river', shape: 'creek.geojson', headProperty: 'stage', leakance: 0.5, width: 4 }],
      wells: [{ id: 'P', x: X0 + 125, y: Y0 - 25, rate: -40 }],
    });
    const { model } = await loadScenario(path);
    const entry = model.headDependent![0]!;
    let total = 0;
    for (const c of entry.conductance) total += c;
    // Physics.md: conductance = leakance x length inside the cell x width; over the whole line 0.5 x 120 m x 4 m.
    expect(total).toBeCloseTo(0.5 * 120 * 4, 9);
    // The end cells hold half a cell of line each: 0.5 x 5 m x 4 m.
    expect(entry.conductance[0]).toBeCloseTo(10, 9);
    expect(entry.reachNames).toEqual(['upper', 'lower']);
    const r = solveModel(model);
    const row = r.budget.terms.find((t) => t.term === 'creek')!;
    expect(row.parts!.map((p) => p.part)).toEqual(['upper', 'lower']);
    expect(row.parts!.reduce((s, p) => s + p.inflow, 0)).toBeCloseTo(row.inflow, 9);
    expect(row.parts!.reduce((s, p) => s + p.outflow, 0)).toBeCloseTo(row.outflow, 9);
  });

  it('gives polygon cells leakance x the cell area inside the polygon', async () => {
    // A 25 m x 20 m pond from x 100..125, y (Y0 - 60)..(Y0 - 40): cols 10-11 whole, col 12 half; rows 4-5.
    shapes('pond.geojson', [
      {
        type: 'Feature',
        properties: {},
        geometry: {
          type: 'Polygon',
          coordinates: [
            [
              [X0 + 100, Y0 - 60],
              [X0 + 125, Y0 - 60],
              [X0 + 125, Y0 - 40],
              [X0 + 100, Y0 - 40],
              [X0 + 100, Y0 - 60],
            ],
          ],
        },
      },
    ]);
    const path = scenario('pond.json', {
      headDependent: [{ name: 'pond', kind: 'linear', shape: 'pond.geojson', head: 48, leakance: 0.1 }],
    });
    const { model } = await loadScenario(path);
    const entry = model.headDependent![0]!;
    expect(Array.from(entry.cells)).toEqual([4 * NX + 10, 4 * NX + 11, 4 * NX + 12, 5 * NX + 10, 5 * NX + 11, 5 * NX + 12]);
    expect(Array.from(entry.conductance).map((c) => Number(c.toFixed(9)))).toEqual([10, 10, 5, 10, 10, 5]);
    expect(entry.reach).toBeNull();
  });

  it('warns of a perched river reach (bed bottom above the stage) and takes the bottom at the stage there', async () => {
    const y = Y0 - 45;
    shapes('perched.geojson', [
      line(
        [
          [X0 + 55, y],
          [X0 + 105, y],
        ],
        { stage: 49, bed: [48, 49.5] },
      ),
    ]);
    const path = scenario('perched.json', {
      headDependent: [
        { name: 'brook', kind: 'river', shape: 'perched.geojson', headProperty: 'stage', bottomProperty: 'bed', leakance: 1, width: 2 },
      ],
    });
    const { model } = await loadScenario(path);
    expect(
      model.warnings.some((w) =>
        /headDependent\[0\] \("brook"\): the bed bottom lies above the river stage at \d+ cell\(s\).*perched/.test(w),
      ),
    ).toBe(true);
    const entry = model.headDependent![0]!;
    for (let k = 0; k < entry.cells.length; k++) expect(entry.bottom![k]!).toBeLessThanOrEqual(entry.heads[k]!);
  });

  it('warns of a drain level below the aquifer bottom where the bottom is given', async () => {
    const path = scenario('deep-drain.json', {
      aquifer: { conductivity: 'k.tif', thickness: 10, bottom: 30 },
      headDependent: [{ name: 'sump', kind: 'drain', edge: 'east', head: 25, conductance: 5 }],
    });
    const { model } = await loadScenario(path);
    expect(
      model.warnings.some((w) => /headDependent\[0\] \("sump"\): the drain level lies below aquifer\.bottom at 10 cell\(s\)/.test(w)),
    ).toBe(true);
  });

  it('warns when a shape has no cell inside the grid', async () => {
    shapes('far.geojson', [
      line(
        [
          [X0 + 5000, Y0 - 45],
          [X0 + 5100, Y0 - 45],
        ],
        { stage: 49 },
      ),
    ]);
    const path = scenario('far.json', {
      headDependent: [{ name: 'far', kind: 'drain', shape: 'far.geojson', headProperty: 'stage', conductance: 5 }],
    });
    const { model } = await loadScenario(path);
    expect(model.warnings.some((w) => /far\.geojson.*no feature covers a cell of the grid.*exchanges no water/.test(w))).toBe(true);
  });

  it('tells compare that a variant with other boundaries cannot share the baseline operator', async () => {
    const a = (
      await loadScenario(scenario('a.json', { headDependent: [{ name: 'e', kind: 'linear', edge: 'east', head: 48, conductance: 5 }] }))
    ).model;
    const b = (
      await loadScenario(scenario('b.json', { headDependent: [{ name: 'e', kind: 'linear', edge: 'east', head: 48, conductance: 6 }] }))
    ).model;
    const c = (await loadScenario(scenario('c.json', { leakage: { sourceHead: 51, leakance: 1e-3 } }))).model;
    expect(exchangeDifference(a, a)).toBeNull();
    expect(exchangeDifference(a, b)).toBe('headDependent differs');
    expect(exchangeDifference({}, c)).toBe('leakage differs');
  });
});

describe('fixedHeads beside other boundaries', () => {
  it('may be empty when a head-dependent boundary or leakage holds the level (physics.md), and the solve matches the 1-D solution', async () => {
    // A linear boundary on the west edge (H = 50, C = 4 per cell) and a drain-free east: recharge R over 20 x 10
    // cells of 10 m leaves through the west cells only: per row Q = R * 20 * 100 m² = 100 * 20 * R, and the head
    // under the west cells is H + Q / C.
    const R = 0.001;
    const path = join(dir, 'no-fixed.json');
    writeFileSync(
      path,
      JSON.stringify({
        aquifer: { conductivity: 'k.tif', thickness: 10 },
        fixedHeads: [],
        recharge: R,
        headDependent: [{ name: 'west-bank', kind: 'linear', edge: 'west', head: 50, conductance: 4 }],
        solver: { tolerance: 1e-12 },
      }),
    );
    const { model } = await loadScenario(path);
    const r = solveModel(model);
    const q = R * NX * CELL * CELL;
    expect(r.budget.terms.find((t) => t.term === 'west-bank')!.outflow).toBeCloseTo(q * NY, 6);
    for (let row = 0; row < NY; row++) expect(r.head[row * NX]!).toBeCloseTo(50 + q / 4, 6);
  });

  it('still needs an entry when nothing else holds the level', async () => {
    const path = join(dir, 'none.json');
    writeFileSync(path, JSON.stringify({ aquifer: { conductivity: 'k.tif', thickness: 10 }, fixedHeads: [] }));
    await expect(loadScenario(path)).rejects.toThrowError(/fixedHeads: needs at least one entry/);
  });
});

describe('headDependent and leakage from rasters', () => {
  it('takes the cells with a stage, their conductance and bed bottom, and leakage per cell (nodata: none there)', async () => {
    const stage = new Float64Array(NX * NY).fill(NaN);
    const conductance = new Float64Array(NX * NY).fill(NaN);
    const bottom = new Float64Array(NX * NY).fill(NaN);
    for (let row = 0; row < NY; row++) {
      const p = row * NX + 15;
      stage[p] = 48 - 0.1 * row;
      conductance[p] = 20 + row;
      bottom[p] = 46;
    }
    const leakance = new Float64Array(NX * NY).fill(1e-3);
    leakance[3 * NX + 7] = NaN;
    const raster = (name: string, values: Float64Array) =>
      writeFileSync(join(dir, name), encodeFloat32GeoTiff(g, values, { nodata: -9999 }));
    raster('stage.tif', stage);
    raster('cond.tif', conductance);
    raster('bed.tif', bottom);
    raster('leak.tif', leakance);
    const path = scenario('rasters.json', {
      headDependent: [{ name: 'stream', kind: 'river', raster: 'stage.tif', conductance: 'cond.tif', bottom: 'bed.tif' }],
      leakage: { sourceHead: 51, leakance: 'leak.tif' },
    });
    const { model } = await loadScenario(path);
    const entry = model.headDependent![0]!;
    expect(Array.from(entry.cells)).toEqual(Array.from({ length: NY }, (_, row) => row * NX + 15));
    expect(Array.from(entry.conductance)).toEqual(Array.from({ length: NY }, (_, row) => 20 + row));
    expect(entry.heads[2]).toBeCloseTo(47.8, 5);
    expect(Array.from(entry.bottom!)).toEqual(new Array(NY).fill(46));
    const r = solveModel(model);
    const leak = r.system.terms.find((t) => t.label === 'leakage')!;
    // Every cell but the fixed west column and the one without a leakance.
    expect(leak.cells.length).toBe(NX * NY - NY - 1);
    expect(Array.from(leak.cells)).not.toContain(3 * NX + 7);
    expect(Math.abs(r.budget.discrepancyPercent)).toBeLessThan(1e-8);
  });
});
