/**
 * The write pool (src/output/writePool.ts: GeoTIFFs, contour levels and the map built in worker threads, as
 * `piezomap solve` and `compare` build them) must give the same files, byte for byte and in the same order, as the
 * one-after-another writer; that writer's bytes are themselves checked against outside readers (GDAL and geotiff.js
 * in test/raster/raster-write.test.ts, ogrinfo and gdalinfo in test/e2e/gis-outputs.test.ts, a PNG decoder in
 * test/report/). Workers exist only compiled, so these tests use the built modules (npm test builds first).
 */
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

const dist = (path: string) => new URL(`../../dist/src/${path}`, import.meta.url);
const compiled = existsSync(fileURLToPath(dist('output/writeWorker.js')));
const data = (name: string) => fileURLToPath(new URL(`../../data/${name}`, import.meta.url));

type SolveFiles = typeof import('../../src/output/solveFiles.js');
type Pool = typeof import('../../src/output/writePool.js');
type Pipeline = typeof import('../../src/pipeline.js');
type Contours = typeof import('../../src/analysis/contours.js');
type Errors = typeof import('../../src/errors.js');
type CompareRun = typeof import('../../src/compare/run.js');
type ComparisonFiles = typeof import('../../src/output/comparisonFiles.js');
type SolveResult = import('../../src/analysis/result.js').SolveResult;

const same = (a: Uint8Array | string, b: Uint8Array | string) => Buffer.from(a).equals(Buffer.from(b));

