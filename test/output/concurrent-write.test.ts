/**
 * The concurrent writer (rasters compressed on the thread pool while the other products are computed) must give the
 * same files, byte for byte, as the one-after-another writer it replaces in `piezomap solve`. The bytes of the
 * one-after-another writer are themselves checked against GDAL and geotiff.js in test/raster/raster-write.test.ts.
 */
import { describe, expect, it } from 'vitest';
import { solveModel } from '../../src/pipeline.js';
import { encodeFloat32GeoTiff, encodeFloat32GeoTiffAsync } from '../../src/raster/write.js';
import { resultBundle, resultBundleConcurrent } from '../../src/output/solveFiles.js';
import { PiezomapError } from '../../src/errors.js';
import { fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';

function surface(nx: number, ny: number): Float64Array {
  const v = new Float64Array(nx * ny);
  for (let p = 0; p < v.length; p++) v[p] = 97.3 + 0.0137 * (p % nx) - 0.0091 * Math.floor(p / nx) + Math.sin(p / 7);
  v[3] = Number.NaN;
  return v;
}

const same = (a: Uint8Array | string, b: Uint8Array | string) => Buffer.from(a).equals(Buffer.from(b));

describe('encodeFloat32GeoTiffAsync', () => {
  const g = testGrid(300, 170, 10);
  const values = surface(300, 170);
  for (const options of [
    {},
    { tileSize: 128 },
    { tileSize: 16, compressionLevel: 1 },
    { nodata: -32768, description: 'head' },
    { bigTiff: true, tileSize: 64 },
  ]) {
    it(`gives the bytes of encodeFloat32GeoTiff with ${JSON.stringify(options)}`, async () => {
      const async = await encodeFloat32GeoTiffAsync(g, values, options);
      expect(same(async, encodeFloat32GeoTiff(g, values, options))).toBe(true);
    });
  }

  it('refuses at once, not as a later rejection, what the one-after-another encoder refuses', () => {
    const big = surface(300, 170);
    big[17] = 1e300;
    expect(() => encodeFloat32GeoTiffAsync(g, big)).toThrow(PiezomapError);
    expect(() => encodeFloat32GeoTiffAsync(g, big)).toThrow(/row 0, col 17/);
  });
});

describe('resultBundleConcurrent', () => {
  it('gives the files of resultBundle, in the same order, byte for byte (rasters, contours, map, tables)', async () => {
    const grid = testGrid(90, 70, 25);
    const k = new Float64Array(90 * 70).map((_, p) => 5 + 4 * Math.sin(p / 13));
    k[500] = Number.NaN;
    const model = makeModel(grid, {
      conductivity: k,
      thickness: 15,
      porosity: 0.2,
      fixedHeads: [fixedColumn(grid, 0, 40, 'west'), fixedColumn(grid, 89, 35, 'east')],
      wells: [well(grid, 'W1', 30, 40, -300)],
      solver: { method: 'auto', tolerance: 1e-10, maxIterations: 500 },
    });
    const result = solveModel(model);
    const serial = resultBundle(result, '', {});
    const concurrent = await resultBundleConcurrent(result, '', {});
    expect(concurrent.files.map((f) => f.name)).toEqual(serial.files.map((f) => f.name));
    expect(serial.files.map((f) => f.name)).toEqual(
      expect.arrayContaining(['head.tif', 'darcy-flux-x.tif', 'velocity.tif', 'head-map.png']),
    );
    for (let i = 0; i < serial.files.length; i++) {
      expect(same(concurrent.files[i]!.bytes, serial.files[i]!.bytes), serial.files[i]!.name).toBe(true);
    }
    expect(concurrent.maps.map((m) => m.file)).toEqual(serial.maps.map((m) => m.file));
  });
});
