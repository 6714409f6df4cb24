/**
 * readRaster against GDAL: every fixture in test/fixtures/rasters was written by GDAL 3.6 (scripts/make-raster-fixtures.sh),
 * which also recorded what GDAL reads back from it (size, geotransform, CRS, nodata, every value, a SHA-256 of the
 * values) in expected.json. Each check below compares our reader with that record, never with itself.
 */
import { createHash } from 'node:crypto';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { totalmem } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { fromArrayBuffer } from 'geotiff';
import { describe, expect, it } from 'vitest';
import { PiezomapError } from '../../src/errors.js';
import { readRaster } from '../../src/raster/read.js';
import { rasterSizeLimit } from '../../src/memory.js';

const here = dirname(fileURLToPath(import.meta.url));
const fixtures = join(here, '..', 'fixtures', 'rasters');
const tmp = join(here, '..', 'tmp', 'raster-read');

interface BandRecord {
  band: number;
  count: number;
  missing: number;
  sha256: string;
  values?: Array<number | null>;
  samples?: Array<[number, number, number | null]>;
}
interface GoodRecord {
  file: string;
  width: number;
  height: number;
  bandCount: number;
  gdalType: string;
  signedByte: boolean;
  geoTransform: number[];
  epsg: number | null;
  geographic: boolean | null;
  nodata: number | 'nan' | null;
  float32Values: boolean;
  bands: BandRecord[];
}
interface BadRecord {
  file: string;
  why: string;
  gdal: string;
}
const expected = JSON.parse(readFileSync(join(fixtures, 'expected.json'), 'utf8')) as {
  gdalVersion: string;
  good: GoodRecord[];
  bad: BadRecord[];
};

/** GDAL's type names for ours (GDAL 3.6 has no Int8: signed bytes are Byte with PIXELTYPE=SIGNEDBYTE). */
function gdalTypeName(sampleType: string, signedByte: boolean): string {
  if (sampleType === 'UInt8') return 'Byte';
  if (sampleType === 'Int8') return signedByte ? 'Byte' : 'Int8';
  return sampleType;
}

/** SHA-256 of float64 little-endian values with NaN as the canonical quiet NaN, as the fixture script computes it. */
function canonicalSha256(values: Float64Array): string {
  const bytes = new Uint8Array(values.length * 8);
  const view = new DataView(bytes.buffer);
  for (let i = 0; i < values.length; i++) {
    const v = values[i]!;
    if (Number.isNaN(v)) {
      view.setUint32(8 * i, 0, true);
      view.setUint32(8 * i + 4, 0x7ff80000, true);
    } else {
      view.setFloat64(8 * i, v, true);
    }
  }
  return createHash('sha256').update(bytes).digest('hex');
}

/** The first cells where `values` differs from GDAL's record (for a readable failure). */
function differences(values: Float64Array, record: BandRecord, float32: boolean): string[] {
  const out: string[] = [];
  const want = record.values!;
  for (let i = 0; i < want.length && out.length < 5; i++) {
    const w = want[i];
    const expectedValue = w === null || w === undefined ? Number.NaN : float32 ? Math.fround(w) : w;
    if (!Object.is(values[i], expectedValue) && !(Number.isNaN(values[i]!) && Number.isNaN(expectedValue))) {
      out.push(`cell ${i}: ${values[i]} vs GDAL ${expectedValue}`);
    }
  }
  return out;
}

async function readError(path: string, options: Parameters<typeof readRaster>[1] = {}): Promise<PiezomapError> {
  try {
    await readRaster(path, options);
  } catch (thrown) {
    expect(thrown).toBeInstanceOf(PiezomapError);
    return thrown as PiezomapError;
  }
  throw new Error(`${path} was read without error`);
}

