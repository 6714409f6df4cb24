/**
 * encodeFloat32GeoTiff: round trips through an independent reader (geotiff.js), through our reader, and — where GDAL
 * is installed — through GDAL itself (gdalinfo -json, gdallocationinfo, gdal_translate to raw Float32).
 * GDAL checks skip with a message when GDAL is absent, except on CI (CI=true) where they must run.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { fromArrayBuffer } from 'geotiff';
import { describe, expect, it } from 'vitest';
import { PiezomapError } from '../../src/errors.js';
import type { Grid } from '../../src/grid.js';
import { readRaster } from '../../src/raster/read.js';
import { assembleFloat32GeoTiff, encodeFloat32GeoTiff, encodeFloat32GeoTiffTileRows, geoTiffTileRows } from '../../src/raster/write.js';

const here = dirname(fileURLToPath(import.meta.url));
const fixtures = join(here, '..', 'fixtures', 'rasters');
const tmp = join(here, '..', 'tmp', 'raster-write');
mkdirSync(tmp, { recursive: true });

const UTM33: Grid['crs'] = { epsg: 32633, geographic: false, geoKeys: {} };

function grid(nx: number, ny: number, transform: Grid['transform'] = [500000, 50, 0, 4110000, 0, -50], crs: Grid['crs'] = UTM33): Grid {
  return { nx, ny, transform, crs };
}

/** A smooth head-like surface with a few NaN (inactive) cells, including values that are not Float32-exact. */
function surface(nx: number, ny: number): Float64Array {
  const v = new Float64Array(nx * ny);
  for (let r = 0; r < ny; r++) {
    for (let c = 0; c < nx; c++) v[r * nx + c] = 97.3 + 0.0137 * c - 0.0091 * r + Math.sin(c / 7) * Math.cos(r / 5);
  }
  v[0] = Number.NaN;
  for (let r = 10; r < 14 && r < ny; r++) for (let c = 20; c < 26 && c < nx; c++) v[r * nx + c] = Number.NaN;
  v[nx * ny - 1] = Number.NaN;
  return v;
}

function write(name: string, bytes: Uint8Array): string {
  const path = join(tmp, name);
  writeFileSync(path, bytes);
  return path;
}

async function geotiffImage(bytes: Uint8Array) {
  const copy = bytes.slice();
  return (await fromArrayBuffer(copy.buffer)).getImage(0);
}

