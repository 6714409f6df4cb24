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
import { readRaster, readRasterHeader } from '../../src/raster/read.js';

const here = dirname(fileURLToPath(import.meta.url));
/** What a caller (the scenario loader) lets one raster take: half the machine's memory. */
const memoryBudget = totalmem() / 2;
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
  /** GDAL's per-band scale and offset (null when unset) and unit type. */
  scale: number | null;
  offset: number | null;
  unit: string | null;
  /** Whether GDAL reports a per-dataset mask band (an internal mask). */
  masked: boolean;
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

  it('readRaster reports the scale, offset and unit GDAL reports, and applies them to the values (checked above)', async () => {
    for (const record of expected.good) {
      const raster = await readRaster(join(fixtures, record.file));
      expect(raster.scale, record.file).toBe(record.scale ?? 1);
      expect(raster.offset, record.file).toBe(record.offset ?? 0);
      expect(raster.unit, record.file).toBe(record.unit);
      expect(raster.masked, record.file).toBe(record.masked);
    }
    // the fixtures include the cases of the issue: UInt16 scaled by 0.001 (mm/d as m/d) and Int16 with an offset
    const u16 = expected.good.find((r) => r.file === 'u16-scale.tif')!;
    expect([u16.gdalType, u16.scale, u16.offset]).toEqual(['UInt16', 0.001, 0]);
    const i16 = expected.good.find((r) => r.file === 'i16-scale-offset.tif')!;
    expect([i16.gdalType, i16.scale, i16.offset, i16.unit]).toEqual(['Int16', 0.004, 100, 'm']);
  });

  it("readRaster counts the cells of an internal mask as missing, as GDAL's mask band does", async () => {
    const masked = expected.good.filter((r) => r.masked);
    expect(masked.map((r) => r.file).sort()).toEqual(['f32-mask-strip-ovr.tif', 'f32-mask-tiled.tif', 'f32-translate-mask.tif']);
    for (const record of masked) {
      // the script masks 4 x 11 + 37 + 1 = 82 cells; f32-mask-tiled.tif has 14 nodata cells besides, 1 of them masked too
      expect(record.bands[0]!.missing, record.file).toBe(record.file === 'f32-mask-tiled.tif' ? 95 : 82);
      const raster = await readRaster(join(fixtures, record.file));
      let missing = 0;
      for (const v of raster.values) if (Number.isNaN(v)) missing++;
      expect(missing, record.file).toBe(record.bands[0]!.missing);
    }
  });

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
    'palette.tif': /colour table.*class/,
    'alpha.tif': /alpha band.*mask/,
    'pam-scale.tif': /pam-scale\.tif\.aux\.xml.*Scale/,
    'external-mask.tif': /external-mask\.tif\.msk.*mask/,
  };

  it('covers every bad fixture the script wrote', () => {
    expect(expected.bad.map((b) => b.file).sort()).toEqual(Object.keys(problem).sort());
  });

  for (const record of expected.bad) {
    // the memory refusal depends on the machine: with more than ~34 GB it would be read (and take 17 GB)
    const needsSmallMachine = record.file === 'huge-memory.tif' && memoryBudget > 46000 * 46000 * 8;
    it.skipIf(needsSmallMachine)(`readRaster(${record.file}) is refused: ${record.why}`, async () => {
      const error = await readError(join(fixtures, record.file), { label: `rasters/${record.file}`, maxBytes: memoryBudget });
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

  it('readRaster refuses block offsets into the header, an IFD or another block, naming the file and the block', async () => {
    mkdirSync(tmp, { recursive: true });
    const source = new Uint8Array(readFileSync(join(fixtures, 'f32-strip-none.tif')));
    // the strips of this uncompressed file (classic little-endian TIFF 6.0 layout: header, IFD entries of 12 bytes)
    const view = new DataView(source.buffer);
    const ifd = view.getUint32(4, true);
    const entries = view.getUint16(ifd, true);
    const entryOf = (tag: number) => {
      for (let k = 0; k < entries; k++) if (view.getUint16(ifd + 2 + 12 * k, true) === tag) return ifd + 2 + 12 * k;
      throw new Error(`no tag ${tag}`);
    };
    const offsetsAt = view.getUint32(entryOf(273) + 8, true);
    expect(offsetsAt).toBeGreaterThan(0);
    const strip = (bytes: Uint8Array, i: number) => new DataView(bytes.buffer).getUint32(offsetsAt + 4 * i, true);
    const cases: Array<[string, (bytes: Uint8Array) => void, RegExp]> = [
      ['strip-in-header', (b) => new DataView(b.buffer).setUint32(offsetsAt + 4 * 2, 0, true), /strip 2 .*overlaps the TIFF header/],
      [
        'strip-in-ifd',
        (b) => new DataView(b.buffer).setUint32(offsetsAt + 4 * 1, ifd, true),
        /strip 1 .*overlaps the image file directory 0/,
      ],
      [
        'strip-in-offsets',
        (b) => new DataView(b.buffer).setUint32(offsetsAt + 4 * 3, offsetsAt, true),
        /strip 3 .*overlaps the values of tag 273/,
      ],
      ['strips-overlap', (b) => new DataView(b.buffer).setUint32(offsetsAt + 4 * 4, strip(b, 3) + 8, true), /strip 4 .*overlaps strip 3/],
      // the same class of damage in the tags: the tie point's doubles read from the IFD's own entries
      [
        'tiepoint-in-ifd',
        (b) => new DataView(b.buffer).setUint32(entryOf(33922) + 8, ifd + 2, true),
        /the values of tag 33922 .*overlap the image file directory 0/,
      ],
    ];
    for (const [name, damage, message] of cases) {
      const bytes = source.slice();
      damage(bytes);
      const path = join(tmp, `${name}.tif`);
      writeFileSync(path, bytes);
      const error = await readError(path, { label: `rasters/${name}.tif` });
      expect(error.code, name).toBe('input');
      expect(error.message, name).toMatch(/^rasters\/.*\.tif: the file is damaged: /);
      expect(error.message, name).toMatch(message);
    }
  });

  it('readRaster refuses what changes the meaning of the samples and is not applied: a second page, bit order, orientation, sub-images, a looping IFD chain', async () => {
    mkdirSync(tmp, { recursive: true });
    const source = new Uint8Array(readFileSync(join(fixtures, 'f32-strip-none.tif')));
    const view = new DataView(source.buffer);
    const ifd = view.getUint32(4, true);
    const entries = view.getUint16(ifd, true);
    const tableBytes = 2 + 12 * entries + 4;
    // a second page: a copy of the IFD (same tags, no NewSubfileType: a full-resolution image) appended to the file,
    // with its own copy of the strips so that no block is shared
    const paged = new Uint8Array(source.length + tableBytes + 4096);
    paged.set(source);
    const pv = new DataView(paged.buffer);
    const copyAt = source.length + (source.length % 2);
    paged.set(source.subarray(ifd, ifd + tableBytes), copyAt);
    pv.setUint32(ifd + 2 + 12 * entries, copyAt, true); // first IFD -> copy
    pv.setUint32(copyAt + 2 + 12 * entries, 0, true);
    const entryIn = (at: number, tag: number) => {
      for (let k = 0; k < entries; k++) if (pv.getUint16(at + 2 + 12 * k, true) === tag) return at + 2 + 12 * k;
      throw new Error(`no tag ${tag}`);
    };
    // the copy's strip offsets: a new array after the copy, pointing at a copy of the pixel data
    const stripsAt = copyAt + tableBytes;
    const pixelsAt = stripsAt + 20;
    const firstStrip = view.getUint32(view.getUint32(entryIn(ifd, 273) + 8, true), true);
    const pixelBytes = 37 * 23 * 4;
    const grown = new Uint8Array(pixelsAt + pixelBytes);
    grown.set(paged.subarray(0, pixelsAt));
    grown.set(source.subarray(firstStrip, firstStrip + pixelBytes), pixelsAt);
    const gv = new DataView(grown.buffer);
    for (let i = 0; i < 5; i++) gv.setUint32(stripsAt + 4 * i, pixelsAt + i * 5 * 37 * 4, true);
    gv.setUint32(entryIn(copyAt, 273) + 8, stripsAt, true);

    // FillOrder 2 and Orientation 3 in place of the PlanarConfiguration entry (default 1 when absent)
    const retagged = (tag: number, value: number) => {
      const bytes = source.slice();
      const at = entryIn(ifd, 284);
      const v = new DataView(bytes.buffer);
      v.setUint16(at, tag, true);
      v.setUint16(at + 8, value, true);
      return bytes;
    };
    const cases: Array<[string, Uint8Array, RegExp]> = [
      ['two-pages', grown, /further full-resolution images \(pages\)/],
      ['fill-order', retagged(266, 2), /bits of each byte are stored in reverse order \(FillOrder 2\)/],
      ['orientation', retagged(274, 3), /another order than top-left first \(Orientation 3\)/],
      ['sub-images', retagged(330, 8), /sub-images \(SubIFDs\)/],
      [
        'ifd-loop',
        (() => {
          const bytes = source.slice();
          new DataView(bytes.buffer).setUint32(ifd + 2 + 12 * entries, ifd, true); // the next IFD is this one
          return bytes;
        })(),
        /the file is damaged: its image file directories loop back or overlap/,
      ],
    ];
    for (const [name, bytes, message] of cases) {
      const path = join(tmp, `${name}.tif`);
      writeFileSync(path, bytes);
      const error = await readError(path, { label: `rasters/${name}.tif` });
      expect(error.code, name).toBe('input');
      expect(error.message, name).toMatch(new RegExp(`^rasters/${name}\\.tif: `));
      expect(error.message, name).toMatch(message);
    }
  });

  it('readRaster refuses a damaged internal mask: a missing mask block, a mask block over an image block', async () => {
    mkdirSync(tmp, { recursive: true });
    const source = new Uint8Array(readFileSync(join(fixtures, 'f32-mask-strip-ovr.tif')));
    const view = new DataView(source.buffer);
    // walk the IFDs (classic little-endian TIFF 6.0) and find the image's strips and the mask's (NewSubfileType 4)
    const tagsOf = (ifd: number) => {
      const tags = new Map<number, { at: number; count: number; value: number }>();
      const n = view.getUint16(ifd, true);
      for (let k = 0; k < n; k++) {
        const at = ifd + 2 + 12 * k;
        tags.set(view.getUint16(at, true), { at, count: view.getUint32(at + 4, true), value: view.getUint32(at + 8, true) });
      }
      return { tags, next: view.getUint32(ifd + 2 + 12 * n, true) };
    };
    const first = tagsOf(view.getUint32(4, true));
    let maskTags: Map<number, { at: number; count: number; value: number }> | null = null;
    for (let ifd = first.next; ifd > 0; ) {
      const { tags, next } = tagsOf(ifd);
      if (tags.get(254)?.value === 4) maskTags = tags;
      ifd = next;
    }
    expect(maskTags).not.toBeNull();
    // an array of LONGs or SHORTs: stored apart when longer than 4 bytes
    const list = (entry: { at: number; count: number; value: number }, type: number) =>
      entry.count * (type === 3 ? 2 : 4) > 4 ? entry.value : entry.at + 8;
    const maskCounts = maskTags!.get(279)!;
    const maskOffsets = maskTags!.get(273)!;
    const imageOffsets = first.tags.get(273)!;
    const typeOf = (entry: { at: number }) => view.getUint16(entry.at + 2, true);
    const write = (bytes: Uint8Array, entry: { at: number; count: number; value: number }, index: number, value: number) => {
      const v = new DataView(bytes.buffer);
      const at = list(entry, typeOf(entry));
      if (typeOf(entry) === 3) v.setUint16(at + 2 * index, value, true);
      else v.setUint32(at + 4 * index, value, true);
    };
    const imageStrip1 = new DataView(source.buffer).getUint32(list(imageOffsets, typeOf(imageOffsets)) + 4, true);
    const cases: Array<[string, (b: Uint8Array) => void, RegExp]> = [
      ['mask-missing-block', (b) => write(b, maskCounts, 0, 0), /mask strip 0 is missing/],
      [
        'mask-over-image',
        (b) => write(b, maskOffsets, 0, imageStrip1),
        /the file is damaged: (mask strip 0 .*overlaps strip 1|strip 1 .*overlaps mask strip 0)/,
      ],
    ];
    for (const [name, damage, message] of cases) {
      const bytes = source.slice();
      damage(bytes);
      const path = join(tmp, `${name}.tif`);
      writeFileSync(path, bytes);
      const error = await readError(path, { label: `rasters/${name}.tif` });
      expect(error.code, name).toBe('input');
      expect(error.message, name).toMatch(message);
    }
  });
});

describe('readRasterHeader reads size and sample type without decoding', () => {
  it('readRasterHeader reports what GDAL reports for the size, bands and type, and what reading would take', async () => {
    for (const record of expected.good) {
      const header = await readRasterHeader(join(fixtures, record.file));
      expect([header.width, header.height, header.bandCount], record.file).toEqual([record.width, record.height, record.bandCount]);
      expect(gdalTypeName(header.sampleType, record.signedByte), record.file).toBe(record.gdalType);
      // the decoded band as doubles is held; the file and one block only while reading
      expect(header.valueBytes).toBe(record.width * record.height * 8);
      expect(header.readBytes).toBeGreaterThan(header.valueBytes);
    }
  });

  it('readRasterHeader sizes a file claiming 46000 x 46000 Float64 cells from its few bytes, and readRaster refuses it under a budget', async () => {
    const path = join(fixtures, 'huge-memory.tif');
    const header = await readRasterHeader(path);
    expect([header.width, header.height, header.sampleType]).toEqual([46000, 46000, 'Float64']);
    expect(header.valueBytes).toBe(46000 * 46000 * 8);
    // 16.9 GB of doubles, one 23000 x 23000 Float64 tile (4.2 GB) and the file
    const error = await readError(path, { label: 'rasters/huge-memory.tif', maxBytes: 1e9 });
    expect(error.message).toMatch(/rasters\/huge-memory\.tif: 46000 x 46000 cells need about 21\.2 GB to read, more than the 1\.0 GB/);
  });
});
