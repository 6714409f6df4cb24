/**
 * loadScenario / resolveScenario from files: tiny GeoTIFFs and CSVs written into a temporary folder per test file.
 * The contract checked is ../shared/spec/interface.md, section "Scenario file".
 */
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { PiezomapError } from '../../src/errors.js';
import { loadScenario, mergeVariant, resolveScenario, type ScenarioJson } from '../../src/scenario/load.js';
import type { Crs } from '../../src/grid.js';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';

let dir: string;

// A 4 x 3 grid of 100 m cells in WGS 84 / UTM zone 33N around an invented spot (x 539000.., y 5005300..).
const nx = 4;
const ny = 3;
const x0 = 539000;
const y0 = 5005300;
const grid = { nx, ny, transform: [x0, 100, 0, y0, 0, -100] as const, epsg: 32633 };
const nodata = -9999;

interface TestGrid {
  nx: number;
  ny: number;
  transform: readonly [number, number, number, number, number, number];
  epsg: number;
}

/**
 * A single-band Float32 GeoTIFF on a north-up grid with an EPSG code (32767: user-defined) and a GDAL nodata value,
 * written with the project's encoder (its values and tags are checked against GDAL in the raster tests).
 */
function writeTestRaster(path: string, g: TestGrid, values: number[], noData: number): void {
  const geographic = g.epsg === 4326;
  const crs: Crs =
    g.epsg === 32767
      ? {
          epsg: null,
          geographic: false,
          geoKeys: { GTModelTypeGeoKey: 1, GTRasterTypeGeoKey: 1, ProjectedCSTypeGeoKey: 32767, PCSCitationGeoKey: 'invented local grid' },
        }
      : { epsg: g.epsg, geographic, geoKeys: {} };
  mkdirSync(resolve(path, '..'), { recursive: true });
  const cells = values.map((v) => (v === noData ? NaN : v));
  writeFileSync(path, encodeFloat32GeoTiff({ nx: g.nx, ny: g.ny, transform: g.transform, crs }, cells, { nodata: noData, tileSize: 16 }));
}

function write(name: string, text: string): string {
  const path = join(dir, name);
  mkdirSync(resolve(path, '..'), { recursive: true });
  writeFileSync(path, text);
  return path;
}

function scenario(name: string, json: unknown): string {
  return write(name, JSON.stringify(json, null, 2));
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

const base = {
  title: 'Tiny valley',
  aquifer: { conductivity: 'k.tif', thickness: 10 },
  fixedHeads: [{ edge: 'west', head: 100 }],
};

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-scenario-'));
  // Conductivity with one nodata cell (row 0, col 3) and one zero cell (row 2, col 0): both inactive.
  writeTestRaster(join(dir, 'k.tif'), grid, [5, 5, 5, nodata, 5, 6, 7, 8, 0, 5, 5, 5], nodata);
  writeTestRaster(join(dir, 'b.tif'), grid, [10, 10, 10, 10, 10, -1, 10, nodata, 10, 10, 10, 10], nodata);
  // River stage on the east column only; other cells have no data.
  writeTestRaster(
    join(dir, 'river_stage.tif'),
    grid,
    [nodata, nodata, nodata, 95, nodata, nodata, nodata, 94.5, nodata, nodata, nodata, 94],
    nodata,
  );
  writeTestRaster(
    join(dir, 'recharge.tif'),
    grid,
    [0.001, 0.001, nodata, 0.001, 0.001, 0.001, 0.001, 0.001, 0.001, 0.001, 0.001, 0.001],
    nodata,
  );
  writeTestRaster(join(dir, 'k_5x3.tif'), { ...grid, nx: 5 }, new Array(15).fill(1), nodata);
  writeTestRaster(join(dir, 'k_shifted.tif'), { ...grid, transform: [x0 + 50, 100, 0, y0, 0, -100] }, new Array(12).fill(1), nodata);
  writeTestRaster(join(dir, 'k_32634.tif'), { ...grid, epsg: 32634 }, new Array(12).fill(1), nodata);
  writeTestRaster(join(dir, 'k_none.tif'), grid, new Array(12).fill(nodata), nodata);
  writeTestRaster(join(dir, 'k_userdefined.tif'), { ...grid, epsg: 32767 }, new Array(12).fill(1), nodata);
  writeFileSync(join(dir, 'not_a_tiff.tif'), 'id,x,y\n');
  writeTestRaster(
    join(dir, 'k_lonlat.tif'),
    { nx, ny, transform: [15, 0.001, 0, 45.2, 0, -0.001], epsg: 4326 },
    new Array(12).fill(1),
    nodata,
  );
});