describe('encodeFloat32GeoTiff round trips', () => {
  // 300 x 170 with 128-pixel tiles: partial tiles on the right and at the bottom
  const g = grid(300, 170);
  const values = surface(300, 170);
  const bytes = encodeFloat32GeoTiff(g, values, { tileSize: 128 });

  it('geotiff.js (an independent reader) decodes every value at Float32 precision, NaN as nodata -9999', async () => {
    const image = await geotiffImage(bytes);
    expect([image.getWidth(), image.getHeight()]).toEqual([300, 170]);
    expect([image.getTileWidth(), image.getTileHeight()]).toEqual([128, 128]);
    expect(image.getGDALNoData()).toBe(-9999);
    expect(image.getOrigin().slice(0, 2)).toEqual([500000, 4110000]);
    expect(image.getResolution().slice(0, 2)).toEqual([50, -50]);
    expect(image.getGeoKeys()).toMatchObject({ GTModelTypeGeoKey: 1, GTRasterTypeGeoKey: 1, ProjectedCSTypeGeoKey: 32633 });
    const [band] = (await image.readRasters({ interleave: false })) as unknown as [Float32Array];
    expect(band).toBeInstanceOf(Float32Array);
    let mismatches = 0;
    for (let i = 0; i < values.length; i++) {
      const want = Number.isNaN(values[i]!) ? -9999 : Math.fround(values[i]!);
      if (band[i] !== want) mismatches++;
    }
    expect(mismatches).toBe(0);
  });

  it('readRaster gives back the grid and every value at Float32 precision, NaN where the input was NaN', async () => {
    const raster = await readRaster(write('roundtrip.tif', bytes));
    expect(raster.grid.nx).toBe(300);
    expect(raster.grid.ny).toBe(170);
    expect([...raster.grid.transform]).toEqual([...g.transform]);
    expect(raster.grid.crs?.epsg).toBe(32633);
    expect(raster.nodata).toBe(-9999);
    expect(raster.sampleType).toBe('Float32');
    for (let i = 0; i < values.length; i++) {
      if (Number.isNaN(values[i]!)) expect(raster.values[i]).toBeNaN();
      else if (raster.values[i] !== Math.fround(values[i]!)) expect.fail(`cell ${i}: ${raster.values[i]} vs ${Math.fround(values[i]!)}`);
    }
  });

  it('the same input gives the same bytes', () => {
    expect(Buffer.from(encodeFloat32GeoTiff(g, values, { tileSize: 128 })).equals(Buffer.from(bytes))).toBe(true);
  });

  it('compresses a smooth surface (DEFLATE + floating-point predictor) well below raw Float32 size', () => {
    expect(bytes.length).toBeLessThan(300 * 170 * 4 * 0.8);
  });

  it('run-length-only DEFLATE (the result rasters) is decoded by geotiff.js, an independent reader, to every value', async () => {
    const rle = encodeFloat32GeoTiff(g, values, { tileSize: 128, compressionLevel: 4, runLengthOnly: true });
    expect(Buffer.from(rle).equals(Buffer.from(bytes))).toBe(false);
    const image = await geotiffImage(rle);
    const [band] = (await image.readRasters({ interleave: false })) as unknown as [Float32Array];
    let mismatches = 0;
    for (let i = 0; i < values.length; i++) {
      const want = Number.isNaN(values[i]!) ? -9999 : Math.fround(values[i]!);
      if (band[i] !== want) mismatches++;
    }
    expect(mismatches).toBe(0);
  });

  it('tiles encoded in bands of tile rows and put together give the bytes of the whole encoding', () => {
    const options = { tileSize: 64, runLengthOnly: true };
    const whole = encodeFloat32GeoTiff(g, values, options);
    const rows = geoTiffTileRows(g, options);
    expect(rows).toBe(3);
    for (const cuts of [
      [0, 3],
      [0, 1, 3],
      [0, 1, 2, 3],
      [0, 2, 3],
    ]) {
      const parts = cuts.slice(1).map((end, k) => encodeFloat32GeoTiffTileRows(g, values, options, cuts[k]!, end));
      expect(Buffer.from(assembleFloat32GeoTiff(g, values, options, parts)).equals(Buffer.from(whole))).toBe(true);
    }
    // a band missing is an error, not a shorter file
    const some = [encodeFloat32GeoTiffTileRows(g, values, options, 0, 2)];
    expect(() => assembleFloat32GeoTiff(g, values, options, some)).toThrow(/tiles given/);
  });

  it('a custom nodata and a description are stored and read back', async () => {
    const custom = encodeFloat32GeoTiff(g, values, { nodata: -32768, description: 'head, baseline' });
    const image = await geotiffImage(custom);
    // geotiff.js keeps the NUL that terminates TIFF ASCII values
    expect(image.getFileDirectory().getValue('ImageDescription' as never)).toBe('head, baseline\0');
    const raster = await readRaster(write('custom-nodata.tif', custom));
    expect(raster.nodata).toBe(-32768);
    expect(raster.values[0]).toBeNaN();
    expect(raster.values[1]).toBe(Math.fround(values[1]!));
  });

  it('a south-up grid (positive pixel height) is written with ModelTransformation and read back the same', async () => {
    const southUp = grid(40, 30, [500000, 25, 0, 4100000, 0, 25]);
    const raster = await readRaster(write('south-up.tif', encodeFloat32GeoTiff(southUp, surface(40, 30))));
    expect([...raster.grid.transform]).toEqual([500000, 25, 0, 4100000, 0, 25]);
  });

  it('an EPSG-only geographic CRS is written as GeographicTypeGeoKey with the geographic model type', async () => {
    const lonLat = grid(20, 10, [14.25, 0.001, 0, 37.2, 0, -0.001], { epsg: 4326, geographic: true, geoKeys: {} });
    const raster = await readRaster(write('geographic.tif', encodeFloat32GeoTiff(lonLat, surface(20, 10), { tileSize: 16 })));
    expect(raster.grid.crs).toMatchObject({ epsg: 4326, geographic: true });
    expect(raster.grid.crs!.geoKeys).toMatchObject({ GTModelTypeGeoKey: 2, GeographicTypeGeoKey: 4326 });
  });

  it('a user-defined CRS read from a GDAL file keeps all its GeoKeys through our writer', async () => {
    const source = await readRaster(join(fixtures, 'f32-userdefined-crs.tif'));
    const out = await readRaster(write('userdefined.tif', encodeFloat32GeoTiff(source.grid, source.values)));
    expect(out.grid.crs!.geoKeys).toEqual(source.grid.crs!.geoKeys);
    expect(out.grid.crs!.epsg).toBeNull();
  });

  it('a PixelIsPoint source is written as PixelIsArea with the corner origin, so the grid is unchanged', async () => {
    const source = await readRaster(join(fixtures, 'f32-pixelispoint.tif'));
    expect(source.grid.crs!.geoKeys.GTRasterTypeGeoKey).toBe(2);
    const out = await readRaster(write('from-point.tif', encodeFloat32GeoTiff(source.grid, source.values)));
    expect(out.grid.crs!.geoKeys.GTRasterTypeGeoKey).toBe(1);
    expect([...out.grid.transform]).toEqual([...source.grid.transform]);
  });

  it('BigTIFF, when asked, is read back by geotiff.js and by readRaster', async () => {
    const small = grid(50, 40);
    const v = surface(50, 40);
    const big = encodeFloat32GeoTiff(small, v, { bigTiff: true, tileSize: 32 });
    expect([big[2], big[3]]).toEqual([43, 0]); // BigTIFF version number (little-endian)
    const image = await geotiffImage(big);
    const [band] = (await image.readRasters({ interleave: false })) as unknown as [Float32Array];
    expect(band[1]).toBe(Math.fround(v[1]!));
    const raster = await readRaster(write('bigtiff.tif', big));
    expect(raster.values[49 * 40 - 1 - 10]).toBe(Math.fround(v[49 * 40 - 1 - 10]!));
    expect([...raster.grid.transform]).toEqual([...small.transform]);
  });

  it('a grid of one cell and a grid with no NaN at all are written and read back', async () => {
    const one = await readRaster(write('one.tif', encodeFloat32GeoTiff(grid(1, 1), [12.5])));
    expect([...one.values]).toEqual([12.5]);
    const full = Float64Array.from({ length: 16 * 16 }, (_, i) => i * 0.25);
    const back = await readRaster(write('full.tif', encodeFloat32GeoTiff(grid(16, 16), full, { tileSize: 16 })));
    expect([...back.values]).toEqual([...full]);
  });
});