describe('readRaster reads every GDAL-written layout as GDAL does', () => {
  it('has the fixtures the script records', () => {
    expect(expected.good.length).toBeGreaterThanOrEqual(20);
    expect(expected.bad.length).toBeGreaterThanOrEqual(12);
  });

  for (const record of expected.good) {
    it(`readRaster(${record.file}) matches GDAL ${expected.gdalVersion}: size, geotransform, CRS, nodata, values`, async () => {
      const raster = await readRaster(join(fixtures, record.file));
      expect([raster.grid.nx, raster.grid.ny]).toEqual([record.width, record.height]);
      // geotransform exactly as GDAL reports it (PixelIsPoint and ModelTransformation included)
      expect([...raster.grid.transform]).toEqual(record.geoTransform);
      expect(raster.grid.crs?.epsg ?? null).toBe(record.epsg);
      expect(raster.grid.crs?.geographic ?? null).toBe(record.geographic);
      expect(raster.bandCount).toBe(record.bandCount);
      expect(gdalTypeName(raster.sampleType, record.signedByte)).toBe(record.gdalType);
      if (record.nodata === 'nan') expect(raster.nodata).toBeNaN();
      else expect(raster.nodata).toBe(record.nodata);

      const band1 = record.bands[0]!;
      expect(raster.values.length).toBe(band1.count);
      if (band1.values) expect(differences(raster.values, band1, record.float32Values)).toEqual([]);
      for (const [row, col, value] of band1.samples ?? []) {
        const got = raster.values[row * record.width + col]!;
        if (value === null) expect(got).toBeNaN();
        else expect(got).toBe(value);
      }
      let missing = 0;
      for (const v of raster.values) if (Number.isNaN(v)) missing++;
      expect(missing).toBe(band1.missing);
      expect(canonicalSha256(raster.values)).toBe(band1.sha256);
    });
  }

  it('readRaster selects further bands with `band`, in both interleavings, as GDAL reads them', async () => {
    for (const file of ['f32-3band-pixel.tif', 'f32-3band-band.tif']) {
      const record = expected.good.find((r) => r.file === file)!;
      for (const bandRecord of record.bands) {
        const raster = await readRaster(join(fixtures, file), { band: bandRecord.band });
        expect(canonicalSha256(raster.values), `${file} band ${bandRecord.band}`).toBe(bandRecord.sha256);
      }
    }
  });

  it('readRaster keeps the GeoKeys of a user-defined CRS (code 32767) and reports no EPSG code', async () => {
    const raster = await readRaster(join(fixtures, 'f32-userdefined-crs.tif'));
    const keys = raster.grid.crs!.geoKeys;
    expect(raster.grid.crs!.epsg).toBeNull();
    expect(keys.ProjectedCSTypeGeoKey).toBe(32767);
    // the parameters given to GDAL when the fixture was made (see the script): +lon_0=13.7 +k=0.9997 +x_0=400000 +y_0=-4000000
    expect(keys.ProjNatOriginLongGeoKey).toBe(13.7);
    expect(keys.ProjScaleAtNatOriginGeoKey).toBe(0.9997);
    expect(keys.ProjFalseEastingGeoKey).toBe(400000);
    expect(keys.ProjFalseNorthingGeoKey).toBe(-4000000);
    expect(raster.grid.crs!.linearUnit).toBe('metre');
  });

  it('readRaster shifts a PixelIsPoint origin half a cell as GDAL does, where geotiff.js reports the raw tie point', async () => {
    const path = join(fixtures, 'f32-pixelispoint.tif');
    const bytes = readFileSync(path);
    const image = await (await fromArrayBuffer(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.length))).getImage(0);
    // geotiff.js: the centre of cell (0,0); GDAL (expected.json): its outer corner
    expect(image.getOrigin().slice(0, 2)).toEqual([500025, 4109975]);
    const raster = await readRaster(path);
    expect(raster.grid.transform[0]).toBe(500000);
    expect(raster.grid.transform[3]).toBe(4110000);
  });
});

describe('readRaster refuses bad files with an input error naming the file', () => {
  // what each message must say besides the file name
  const problem: Record<string, RegExp> = {
    'not-a-tiff.tif': /not a TIFF/,
    'empty.tif': /empty/,
    'no-georef.tif': /no georeferencing/,
    'rotated.tif': /rotated/,
    'negative-pixel-width.tif': /pixel width is negative/,
    'zero-pixel-size.tif': /pixel width is zero/,
    'f64-pred2.tif': /Float64.*PREDICTOR=2/,
    'f32-bigendian-pred3.tif': /big-endian.*PREDICTOR=3/,
    'cfloat32.tif': /complex/,
    'bit1.tif': /1-bit/,
    'i64.tif': /64-bit signed integer/,
    'truncated-strip.tif': /cut short: strip \d+ ends at byte \d+/,
    'truncated-tile.tif': /cut short: tile \d+ ends at byte \d+/,
    'huge-cells.tif': /100000 x 100000.*2\^31/,
    'huge-memory.tif': /46000 x 46000 cells need about .* memory/,
  };

  it('covers every bad fixture the script wrote', () => {
    expect(expected.bad.map((b) => b.file).sort()).toEqual(Object.keys(problem).sort());
  });

  for (const record of expected.bad) {
    // the memory refusal depends on the machine: with more than ~34 GB it would be read (and take 17 GB)
    const needsSmallMachine = record.file === 'huge-memory.tif' && totalmem() / 2 > 46000 * 46000 * 8;
    it.skipIf(needsSmallMachine)(`readRaster(${record.file}) is refused: ${record.why}`, async () => {
      // The size limit the scenario loader gives the reader (half the run's memory limit).
      const error = await readError(join(fixtures, record.file), { label: `rasters/${record.file}`, sizeLimit: rasterSizeLimit() });
      expect(error.code).toBe('input');
      expect(error.message).toContain(`rasters/${record.file}`);
      expect(error.detail.file).toBe(`rasters/${record.file}`);
      expect(error.message).toMatch(problem[record.file]!);
    });
  }

  it('readRaster refuses a band beyond the count and a band number below 1', async () => {
    const path = join(fixtures, 'f32-3band-pixel.tif');
    const beyond = await readError(path, { band: 4 });
    expect(beyond.code).toBe('input');
    expect(beyond.message).toMatch(/band 4 requested but the file has 3 band/);
    expect(beyond.message).toContain(path);
    const zero = await readError(path, { band: 0 });
    expect(zero.code).toBe('input');
  });

  it('readRaster names a missing file and suggests checking relative paths', async () => {
    const error = await readError(join(fixtures, 'no-such-file.tif'), { label: 'k.tif' });
    expect(error.code).toBe('input');
    expect(error.message).toBe('k.tif: file not found');
    expect(error.detail.hint).toMatch(/relative to the scenario file/);
  });

  it('readRaster reports a damaged DEFLATE tile as an input error, not a zlib exception', async () => {
    mkdirSync(tmp, { recursive: true });
    const bytes = new Uint8Array(readFileSync(join(fixtures, 'f32-tiled-deflate-pred3.tif')));
    // overwrite the middle of the last tile's compressed stream (file size unchanged, so the bounds check passes)
    bytes.fill(0xff, bytes.length - 300, bytes.length - 200);
    const path = join(tmp, 'damaged-deflate.tif');
    writeFileSync(path, bytes);
    const error = await readError(path);
    expect(error.code).toBe('input');
    expect(error.message).toContain(path);
    expect(error.message).toMatch(/tile \d+ cannot be decompressed|holds \d+ bytes where/);
  });
});