afterAll(() => {
  rmSync(dir, { recursive: true, force: true });
});

describe('loadScenario', () => {
  it('resolves a valid scenario into every ModelInput field', async () => {
    write('obs.csv', 'id,x,y,head\nOB1,539150,5005250,99.5\n');
    const path = scenario('full.json', {
      ...base,
      units: { length: 'm', time: 'd' },
      aquifer: { conductivity: 'k.tif', thickness: 'b.tif', anisotropy: 0.5 },
      fixedHeads: [{ raster: 'river_stage.tif' }, { edge: 'west', head: 100, name: 'upland' }],
      recharge: 'recharge.tif',
      wells: [{ id: 'W1', x: 539150, y: 5005150, rate: -50, radius: 0.1 }],
      observations: 'obs.csv',
      solver: { method: 'auto', tolerance: 1e-9 },
    });
    const { model, raw } = await loadScenario(path);
    expect(raw.title).toBe('Tiny valley');
    expect(model.title).toBe('Tiny valley');
    expect(model.units).toEqual({ length: 'm', time: 'd' });
    expect(model.scenarioPath).toBe(path);
    expect(model.grid.nx).toBe(4);
    expect(model.grid.ny).toBe(3);
    expect([...model.grid.transform]).toEqual([x0, 100, 0, y0, 0, -100]);
    expect(model.grid.crs?.epsg).toBe(32633);
    expect(Number.isNaN(model.conductivity[3]!)).toBe(true);
    expect(model.conductivity[8]).toBe(0);
    expect(model.conductivity[6]).toBe(7);
    expect(model.thickness).toBeInstanceOf(Float64Array);
    expect((model.thickness as Float64Array)[5]).toBe(-1);
    expect(model.anisotropy).toBe(0.5);
    // Default name: the raster's file name without extension; cells are row * nx + col.
    expect(model.fixedHeads.map((g) => [g.name, g.source, [...g.cells], [...g.heads]])).toEqual([
      ['river_stage', 'fixedHeads[0]', [3, 7, 11], [95, 94.5, 94]],
      ['upland', 'fixedHeads[1]', [0, 4, 8], [100, 100, 100]],
    ]);
    // Recharge: a cell without data counts as 0, with a warning counting active cells only (cell 2 is active).
    const r = Math.fround(0.001); // stored as Float32
    expect([...(model.recharge as Float64Array)].slice(0, 4)).toEqual([r, r, 0, r]);
    expect(model.warnings).toContain('recharge "recharge.tif": 1 active cell(s) have no data; their recharge is taken as 0');
    // Thickness -1 (cell 5) and nodata (cell 7) where K has data: 2 cells made inactive.
    expect(model.warnings).toContain(
      'aquifer.thickness "b.tif": 2 cell(s) with a conductivity have no thickness > 0 there and are inactive',
    );
    expect(model.wells).toEqual([{ id: 'W1', x: 539150, y: 5005150, rate: -50, radius: 0.1, source: 'wells[0]' }]);
    expect(model.observations).toEqual([{ id: 'OB1', x: 539150, y: 5005250, head: 99.5, source: 'obs.csv line 2' }]);
    expect(model.solver).toEqual({ method: 'auto', tolerance: 1e-9, maxIterations: 20000 });
    expect(model.inputFiles).toEqual(
      [path, 'k.tif', 'b.tif', 'river_stage.tif', 'recharge.tif', 'obs.csv'].map((name) => resolve(dir, name)),
    );
  });

  it('applies the defaults: units m/d, anisotropy 1, recharge 0, no wells, solver auto, title from the file name', async () => {
    const { title: _title, ...untitled } = base;
    const { model } = await loadScenario(scenario('my-model.json', untitled));
    expect(model.title).toBe('my-model');
    expect(model.units).toEqual({ length: 'm', time: 'd' });
    expect(model.anisotropy).toBe(1);
    expect(model.recharge).toBe(0);
    expect(model.thickness).toBe(10);
    expect(model.wells).toEqual([]);
    expect(model.observations).toEqual([]);
    expect(model.solver).toEqual({ method: 'auto', tolerance: 1e-8, maxIterations: 20000 });
    expect(model.warnings).toEqual([]);
  });

  it('warns when units.length disagrees with the linear unit of the raster CRS', async () => {
    const { model } = await loadScenario(scenario('feet.json', { ...base, units: { length: 'ft' } }));
    expect(model.units).toEqual({ length: 'ft', time: 'd' });
    expect(model.warnings).toEqual([
      'units.length is "ft" but the CRS of "k.tif" measures in metre: cell sizes are taken in metre; keep the other inputs consistent',
    ]);
  });

  it('resolves an inline scenario against a given folder', async () => {
    const inline: ScenarioJson = {
      aquifer: { conductivity: 'k.tif', thickness: 10, anisotropy: 1 },
      fixedHeads: [{ edge: 'west', head: 100 }],
    };
    const model = await resolveScenario(inline, dir, '<inline>');
    expect(model.title).toBe('Untitled scenario');
    expect(model.scenarioPath).toBe('<inline>');
    expect(model.inputFiles).toEqual([join(dir, 'k.tif')]);
  });

  it('fixes every cell of the named outer row or column', async () => {
    const { model } = await loadScenario(
      scenario('edges.json', {
        ...base,
        fixedHeads: [
          { edge: 'north', head: 1 },
          { edge: 'south', head: 2 },
          { edge: 'east', head: 3 },
          { edge: 'west', head: 4 },
        ],
      }),
    );
    expect(model.fixedHeads.map((g) => [g.name, [...g.cells]])).toEqual([
      ['north', [0, 1, 2, 3]],
      ['south', [8, 9, 10, 11]],
      ['east', [3, 7, 11]],
      ['west', [0, 4, 8]],
    ]);
  });

  it('finds the north row by map direction on a grid stored south-up', async () => {
    writeTestRaster(join(dir, 'k_southup.tif'), { ...grid, transform: [x0, 100, 0, y0 - 300, 0, 100] }, new Array(12).fill(1), nodata);
    const { model } = await loadScenario(
      scenario('southup.json', {
        ...base,
        aquifer: { conductivity: 'k_southup.tif', thickness: 10 },
        fixedHeads: [
          { edge: 'north', head: 1 },
          { edge: 'west', head: 2 },
        ],
      }),
    );
    expect(model.grid.transform[5]).toBe(100);
    expect(model.fixedHeads.map((g) => [g.name, [...g.cells]])).toEqual([
      ['north', [8, 9, 10, 11]],
      ['west', [0, 4, 8]],
    ]);
  });

  it('refuses two fixed-head groups with the same name', async () => {
    const error = await loadError(
      scenario('dupnames.json', {
        ...base,
        fixedHeads: [
          { edge: 'west', head: 1 },
          { raster: 'river_stage.tif', name: 'west' },
        ],
      }),
    );
    expect(error.message).toContain('fixedHeads[1]: the fixed-head group name "west" is already used by fixedHeads[0]');
  });

  it('names an unknown key with its path, and the file', async () => {
    const path = scenario('typo.json', { ...base, aquifer: { conductivty: 'k.tif', thickness: 10 } });
    const error = await loadError(path);
    expect(error.code).toBe('input');
    expect(error.detail.file).toBe(path);
    expect(error.message).toContain(`${path}: aquifer.conductivty: unknown key (did you mean "conductivity"?)`);
  });

  it('names type errors with their path', async () => {
    const error = await loadError(
      scenario('types.json', {
        ...base,
        wells: [
          { id: 'W1', x: 1, y: 2, rate: -1 },
          { id: 'W2', x: 1, y: 2, rate: 'high' },
        ],
      }),
    );
    expect(error.message).toMatch(/: wells\[1\]\.rate: expected a number, got the string "high"$/);
  });

  it('reports a JSON syntax error with the file, line and column', async () => {
    const path = write('broken.json', '{\n  "title": "x",\n  "recharge": 0.001,\n}\n');
    const error = await loadError(path);
    expect(error.code).toBe('input');
    expect(error.message).toBe(`${path} line 3, column 20: invalid JSON: trailing comma before "}"`);
  });

  it('refuses a key given twice, which JSON.parse would silently resolve', async () => {
    const path = write(
      'twice.json',
      JSON.stringify(base, null, 2).replace('"title"', '"recharge": 0.001,\n  "recharge": 0.002,\n  "title"'),
    );
    const error = await loadError(path);
    expect(error.message).toBe(`${path} line 3, column 3: the key "recharge" appears twice in the same object`);
  });

  it('reads paths relative to the scenario file, not to the working folder', async () => {
    writeTestRaster(join(dir, 'rasters', 'k.tif'), grid, new Array(12).fill(2), nodata);
    const path = scenario('scenarios/relative.json', { ...base, aquifer: { conductivity: '../rasters/k.tif', thickness: 10 } });
    const cwd = process.cwd();
    try {
      process.chdir(tmpdir());
      const { model } = await loadScenario(path);
      expect(model.conductivity[0]).toBe(2);
      expect(model.inputFiles).toContain(join(dir, 'rasters', 'k.tif'));
    } finally {
      process.chdir(cwd);
    }
  });

  it('names a missing raster, its key and where it was looked for', async () => {
    const error = await loadError(scenario('missing.json', { ...base, recharge: 'no_such.tif' }));
    expect(error.code).toBe('input');
    expect(error.message).toContain(`recharge: raster file not found: "no_such.tif" (looked for ${join(dir, 'no_such.tif')})`);
    expect(error.detail.key).toBe('recharge');
  });

  it('names a missing scenario file', async () => {
    const error = await loadError(join(dir, 'nope.json'));
    expect(error.message).toContain('scenario file not found');
  });

  it('refuses rasters on another grid, naming both files and what differs', async () => {
    const size = await loadError(scenario('mismatch-size.json', { ...base, recharge: 'k_5x3.tif' }));
    expect(size.message).toContain('recharge "k_5x3.tif" is not on the grid of aquifer.conductivity "k.tif": size 4x3 vs 5x3');
    expect(size.describe()).toContain('gdalwarp -t_srs EPSG:32633 -te 539000 5005000 539400 5005300 -ts 4 3 k_5x3.tif');
    const shifted = await loadError(
      scenario('mismatch-transform.json', { ...base, aquifer: { conductivity: 'k.tif', thickness: 'k_shifted.tif' } }),
    );
    expect(shifted.message).toContain('aquifer.thickness "k_shifted.tif" is not on the grid of aquifer.conductivity "k.tif": geotransform');
    const crs = await loadError(scenario('mismatch-crs.json', { ...base, fixedHeads: [{ raster: 'k_32634.tif' }] }));
    expect(crs.message).toContain(
      'fixedHeads[0].raster "k_32634.tif" is not on the grid of aquifer.conductivity "k.tif": CRS EPSG:32633 vs EPSG:32634',
    );
  });

  it('passes on a raster reader error with the scenario file and key in front', async () => {
    const path = scenario('damaged.json', { ...base, recharge: 'not_a_tiff.tif' });
    const error = await loadError(path);
    expect(error.code).toBe('input');
    expect(error.message).toMatch(new RegExp(`^${path.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}: recharge "not_a_tiff.tif": `));
    expect(error.detail).toMatchObject({ file: join(dir, 'not_a_tiff.tif'), key: 'recharge' });
  });

  it('refuses a conductivity raster without any active cell', async () => {
    const error = await loadError(scenario('inactive.json', { ...base, aquifer: { conductivity: 'k_none.tif', thickness: 10 } }));
    expect(error.message).toContain('aquifer.conductivity "k_none.tif" has no active cell');
  });

  it('refuses a grid in a geographic CRS, whose cell sizes are degrees', async () => {
    const error = await loadError(scenario('lonlat.json', { ...base, aquifer: { conductivity: 'k_lonlat.tif', thickness: 10 } }));
    expect(error.message).toContain('is in a geographic CRS (EPSG:4326)');
  });
});