describe('encodeFloat32GeoTiff refuses what it cannot write faithfully', () => {
  const g = grid(4, 3);
  const v = new Float64Array(12);
  const refuses = (make: () => unknown, pattern: RegExp): void => {
    let error: unknown;
    try {
      make();
    } catch (thrown) {
      error = thrown;
    }
    expect(error).toBeInstanceOf(PiezomapError);
    expect((error as PiezomapError).message).toMatch(pattern);
  };

  it('a rotated geotransform', () => refuses(() => encodeFloat32GeoTiff(grid(4, 3, [0, 1, 0.1, 0, 0, -1]), v), /rotated/));
  it('values that do not fill the grid', () =>
    refuses(() => encodeFloat32GeoTiff(g, new Float64Array(11)), /11 values given for a 4 x 3 grid/));
  it('a tile size that is not a multiple of 16', () => refuses(() => encodeFloat32GeoTiff(g, v, { tileSize: 100 }), /tileSize 100/));
  it('a nodata value Float32 cannot hold exactly', () => refuses(() => encodeFloat32GeoTiff(g, v, { nodata: 0.1 }), /nodata 0.1/));
  it('an unknown option name', () => refuses(() => encodeFloat32GeoTiff(g, v, { tilesize: 32 } as never), /unknown option "tilesize"/));
  it('a zero pixel width', () => refuses(() => encodeFloat32GeoTiff(grid(4, 3, [0, 0, 0, 0, 0, -1]), v), /pixel size/));
});

// ---- GDAL as the outside reference -------------------------------------------------------------------------------
const gdalPresent = spawnSync('gdalinfo', ['--version'], { encoding: 'utf8' }).status === 0;
const onCi = process.env.CI === 'true';
if (!gdalPresent && !onCi) {
  console.warn('raster-write.test.ts: gdalinfo not on PATH; GDAL cross-checks skipped (install gdal-bin to run them)');
}

describe('GDAL availability', () => {
  it.runIf(onCi)('GDAL command-line tools are installed on CI (the cross-checks below must run there)', () => {
    expect(gdalPresent, 'gdalinfo not found on PATH; install gdal-bin').toBe(true);
  });
});