describe.skipIf(!compiled)('write pool', () => {
  let files: SolveFiles;
  let pools: Pool;
  let pipeline: Pipeline;
  let contours: Contours;
  let errors: Errors;
  let compare: CompareRun;
  let comparisonFiles: ComparisonFiles;
  let pool: import('../../src/output/writePool.js').WritePool;

  beforeAll(async () => {
    [compare, comparisonFiles] = await Promise.all([
      import(dist('compare/run.js').href) as Promise<CompareRun>,
      import(dist('output/comparisonFiles.js').href) as Promise<ComparisonFiles>,
    ]);
    [files, pools, pipeline, contours, errors] = await Promise.all([
      import(dist('output/solveFiles.js').href) as Promise<SolveFiles>,
      import(dist('output/writePool.js').href) as Promise<Pool>,
      import(dist('pipeline.js').href) as Promise<Pipeline>,
      import(dist('analysis/contours.js').href) as Promise<Contours>,
      import(dist('errors.js').href) as Promise<Errors>,
    ]);
    pool = pools.startWritePool(2)!;
    expect(pool).not.toBeNull();
  });
  afterAll(async () => {
    await pool?.close();
  });

  /** The serial and the pooled bundle of the same result, each starting from the result's own warnings. */
  async function bothBundles(result: SolveResult, options: Record<string, unknown>) {
    const warnings = [...result.warnings];
    const serial = files.resultBundle(result, '', options);
    const serialWarnings = [...result.warnings];
    result.warnings = [...warnings];
    const pooled = await files.resultBundleOnPool(result, '', options, pool);
    return { serial, pooled, serialWarnings, pooledWarnings: result.warnings };
  }

  for (const [scenario, options] of [
    ['valley.json', {}],
    ['valley.json', { nativeContours: true, contourInterval: 0.5 }],
    ['valley-unconfined.json', {}],
    ['valley.json', { maps: false }],
  ] as const) {
    it(`gives the files of resultBundle for ${scenario} with ${JSON.stringify(options)}, byte for byte, in the same order`, async () => {
      const result = await pipeline.solveScenarioFile(data(scenario));
      const { serial, pooled, serialWarnings, pooledWarnings } = await bothBundles(result, options);
      expect(pooled.files.map((f) => f.name)).toEqual(serial.files.map((f) => f.name));
      if (scenario === 'valley.json' && !('maps' in options)) {
        // the valley has a river (exchange raster), porosity (velocity), tracking (zones on the map) and an EPSG code
        expect(serial.files.map((f) => f.name)).toEqual(
          expect.arrayContaining(['head.tif', 'velocity.tif', 'head-contours.geojson', 'head-map.png', 'capture-zones.geojson']),
        );
      }
      for (let i = 0; i < serial.files.length; i++) {
        expect(same(pooled.files[i]!.bytes, serial.files[i]!.bytes), serial.files[i]!.name).toBe(true);
      }
      expect(pooled.maps.map((m) => m.file)).toEqual(serial.maps.map((m) => m.file));
      expect(pooledWarnings).toEqual(serialWarnings);
    }, 60_000);
  }

  it("gives comparisonFiles' files for the demo comparison (baseline and variants, drawdown products), byte for byte", async () => {
    // each writer adds warnings to the results it is given: each gets a comparison of its own
    const serial = comparisonFiles.comparisonFiles(await compare.compareScenario(data('valley.json')), {});
    const pooled = await comparisonFiles.comparisonFilesOnPool(await compare.compareScenario(data('valley.json')), {}, pool);
    const names = serial.files.map((f) => f.name);
    expect(pooled.files.map((f) => f.name)).toEqual(names);
    expect(names.filter((n) => n.endsWith('/drawdown-map.png')).length).toBeGreaterThan(0);
    for (let i = 0; i < serial.files.length; i++) {
      const [a, b] = [serial.files[i]!, pooled.files[i]!];
      // summaries and reports carry each run's timings; every other file is the same byte for byte
      if (a.name.endsWith('summary.json') || a.name.endsWith('report.html')) continue;
      expect(same(b.bytes, a.bytes), a.name).toBe(true);
    }
    expect(pooled.summary.warnings).toEqual(serial.summary.warnings);
  }, 120_000);

  it('traces the contours contourField traces, whatever the number of levels', async () => {
    const grid = { nx: 61, ny: 47, transform: [0, 10, 0, 470, 0, -10] as const, crs: null };
    const field = new Float64Array(61 * 47);
    for (let p = 0; p < field.length; p++) field[p] = 20 + 3 * Math.sin((p % 61) / 9) + 2 * Math.cos(Math.floor(p / 61) / 7);
    field[100] = Number.NaN;
    for (const options of [{}, { interval: 0.25 }, { interval: 4 }, { levels: [21.5] }, { levels: [] }]) {
      const one = contours.contourField(grid, field, options);
      const pooled = await pool.contours(grid, field, options);
      expect(pooled).toEqual(one);
    }
    const flat = new Float64Array(61 * 47).fill(3);
    expect(await pool.contours(grid, flat)).toEqual(contours.contourField(grid, flat));
  });

  it('refuses what resultBundle refuses, with the same error (a head beyond single precision)', async () => {
    const result = await pipeline.solveScenarioFile(data('valley.json'));
    const k = result.head.findIndex((h) => Number.isFinite(h));
    result.head[k] = 1e300;
    let serialError: unknown = null;
    try {
      files.resultBundle(result, '', {});
    } catch (error) {
      serialError = error;
    }
    expect(serialError).toBeInstanceOf(errors.PiezomapError);
    const pooled = files.resultBundleOnPool(result, '', {}, pool);
    await expect(pooled).rejects.toBeInstanceOf(errors.PiezomapError);
    await expect(pooled).rejects.toMatchObject({
      code: (serialError as InstanceType<Errors['PiezomapError']>).code,
      message: (serialError as Error).message,
    });
    // the pool stays usable after a refused job
    const grid = result.model.grid;
    const values = new Float64Array(grid.nx * grid.ny).fill(1);
    expect((await pool.geotiff(grid, values, { nodata: -9999 })).length).toBeGreaterThan(0);
  }, 60_000);

  it('encodes a large raster in bands of tile rows on the threads to the bytes of the one-thread encoder, and refuses alike', async () => {
    const write = (await import(dist('raster/write.js').href)) as typeof import('../../src/raster/write.js');
    // 1000 x 700 = 700 000 cells: above the size the pool splits (BAND_MIN_CELLS); 3 tile rows of 256, the last partial
    const nx = 1000;
    const ny = 700;
    const grid = { nx, ny, transform: [500000, 10, 0, 4107000, 0, -10] as const, crs: { epsg: 32633, geographic: false, geoKeys: {} } };
    const values = new Float64Array(nx * ny);
    for (let p = 0; p < values.length; p++) values[p] = 40 + Math.sin(p / 997) * 3 + ((p * 7919) % 101) * 1e-4;
    values[12_345] = Number.NaN;
    for (const options of [{ nodata: -9999 }, { nodata: -9999, compressionLevel: 4, runLengthOnly: true }, { nodata: -1, tileSize: 128 }]) {
      const whole = write.encodeFloat32GeoTiff(grid, values, options);
      expect(same(await pool.geotiff(grid, values, options), whole)).toBe(true);
    }
    const bad = Float64Array.from(values);
    bad[ny * nx - 5] = 1e300;
    let serialError: unknown = null;
    try {
      write.encodeFloat32GeoTiff(grid, bad, { nodata: -9999 });
    } catch (error) {
      serialError = error;
    }
    await expect(pool.geotiff(grid, bad, { nodata: -9999 })).rejects.toMatchObject({ message: (serialError as Error).message });
  }, 60_000);
});