describe('point lists from CSV', () => {
  it('reads wells with quoted fields, a BOM, CRLF, blank lines and an optional radius', async () => {
    write('wells.csv', '\ufeffid,x,y,rate,radius\r\n"W,1",539150,5005150,-50,0.2\r\n\r\nW2, 539250 ,5005150,-1e2,\r\n');
    const { model } = await loadScenario(scenario('csv-wells.json', { ...base, wells: 'wells.csv' }));
    expect(model.wells).toEqual([
      { id: 'W,1', x: 539150, y: 5005150, rate: -50, radius: 0.2, source: 'wells.csv line 2' },
      { id: 'W2', x: 539250, y: 5005150, rate: -100, source: 'wells.csv line 4' },
    ]);
  });

  it('accepts the columns in any order and case, and ignores unknown columns with a warning', async () => {
    write('wells-order.csv', 'Rate,ID,y,x,comment\n-5,A,5005150,539150,"new, deeper"\n');
    const { model } = await loadScenario(scenario('csv-order.json', { ...base, wells: 'wells-order.csv' }));
    expect(model.wells.map((w) => [w.id, w.x, w.y, w.rate])).toEqual([['A', 539150, 5005150, -5]]);
    expect(model.warnings).toEqual(['wells-order.csv: column(s) "comment" ignored']);
  });

  it('names the file and line of a bad row', async () => {
    write('wells-bad.csv', 'id,x,y,rate\nW1,539150,5005150,-50\nW2,539250,5005150,lots\n');
    const bad = await loadError(scenario('csv-bad.json', { ...base, wells: 'wells-bad.csv' }));
    expect(bad.code).toBe('input');
    expect(bad.message).toBe('wells-bad.csv line 3: rate "lots" is not a number');
    expect(bad.detail.file).toBe(join(dir, 'wells-bad.csv'));

    write('wells-comma.csv', 'id,x,y,rate\nW1,539150,5005150,-50,5\n');
    const fields = await loadError(scenario('csv-fields.json', { ...base, wells: 'wells-comma.csv' }));
    expect(fields.message).toBe('wells-comma.csv line 2: 5 field(s) where the header has 4');

    write('wells-empty-x.csv', 'id,x,y,rate\nW1,,5005150,-50\n');
    expect((await loadError(scenario('csv-empty.json', { ...base, wells: 'wells-empty-x.csv' }))).message).toBe(
      'wells-empty-x.csv line 2: x is empty',
    );

    write('obs-hex.csv', 'id,x,y,head\nOB1,0x10,5005150,3\n');
    expect((await loadError(scenario('csv-hex.json', { ...base, observations: 'obs-hex.csv' }))).message).toBe(
      'obs-hex.csv line 2: x "0x10" is not a number',
    );
  });

  it('names a missing header column and a semicolon-separated file', async () => {
    write('wells-nohead.csv', 'id,x,y,q\nW1,1,2,3\n');
    expect((await loadError(scenario('csv-nohead.json', { ...base, wells: 'wells-nohead.csv' }))).message).toBe(
      'wells-nohead.csv line 1: the header lacks the column(s) "rate" (found: id,x,y,q)',
    );
    write('wells-semi.csv', 'id;x;y;rate\nW1;1;2;3\n');
    expect((await loadError(scenario('csv-semi.json', { ...base, wells: 'wells-semi.csv' }))).message).toBe(
      'wells-semi.csv line 1: the header "id;x;y;rate" is not separated by commas',
    );
  });

  it('refuses duplicate ids, naming both lines', async () => {
    write('wells-dup.csv', 'id,x,y,rate\nW1,539150,5005150,-50\nW2,539250,5005150,-50\nW1,539350,5005150,-50\n');
    const error = await loadError(scenario('csv-dup.json', { ...base, wells: 'wells-dup.csv' }));
    expect(error.message).toBe('wells-dup.csv line 4: duplicate id "W1" (also on line 2)');
  });

  it('names a missing CSV file', async () => {
    const error = await loadError(scenario('csv-missing.json', { ...base, observations: 'gone.csv' }));
    expect(error.message).toContain('observations: CSV file not found: "gone.csv"');
  });
});