describe.runIf(gdalPresent || onCi)('GDAL reads our GeoTIFFs as we wrote them', () => {
  const nx = 300;
  const ny = 170;
  const g = grid(nx, ny, [512345.5, 30, 0, 4123456.5, 0, -30]);
  const values = surface(nx, ny);
  const path = write('gdal-check.tif', encodeFloat32GeoTiff(g, values, { tileSize: 64 }));
  const info = () =>
    JSON.parse(execFileSync('gdalinfo', ['-json', path], { encoding: 'utf8' })) as {
      size: number[];
      geoTransform: number[];
      stac?: { 'proj:epsg'?: number };
      bands: Array<{ type: string; noDataValue?: number; block: number[] }>;
      metadata?: Record<string, Record<string, string>>;
    };

  it('gdalinfo reports our size, geotransform, EPSG code, nodata, type and tiling', () => {
    const report = info();
    expect(report.size).toEqual([nx, ny]);
    expect(report.geoTransform).toEqual([512345.5, 30, 0, 4123456.5, 0, -30]);
    expect(report.stac?.['proj:epsg']).toBe(32633);
    expect(report.bands).toHaveLength(1);
    expect(report.bands[0]!.type).toBe('Float32');
    expect(report.bands[0]!.noDataValue).toBe(-9999);
    expect(report.bands[0]!.block).toEqual([64, 64]);
    expect(report.metadata?.['']?.AREA_OR_POINT).toBe('Area');
    expect(report.metadata?.IMAGE_STRUCTURE).toMatchObject({ COMPRESSION: 'DEFLATE', PREDICTOR: '3' });
  });

  it('gdalinfo shows our description as the TIFF image description', () => {
    const described = write('gdal-described.tif', encodeFloat32GeoTiff(grid(20, 10), surface(20, 10), { description: 'head, baseline' }));
    const report = JSON.parse(execFileSync('gdalinfo', ['-json', described], { encoding: 'utf8' })) as {
      metadata: Record<string, Record<string, string>>;
    };
    expect(report.metadata['']?.TIFFTAG_IMAGEDESCRIPTION).toBe('head, baseline');
  });

  it('gdallocationinfo gives our value at chosen cells, and nodata where we wrote NaN', () => {
    const cells: Array<[number, number]> = [
      [0, 1],
      [5, 63],
      [5, 64],
      [100, 299],
      [169, 0],
      [169, 298],
      [12, 22],
    ];
    const input = cells.map(([r, c]) => `${c} ${r}`).join('\n');
    const out = execFileSync('gdallocationinfo', ['-valonly', path], { input, encoding: 'utf8' }).trim().split('\n');
    expect(out).toHaveLength(cells.length);
    cells.forEach(([r, c], k) => {
      const v = values[r * nx + c]!;
      const want = Number.isNaN(v) ? -9999 : Math.fround(v);
      expect(Math.fround(Number(out[k])), `row ${r} col ${c}`).toBe(want);
    });
  });

  it('gdal_translate to raw Float32 reproduces every value bit for bit', () => {
    const raw = join(tmp, 'gdal-check.bin');
    execFileSync('gdal_translate', ['-q', '-of', 'ENVI', path, raw]);
    const buffer = readFileSync(raw);
    const decoded = new Float32Array(buffer.buffer.slice(buffer.byteOffset, buffer.byteOffset + buffer.byteLength));
    expect(decoded.length).toBe(nx * ny);
    let mismatches = 0;
    for (let i = 0; i < decoded.length; i++) {
      const want = Number.isNaN(values[i]!) ? -9999 : Math.fround(values[i]!);
      if (decoded[i] !== want) mismatches++;
    }
    expect(mismatches).toBe(0);
  });

  it('GDAL sees the same user-defined CRS in our copy as in the GDAL-written source', async () => {
    const sourcePath = join(fixtures, 'f32-userdefined-crs.tif');
    const source = await readRaster(sourcePath);
    const copy = write('gdal-userdefined.tif', encodeFloat32GeoTiff(source.grid, source.values));
    const proj4 = (p: string) => execFileSync('gdalsrsinfo', ['-o', 'proj4', p], { encoding: 'utf8' }).trim();
    expect(proj4(copy)).toBe(proj4(sourcePath));
    expect(proj4(copy)).toContain('+lon_0=13.7');
  });

  it('GDAL reads a south-up grid and a BigTIFF of ours with the geotransform we wrote', () => {
    const southUp = write('gdal-south-up.tif', encodeFloat32GeoTiff(grid(40, 30, [500000, 25, 0, 4100000, 0, 25]), surface(40, 30)));
    const big = write('gdal-bigtiff.tif', encodeFloat32GeoTiff(grid(40, 30), surface(40, 30), { bigTiff: true, tileSize: 16 }));
    const gt = (p: string) =>
      (JSON.parse(execFileSync('gdalinfo', ['-json', p], { encoding: 'utf8' })) as { geoTransform: number[] }).geoTransform;
    expect(gt(southUp)).toEqual([500000, 25, 0, 4100000, 0, 25]);
    expect(gt(big)).toEqual([500000, 50, 0, 4110000, 0, -50]);
    const value = execFileSync('gdallocationinfo', ['-valonly', big, '3', '2'], { encoding: 'utf8' }).trim();
    expect(Math.fround(Number(value))).toBe(Math.fround(surface(40, 30)[2 * 40 + 3]!));
  });
});