describe('pointCrs', () => {
  it('reprojects wells and observations from EPSG:4326 lon/lat to the raster CRS', async () => {
    write('obs-lonlat.csv', 'id,x,y,head\nOB1,15.5,45.2,99\n');
    const { model } = await loadScenario(
      scenario('lonlat-points.json', {
        ...base,
        pointCrs: 'EPSG:4326',
        wells: [{ id: 'W1', x: 15.5, y: 45.2, rate: -10 }],
        observations: 'obs-lonlat.csv',
      }),
    );
    // Reference: GDAL 3.6.2, `echo "15.5 45.2" | gdaltransform -s_srs EPSG:4326 -t_srs EPSG:32633 -output_xy`
    // printed 539270.307445004 5005289.84167271.
    for (const point of [model.wells[0]!, model.observations[0]!]) {
      expect(point.x).toBeCloseTo(539270.307445004, 3);
      expect(point.y).toBeCloseTo(5005289.84167271, 3);
    }
  });

  it('leaves points alone when pointCrs is the raster CRS', async () => {
    const { model } = await loadScenario(
      scenario('same-crs.json', { ...base, pointCrs: 'EPSG:32633', wells: [{ id: 'W1', x: 539150, y: 5005150, rate: -1 }] }),
    );
    expect(model.wells[0]).toMatchObject({ x: 539150, y: 5005150 });
  });

  it('names an unknown EPSG code and a code needing a grid-shift file', async () => {
    const unknown = await loadError(
      scenario('crs-unknown.json', { ...base, pointCrs: 'EPSG:99999', wells: [{ id: 'W1', x: 1, y: 2, rate: -1 }] }),
    );
    expect(unknown.code).toBe('input');
    expect(unknown.message).toContain(
      "pointCrs: reprojecting points from EPSG:99999 to the rasters' EPSG:32633: EPSG:99999 is not a known EPSG code",
    );
    const grid = await loadError(
      scenario('crs-grid.json', { ...base, pointCrs: 'EPSG:27700', wells: [{ id: 'W1', x: 1, y: 2, rate: -1 }] }),
    );
    expect(grid.message).toContain('needs the datum grid-shift file');
  });

  it('refuses pointCrs when the rasters have no EPSG code, and loads them without it', async () => {
    const userDefined = {
      ...base,
      aquifer: { conductivity: 'k_userdefined.tif', thickness: 10 },
      wells: [{ id: 'W1', x: 539150, y: 5005150, rate: -1 }],
    };
    const { model } = await loadScenario(scenario('crs-user.json', userDefined));
    expect(model.grid.crs?.epsg ?? null).toBeNull();
    const error = await loadError(scenario('crs-user-points.json', { ...userDefined, pointCrs: 'EPSG:4326' }));
    expect(error.message).toContain('pointCrs is EPSG:4326, but aquifer.conductivity "k_userdefined.tif" has no EPSG code');
  });

  it('names the well whose coordinates are not lon/lat', async () => {
    const error = await loadError(
      scenario('crs-range.json', { ...base, pointCrs: 'EPSG:4326', wells: [{ id: 'W7', x: 539150, y: 5005150, rate: -1 }] }),
    );
    expect(error.message).toContain('well "W7" (wells[0]): (539150, 5005150) is not a longitude/latitude pair');
  });
});

describe('variants', () => {
  it('merges wells by id: changed fields replace, new ids add, rate 0 switches a well off', async () => {
    const path = scenario('variants.json', {
      ...base,
      recharge: 0.001,
      wells: [
        { id: 'W1', x: 539150, y: 5005150, rate: -50 },
        { id: 'W2', x: 539250, y: 5005150, rate: -60, radius: 0.1 },
      ],
      variants: [
        {
          name: 'expanded',
          recharge: 0.0005,
          wells: [
            { id: 'W1', rate: 0 },
            { id: 'W2', rate: -90 },
            { id: 'W3', x: 539150, y: 5005250, rate: -70 },
          ],
        },
      ],
    });
    const { model: baseline, raw } = await loadScenario(path);
    expect(baseline.wells.map((w) => [w.id, w.rate])).toEqual([
      ['W1', -50],
      ['W2', -60],
    ]);
    const variant = mergeVariant(raw, raw.variants![0]!);
    const model = await resolveScenario(variant, dir, path);
    expect(model.recharge).toBe(0.0005);
    expect(model.wells).toEqual([
      { id: 'W2', x: 539250, y: 5005150, rate: -90, radius: 0.1, source: 'variants "expanded".wells[1]' },
      { id: 'W3', x: 539150, y: 5005250, rate: -70, source: 'variants "expanded".wells[2]' },
    ]);
    expect(model.title).toBe('Tiny valley');
  });

  it('merges variant wells into baseline wells read from CSV', async () => {
    write('base-wells.csv', 'id,x,y,rate\nA,539150,5005150,-5\nB,539250,5005150,-6\n');
    const path = scenario('variants-csv.json', {
      ...base,
      wells: 'base-wells.csv',
      variants: [{ name: 'b-off', wells: [{ id: 'B', rate: 0 }] }],
    });
    const { raw } = await loadScenario(path);
    const model = await resolveScenario(mergeVariant(raw, raw.variants![0]!), dir, path);
    expect(model.wells.map((w) => [w.id, w.rate, w.source])).toEqual([['A', -5, 'base-wells.csv line 2']]);
  });

  it('names a new well in a variant that lacks coordinates or rate', async () => {
    const path = scenario('variants-new.json', {
      ...base,
      wells: [{ id: 'W1', x: 539150, y: 5005150, rate: -5 }],
      variants: [{ name: 'typo', wells: [{ id: 'w1', rate: 0 }] }],
    });
    const { raw } = await loadScenario(path);
    let error: unknown;
    try {
      await resolveScenario(mergeVariant(raw, raw.variants![0]!), dir, path);
    } catch (thrown) {
      error = thrown;
    }
    expect(error).toBeInstanceOf(PiezomapError);
    expect((error as PiezomapError).message).toContain(
      'variants "typo".wells[0]: well "w1" is new here, so it needs x, y (no earlier well has this id)',
    );
  });

  it('takes scaled rasters in GDAL unscaled values and accepts a declared unit that matches its key (GDAL-written fixtures)', async () => {
    // u16-scale.tif: UInt16 with scale 0.001 (e.g. mm/d stored, m/d meant); i16-scale-offset.tif: Int16 x 0.004 + 100,
    // unit "m". expected.json holds GDAL 3.6's unscaled values (scripts/make-raster-fixtures.sh).
    const fixtures = resolve(__dirname, '../fixtures/rasters');
    const expected = JSON.parse(readFileSync(join(fixtures, 'expected.json'), 'utf8')) as {
      good: Array<{ file: string; bands: Array<{ values: Array<number | null> }> }>;
    };
    const gdalValues = (file: string) => expected.good.find((r) => r.file === file)!.bands[0]!.values;
    const raw = {
      aquifer: { conductivity: 'u16-scale.tif', thickness: 'i16-scale-offset.tif', anisotropy: 1 },
      fixedHeads: [{ edge: 'west', head: 10 }],
    } as unknown as ScenarioJson;
    const model = await resolveScenario(raw, fixtures, '<inline>');
    const k = gdalValues('u16-scale.tif');
    const b = gdalValues('i16-scale-offset.tif');
    for (const p of [1, 40, 500]) {
      expect(model.conductivity[p]).toBe(k[p]);
      expect((model.thickness as Float64Array)[p]).toBe(b[p]);
    }
    expect(k[40]).toBeLessThan(10); // about 4 m/d, not the stored 4000
    // the thickness raster declares "m", the scenario's length unit: accepted
    expect(model.warnings).toEqual([]);
  });

  it('refuses a raster whose declared unit is not the one its key is taken in; accepts it when the scenario units match', async () => {
    const fixtures = resolve(__dirname, '../fixtures/rasters');
    // f32-vertical-ftus.tif: GDAL gives its band the unit of its vertical CRS, the US survey foot
    const raw = {
      aquifer: { conductivity: 'u16-scale.tif', thickness: 'f32-vertical-ftus.tif', anisotropy: 1 },
      fixedHeads: [{ edge: 'west', head: 10 }],
    };
    let error: unknown;
    try {
      await resolveScenario(raw as unknown as ScenarioJson, fixtures, '<inline>');
    } catch (thrown) {
      error = thrown;
    }
    expect(error).toBeInstanceOf(PiezomapError);
    expect((error as PiezomapError).code).toBe('input');
    expect((error as PiezomapError).message).toBe(
      '<inline scenario>: aquifer.thickness "f32-vertical-ftus.tif" declares its values in "US survey foot", but aquifer.thickness is taken in m (units in the scenario); piezomap converts no units',
    );
    expect((error as PiezomapError).detail.key).toBe('aquifer.thickness');
    const inFeet = await resolveScenario({ ...raw, units: { length: 'ft', time: 'd' } } as unknown as ScenarioJson, fixtures, '<inline>');
    expect(inFeet.thickness).toBeInstanceOf(Float64Array);
  });
});
