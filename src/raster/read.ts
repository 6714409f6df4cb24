/**
 * Read one band of a GeoTIFF into doubles, with its grid (size, geotransform as GDAL reports it, CRS) and nodata.
 *
 * geotiff.js parses the TIFF structure (classic and BigTIFF IFDs, tags) and supplies the PackBits decompressor;
 * DEFLATE goes through node:zlib, ZSTD through zstddec with the output bounded by the block size, LZW through our own
 * bounded decoder (lzw.ts). Block assembly, predictors, byte order, sample conversion and
 * nodata masking are done here, in one pass per block row, because geotiff 3.0.5 gets several of them wrong
 * (horizontal differencing on big-endian files, Float64 with predictor 2, silently zero-filled truncated blocks).
 *
 * What GDAL applies when it reads a file is applied here too, or the file is refused; nothing is ignored:
 * - per-band scale and offset (GDAL_METADATA items with role "scale"/"offset"): value = stored x scale + offset,
 *   nodata compared with the stored value first;
 * - an internal mask (an IFD with the NewSubfileType mask bit, as GDAL_TIFF_INTERNAL_MASK and `gdal_translate -mask`
 *   write): masked cells are missing;
 * - side files GDAL reads (`.aux.xml` with scale, offset, nodata or georeferencing; `.msk` masks), colour tables,
 *   further pages, bit-reversed fill order and orientations other than top-left: refused.
 * Block offsets into the file's own structure or into other blocks are refused as damage (structure.ts).
 *
 * Memory: the reader enforces only the limit its caller passes (`maxBytes`); the memory policy (src/memory.ts) and
 * the scenario loader decide it, from `readRasterHeader` of every raster before any is decoded.
 * Everything a user can get wrong ends as PiezomapError('input') naming the file.
 */
import { open, readFile, stat } from 'node:fs/promises';
import { createRequire } from 'node:module';
import { basename } from 'node:path';
import { inflateSync } from 'node:zlib';
import { fromArrayBuffer, fromFile, getDecoder } from 'geotiff';
import type { GeoTIFF, GeoTIFFImage } from 'geotiff';
import { PiezomapError, describeThrown, inputError } from '../errors.js';
import { ZSTDDecoder } from 'zstddec/stream';
import { decodeLzw } from './lzw.js';
import type { Grid } from '../grid.js';
import { RASTER_PIXEL_IS_POINT, crsFromGeoKeys, linearUnitName, parseGeoKeyDirectory } from './geokeys.js';
import type { GeoKeyRecord } from './geokeys.js';
import type { RasterData } from './types.js';
import { findBlockOverlap, findValueOverlap, tiffStructure } from './structure.js';

export interface ReadRasterOptions {
  /** 1-based band number, default 1. */
  band?: number;
  /** How messages name the file, default the path. */
  label?: string;
  /**
   * Bytes the read may take at its peak (the band as doubles, the file's bytes, one decoded block); a larger raster
   * is refused from its header, before anything is allocated. No limit when absent: the caller's memory policy
   * decides (src/memory.ts).
   */
  maxBytes?: number;
}

/** What reading a raster will take, from its header alone (nothing decoded). */
export interface RasterHeader {
  path: string;
  width: number;
  height: number;
  bandCount: number;
  /** e.g. "Float32", "Int16". */
  sampleType: string;
  fileBytes: number;
  /** The band as doubles: held once read. */
  valueBytes: number;
  /** The peak while reading: the values, the file's bytes and one decoded block. */
  readBytes: number;
}

/** Cells beyond this are refused outright (typed-array lengths and index arithmetic stay in int32 range). */
export const MAX_CELLS = 2 ** 31 - 1;

/** One ZSTD decoder (a WebAssembly instance) for every file, made on first use. */
const zstd = new ZSTDDecoder();

/** TIFF Compression codes we decode (TIFF 6.0 section 3, 5, 9; Adobe DEFLATE; ZSTD as registered by GDAL/libtiff). */
const COMPRESSION_NAMES: ReadonlyMap<number, string> = new Map([
  [1, 'none'],
  [5, 'LZW'],
  [8, 'DEFLATE'],
  [32946, 'DEFLATE'],
  [32773, 'PackBits'],
  [50000, 'ZSTD'],
]);

const CONVERT_HINT = 'rewrite it as a plain GeoTIFF, e.g. `gdal_translate -ot Float32 -co COMPRESS=DEFLATE in.tif out.tif`';

/** The numeric type of a band, decided from SampleFormat and BitsPerSample (TIFF 6.0 section 19). */
type SampleKind = 'UInt8' | 'Int8' | 'UInt16' | 'Int16' | 'UInt32' | 'Int32' | 'Float32' | 'Float64';

interface Layout {
  width: number;
  height: number;
  samplesPerPixel: number;
  /** 1 = samples of a pixel together (chunky), 2 = one plane per sample. */
  planar: 1 | 2;
  kind: SampleKind;
  bytesPerSample: number;
  littleEndian: boolean;
  compression: number;
  predictor: 1 | 2 | 3;
  tiled: boolean;
  blockWidth: number;
  blockHeight: number;
  blocksAcross: number;
  blocksDown: number;
  /** Bytes of one row of a decoded block, and of a whole decoded block. */
  rowBytes: number;
  blockBytes: number;
  /** Bits per sample: 8 to 64, or 1 for a mask. */
  bits: number;
  offsets: number[];
  byteCounts: number[];
}

export async function readRaster(path: string, options: ReadRasterOptions = {}): Promise<RasterData> {
  const label = options.label ?? path;
  const band = options.band ?? 1;
  if (!Number.isInteger(band) || band < 1) {
    throw inputError(`${label}: band must be a whole number from 1, got ${String(band)}`, { file: label });
  }
  const maxBytes = options.maxBytes ?? Infinity;
  const size = await fileSize(path, label);
  if (size > maxBytes) {
    throw inputError(`${label}: the file is ${formatBytes(size)}, more than the ${formatBytes(maxBytes)} of memory a raster may take`, {
      file: label,
      hint: 'clip the raster to the model area or coarsen it before modelling',
    });
  }
  await refuseSideFiles(path, label);
  const bytes = await readBytes(path, label);
  try {
    return await decodeGeoTiff(path, label, bytes, band, maxBytes);
  } catch (thrown) {
    throw asDamage(thrown, label);
  }
}

/**
 * Size and sample type of a raster from its header, reading only the TIFF structure (not the image data), so that a
 * caller can check what a set of rasters will take before decoding any of them.
 */
export async function readRasterHeader(path: string, options: { label?: string } = {}): Promise<RasterHeader> {
  const label = options.label ?? path;
  const size = await fileSize(path, label);
  const handle = await open(path, 'r').catch((thrown: unknown) => {
    throw fileSystemError(thrown, label);
  });
  try {
    const start = new Uint8Array(16);
    await handle.read(start, 0, 16, 0);
    checkTiffSignature(start.subarray(0, Math.min(16, size)), label);
    // Reads past the end of a file come back short, not as errors: check that the first IFD lies in the file.
    const view = new DataView(start.buffer);
    const little = start[0] === 0x49;
    const big = view.getUint16(2, little) === 43;
    const ifd = big ? Number(view.getBigUint64(8, little)) : view.getUint32(4, little);
    const entries = new Uint8Array(8);
    const got = ifd >= 8 ? (await handle.read(entries, 0, big ? 8 : 2, ifd)).bytesRead : 0;
    const count = big ? Number(new DataView(entries.buffer).getBigUint64(0, little)) : new DataView(entries.buffer).getUint16(0, little);
    if (got < (big ? 8 : 2) || ifd + count * (big ? 20 : 12) > size) {
      throw inputError(
        `${label}: the TIFF structure is damaged or unreadable (its first image file directory at byte ${ifd} lies outside the ${size}-byte file)`,
        {
          file: label,
          hint: 'check that the file was copied completely; re-export it from the GIS if it still fails',
        },
      );
    }
  } finally {
    await handle.close();
  }
  let tiff: GeoTIFF | null = null;
  try {
    tiff = await fromFile(path);
    const layout = await readLayout(await tiff.getImage(0), label, size);
    return headerOf(path, layout, size);
  } catch (thrown) {
    throw asDamage(thrown, label);
  } finally {
    await tiff?.close();
  }
}

function headerOf(path: string, layout: Layout, fileBytes: number): RasterHeader {
  const valueBytes = layout.width * layout.height * 8;
  return {
    path,
    width: layout.width,
    height: layout.height,
    bandCount: layout.samplesPerPixel,
    sampleType: layout.kind,
    fileBytes,
    valueBytes,
    readBytes: valueBytes + layout.blockBytes + fileBytes,
  };
}

/** geotiff.js and the decompressors throw Errors, RangeErrors and sometimes plain strings: all are damage here. */
function asDamage(thrown: unknown, label: string): PiezomapError {
  if (thrown instanceof PiezomapError) return thrown;
  return inputError(`${label}: the TIFF structure is damaged or unreadable (${describeThrown(thrown)})`, {
    file: label,
    hint: 'check that the file was copied completely; re-export it from the GIS if it still fails',
  });
}

async function fileSize(path: string, label: string): Promise<number> {
  let size: number;
  try {
    const info = await stat(path);
    if (info.isDirectory()) throw inputError(`${label}: is a folder, not a GeoTIFF file`, { file: label });
    size = info.size;
  } catch (thrown) {
    if (thrown instanceof PiezomapError) throw thrown;
    throw fileSystemError(thrown, label);
  }
  if (size === 0) throw inputError(`${label}: the file is empty (0 bytes)`, { file: label, hint: 'export the raster again' });
  return size;
}

async function readBytes(path: string, label: string): Promise<Uint8Array> {
  let bytes: Uint8Array;
  try {
    const buffer = await readFile(path);
    // a plain Uint8Array view: Buffer's slice() shares memory, Uint8Array's copies, and decoders rely on copies
    bytes = new Uint8Array(buffer.buffer, buffer.byteOffset, buffer.byteLength);
  } catch (thrown) {
    throw fileSystemError(thrown, label);
  }
  checkTiffSignature(bytes, label);
  return bytes;
}

function checkTiffSignature(bytes: Uint8Array, label: string): void {
  const magic = bytes.length >= 4 ? `${String.fromCharCode(bytes[0]!, bytes[1]!)}${bytes[2]},${bytes[3]}` : '';
  const tiff = magic === 'II42,0' || magic === 'MM0,42' || magic === 'II43,0' || magic === 'MM0,43';
  if (!tiff || bytes.length < 8) {
    throw inputError(`${label}: not a TIFF file (it does not start with the TIFF byte-order mark and version)`, {
      file: label,
      hint: 'the rasters must be GeoTIFF (.tif); convert other formats with `gdal_translate -of GTiff`',
    });
  }
}

/** Elements of a GDAL side file (.aux.xml) that change what GDAL reads from the raster. */
const PAM_ELEMENTS = ['Scale', 'Offset', 'NoDataValue', 'UnitType', 'GeoTransform', 'SRS', 'GCPList', 'ColorTable', 'CategoryNames'];

/**
 * GDAL reads two side files beside a GeoTIFF and applies them: `NAME.aux.xml` (scale, offset, nodata, georeferencing
 * set on a file opened read-only) and `NAME.msk` (an external mask). Refuse the raster when they would change its
 * values or position; statistics and plain metadata in a .aux.xml change nothing and are accepted.
 */
async function refuseSideFiles(path: string, label: string): Promise<void> {
  const name = basename(path);
  const aux = await readFile(`${path}.aux.xml`, 'utf8').catch(() => null);
  if (aux !== null) {
    const found = PAM_ELEMENTS.filter((element) => new RegExp(`<${element}[\\s>/]`).test(aux));
    if (found.length > 0) {
      throw inputError(
        `${label}: its side file ${name}.aux.xml sets ${found.join(', ')}, which GDAL applies when reading; piezomap reads the GeoTIFF alone`,
        {
          file: label,
          hint: 'write them into the GeoTIFF (`gdal_translate in.tif out.tif` copies them in), or delete the side file if it is out of date',
        },
      );
    }
  }
  const mask = await stat(`${path}.msk`).then(
    () => true,
    () => false,
  );
  if (mask) {
    throw inputError(
      `${label}: has an external mask ${name}.msk, whose masked cells GDAL reads as missing; piezomap reads internal masks only`,
      {
        file: label,
        hint: 'make the mask internal: `gdal_translate --config GDAL_TIFF_INTERNAL_MASK YES in.tif out.tif`, or delete the .msk if it is not wanted',
      },
    );
  }
}

function fileSystemError(thrown: unknown, label: string): PiezomapError {
  const code = (thrown as { code?: string } | null)?.code;
  if (code === 'ENOENT') {
    return inputError(`${label}: file not found`, {
      file: label,
      hint: 'check the name; paths in a scenario are relative to the scenario file',
    });
  }
  if (code === 'EACCES' || code === 'EPERM') return inputError(`${label}: permission denied`, { file: label });
  return inputError(`${label}: cannot be read (${describeThrown(thrown)})`, { file: label });
}

async function decodeGeoTiff(path: string, label: string, bytes: Uint8Array, band: number, maxBytes: number): Promise<RasterData> {
  const structure = tiffStructure(bytes);
  if (structure.loops) {
    throw inputError(`${label}: the file is damaged: its image file directories loop back or overlap one another`, {
      file: label,
      hint: DAMAGE_HINT,
    });
  }
  const misplaced = findValueOverlap(structure.ranges);
  if (misplaced) {
    throw inputError(`${label}: the file is damaged: ${misplaced.values} overlap ${misplaced.overlaps}`, {
      file: label,
      hint: DAMAGE_HINT,
    });
  }
  const buffer = bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength) as ArrayBuffer;
  const tiff = await fromArrayBuffer(buffer);
  const image = await tiff.getImage(0);
  const layout = await readLayout(image, label, bytes.length);
  const needed = layout.width * layout.height * 8 + layout.blockBytes + bytes.length;
  if (needed > maxBytes) {
    throw inputError(
      `${label}: ${layout.width} x ${layout.height} cells need about ${formatBytes(needed)} to read, more than the ${formatBytes(maxBytes)} of memory a raster may take`,
      {
        file: label,
        hint: 'clip the raster to the model area or coarsen it (e.g. `gdalwarp -tr` with a larger cell size)',
      },
    );
  }
  if (band > layout.samplesPerPixel) {
    throw inputError(`${label}: band ${band} requested but the file has ${layout.samplesPerPixel} band(s)`, {
      file: label,
    });
  }
  await refuseIgnoredTags(image, label);
  const maskLayout = await findMask(tiff, structure.ifdCount, layout, label, bytes.length);
  refuseOverlappingBlocks(structure.ranges, layout, maskLayout, label);
  const metadata = await readBandMetadata(image, band - 1, label);
  const geoKeys = await readGeoKeys(image, label);
  const transform = await readGeotransform(image, label, geoKeys);
  const nodata = await readNodata(image, label);
  const grid: Grid = { nx: layout.width, ny: layout.height, transform, crs: crsFromGeoKeys(geoKeys) };
  const values = await decodeBand(bytes, layout, band - 1, nodata, label);
  if (maskLayout) await applyMask(bytes, maskLayout, values, label);
  const { scale, offset } = metadata;
  if (scale !== 1 || offset !== 0) {
    // GDAL's unscaled value; nodata and masked cells are NaN already and stay NaN
    for (let p = 0; p < values.length; p++) values[p] = values[p]! * scale + offset;
  }
  return {
    path,
    grid,
    values,
    nodata,
    bandCount: layout.samplesPerPixel,
    sampleType: layout.kind,
    scale,
    offset,
    unit: metadata.unit ?? verticalUnit(geoKeys),
    masked: maskLayout !== null,
  };
}

const require = createRequire(import.meta.url);

/**
 * The unit GDAL gives a band from the GeoKeys when the file sets none: that of VerticalUnitsGeoKey, else that of the
 * vertical CRS (VerticalCSTypeGeoKey, looked up in the offline EPSG index). Null when neither is known.
 */
function verticalUnit(geoKeys: GeoKeyRecord | null): string | null {
  const unitCode = geoKeys?.VerticalUnitsGeoKey;
  if (typeof unitCode === 'number') return linearUnitName(unitCode) ?? `EPSG unit ${unitCode}`;
  const crsCode = geoKeys?.VerticalCSTypeGeoKey;
  if (typeof crsCode !== 'number' || crsCode === 32767) return null;
  try {
    const entry = require(`epsg-index/s/${crsCode}.json`) as { unit?: unknown };
    return typeof entry.unit === 'string' ? entry.unit : null;
  } catch {
    return null; // an unknown code: no unit we could name
  }
}

const DAMAGE_HINT = 'the file is damaged; copy or export it again from the original';

/**
 * Baseline TIFF tags that change what the stored samples mean and that we do not apply: refuse the file rather than
 * read it differently from GDAL (TIFF 6.0 sections 3, 8; palette colour, bit order, orientation).
 */
async function refuseIgnoredTags(image: GeoTIFFImage, label: string): Promise<void> {
  const photometric = await numberTag(image, 'PhotometricInterpretation', 1);
  if (photometric === 3) {
    throw inputError(`${label}: the raster has a colour table (palette): its values are codes of colour classes, not the quantity itself`, {
      file: label,
      hint: 'convert the class codes into the values they stand for (e.g. with gdal_calc.py) and save a plain GeoTIFF without a colour table',
    });
  }
  const fillOrder = await numberTag(image, 'FillOrder', 1);
  if (fillOrder !== 1) {
    throw inputError(`${label}: the bits of each byte are stored in reverse order (FillOrder ${fillOrder})`, {
      file: label,
      hint: CONVERT_HINT,
    });
  }
  const orientation = await numberTag(image, 'Orientation', 1);
  if (orientation !== 1) {
    throw inputError(`${label}: the rows or columns are stored in another order than top-left first (Orientation ${orientation})`, {
      file: label,
      hint: CONVERT_HINT,
    });
  }
  // ExtraSamples 1 and 2: an alpha sample, which GDAL uses as the mask of the other bands (TIFF 6.0 section 18)
  const extra = (await numbersTag(image, 'ExtraSamples')) ?? [];
  if (extra.some((kind) => kind === 1 || kind === 2)) {
    throw inputError(`${label}: the file has an alpha band, which GDAL applies as a mask to the others; piezomap does not`, {
      file: label,
      hint: 'turn the alpha into nodata and keep the value band, e.g. `gdal_translate -b 1 -mask 2 -a_nodata -9999 in.tif out.tif`, or mark missing cells with nodata',
    });
  }
  if (image.getFileDirectory().hasTag('SubIFDs' as never)) {
    throw inputError(`${label}: the file holds sub-images (SubIFDs), which may be masks or further images; piezomap does not read them`, {
      file: label,
      hint: CONVERT_HINT,
    });
  }
}

/**
 * The layout of the internal mask of the full-resolution image, or null without one. Every further IFD must be an
 * overview (NewSubfileType bit 0, with or without its own mask) or that mask (bit 2, TIFF 6.0 section 8); another
 * full-resolution page is refused, since which page is meant cannot be told.
 */
async function findMask(tiff: GeoTIFF, ifdCount: number, layout: Layout, label: string, fileSize: number): Promise<Layout | null> {
  let mask: Layout | null = null;
  for (let i = 1; i < ifdCount; i++) {
    const image = await tiff.getImage(i);
    const subfileType = await numberTag(image, 'NewSubfileType', 0);
    if (subfileType & 1) continue; // a reduced-resolution copy (overview) or its mask: never read
    if (!(subfileType & 4)) {
      throw inputError(
        `${label}: the file holds further full-resolution images (pages) besides the first; which one is meant cannot be told`,
        {
          file: label,
          hint: 'save the wanted image alone, e.g. `gdal_translate in.tif out.tif` (the first image)',
        },
      );
    }
    if (mask) throw inputError(`${label}: the file holds two masks for its image`, { file: label, hint: DAMAGE_HINT });
    mask = await readMaskLayout(image, label, fileSize, layout);
  }
  return mask;
}

async function readMaskLayout(image: GeoTIFFImage, label: string, fileSize: number, main: Layout): Promise<Layout> {
  const refuse = (problem: string): PiezomapError =>
    inputError(`${label}: the internal mask ${problem}`, {
      file: label,
      hint: 'rewrite the file with its mask as GDAL writes it: `gdal_translate --config GDAL_TIFF_INTERNAL_MASK YES in.tif out.tif`, or set a nodata value instead',
    });
  const width = await numberTag(image, 'ImageWidth', 0);
  const height = await numberTag(image, 'ImageLength', 0);
  if (width !== main.width || height !== main.height)
    throw refuse(`is ${width} x ${height} cells where the image is ${main.width} x ${main.height}`);
  if ((await numberTag(image, 'SamplesPerPixel', 1)) !== 1) throw refuse('has more than one sample per cell');
  // A transparency mask holds 1 bit per cell (TIFF 6.0 section 8, PhotometricInterpretation 4), as GDAL writes it.
  const bits = await numberTag(image, 'BitsPerSample', 1);
  if (bits !== 1) throw refuse(`has ${bits}-bit samples (1 expected)`);
  const compression = await numberTag(image, 'Compression', 1);
  if (!COMPRESSION_NAMES.has(compression)) throw refuse(`uses an unsupported compression (TIFF code ${compression})`);
  if ((await numberTag(image, 'Predictor', 1)) !== 1) throw refuse('uses a predictor');
  if ((await numberTag(image, 'FillOrder', 1)) !== 1) throw refuse('stores its bits in reverse order');
  const blocks = await readBlocks(image, width, height, 1, label, fileSize, 'mask ');
  const rowBytes = Math.ceil((blocks.blockWidth * bits) / 8);
  return {
    width,
    height,
    samplesPerPixel: 1,
    planar: 1,
    kind: 'UInt8',
    bytesPerSample: 1,
    littleEndian: image.littleEndian,
    compression,
    predictor: 1,
    ...blocks,
    rowBytes,
    blockBytes: rowBytes * blocks.blockHeight,
    bits,
  };
}

/** Block offsets into the header, an IFD, a tag's values or another block: damage that some readers decode anyway. */
function refuseOverlappingBlocks(
  structure: ReturnType<typeof tiffStructure>['ranges'],
  layout: Layout,
  mask: Layout | null,
  label: string,
): void {
  const count = layout.blocksAcross * layout.blocksDown * (layout.planar === 2 ? layout.samplesPerPixel : 1);
  const maskCount = mask ? mask.blocksAcross * mask.blocksDown : 0;
  // concat, not push(...): block lists can be longer than the call stack allows arguments
  const offsets = layout.offsets.slice(0, count).concat(mask ? mask.offsets.slice(0, maskCount) : []);
  const counts = layout.byteCounts.slice(0, count).concat(mask ? mask.byteCounts.slice(0, maskCount) : []);
  const what = layout.tiled ? 'tile' : 'strip';
  const maskWhat = mask?.tiled ? 'tile' : 'strip';
  const name = (i: number) =>
    `${i < count ? `${what} ${i}` : `mask ${maskWhat} ${i - count}`} (bytes ${offsets[i]}-${offsets[i]! + counts[i]!})`;
  const overlap = findBlockOverlap(structure, offsets, counts, name);
  if (overlap) {
    throw inputError(`${label}: the file is damaged: ${overlap.block} overlaps ${overlap.overlaps}`, { file: label, hint: DAMAGE_HINT });
  }
}

async function tagValue(image: GeoTIFFImage, name: string): Promise<unknown> {
  const fd = image.getFileDirectory();
  return fd.hasTag(name as never) ? await fd.loadValue(name as never) : undefined;
}

/** A tag as a list of numbers (single values become one-element lists), or null when absent. */
async function numbersTag(image: GeoTIFFImage, name: string): Promise<number[] | null> {
  const v = await tagValue(image, name);
  if (v === undefined || v === null) return null;
  if (typeof v === 'number' || typeof v === 'bigint') return [Number(v)];
  if (typeof v === 'object' && 'length' in (v as object)) return Array.from(v as ArrayLike<number | bigint>, Number);
  return null;
}

function nonEmpty(list: number[] | null): number[] | null {
  return list && list.length > 0 ? list : null;
}

async function numberTag(image: GeoTIFFImage, name: string, fallback: number): Promise<number> {
  const v = await numbersTag(image, name);
  return v?.length ? v[0]! : fallback;
}

async function readLayout(image: GeoTIFFImage, label: string, fileSize: number): Promise<Layout> {
  const refuse = (problem: string, hint = CONVERT_HINT): PiezomapError => inputError(`${label}: ${problem}`, { file: label, hint });
  const width = await numberTag(image, 'ImageWidth', 0);
  const height = await numberTag(image, 'ImageLength', 0);
  if (!(width >= 1 && height >= 1)) throw refuse(`image size ${width}x${height} is empty`);
  const samplesPerPixel = await numberTag(image, 'SamplesPerPixel', 1);
  // An empty list (a damaged count) counts as absent, so bits[0] and formats[0] always exist.
  const bits = nonEmpty(await numbersTag(image, 'BitsPerSample')) ?? [1];
  const formats = nonEmpty(await numbersTag(image, 'SampleFormat')) ?? [1];
  if (bits.some((b) => b !== bits[0]) || formats.some((f) => f !== formats[0])) {
    throw refuse('bands of different sample types are not supported');
  }
  const kind = sampleKind(formats[0]!, bits[0]!);
  if (!kind) throw refuse(`unsupported sample type (${describeSampleType(formats[0]!, bits[0]!)})`);
  const bytesPerSample = bits[0]! / 8;

  const compression = await numberTag(image, 'Compression', 1);
  if (!COMPRESSION_NAMES.has(compression)) {
    throw refuse(`unsupported compression (TIFF code ${compression}); supported: none, LZW, DEFLATE, PackBits, ZSTD`);
  }
  const predictor = await numberTag(image, 'Predictor', 1);
  if (predictor !== 1 && predictor !== 2 && predictor !== 3) throw refuse(`unknown predictor ${predictor}`);
  const littleEndian = image.littleEndian;
  if (predictor === 2 && kind === 'Float64') {
    throw refuse(
      'Float64 samples with the horizontal differencing predictor (PREDICTOR=2) are not supported',
      'rewrite it with `gdal_translate -co COMPRESS=DEFLATE -co PREDICTOR=3 in.tif out.tif`',
    );
  }
  if (predictor === 3 && kind !== 'Float32' && kind !== 'Float64') {
    throw refuse(`the floating-point predictor (PREDICTOR=3) is set on ${kind} samples`);
  }
  if (predictor === 3 && !littleEndian) {
    throw refuse(
      'big-endian file with the floating-point predictor (PREDICTOR=3) is not supported',
      'rewrite it with `gdal_translate -co ENDIANNESS=LITTLE -co COMPRESS=DEFLATE in.tif out.tif`',
    );
  }
  const planarTag = await numberTag(image, 'PlanarConfiguration', 1);
  const planar: 1 | 2 = planarTag === 2 && samplesPerPixel > 1 ? 2 : 1;

  // Size limit before anything is allocated (the memory budget is the caller's: see `maxBytes`).
  const cells = width * height;
  if (cells > MAX_CELLS) {
    throw refuse(
      `${width} x ${height} = ${cells.toExponential(2)} cells is more than this program handles (2^31)`,
      'clip the raster to the model area or coarsen it (e.g. `gdalwarp -tr` with a larger cell size)',
    );
  }
  const pixelBytes = planar === 1 ? samplesPerPixel * bytesPerSample : bytesPerSample;
  const blocks = await readBlocks(image, width, height, planar === 2 ? samplesPerPixel : 1, label, fileSize, '');
  const rowBytes = blocks.blockWidth * pixelBytes;
  return {
    width,
    height,
    samplesPerPixel,
    planar,
    kind,
    bytesPerSample,
    littleEndian,
    compression,
    predictor: predictor as 1 | 2 | 3,
    ...blocks,
    rowBytes,
    blockBytes: rowBytes * blocks.blockHeight,
    bits: bits[0]!,
  };
}

/**
 * Block size, count and byte ranges of an image (tiles or strips; `planes` separate sample planes), each block checked
 * to end within the file. `prefix` names the image in messages ('' for the image, 'mask ' for its mask).
 */
async function readBlocks(
  image: GeoTIFFImage,
  width: number,
  height: number,
  planes: number,
  label: string,
  fileSize: number,
  prefix: string,
) {
  const tiled = image.getFileDirectory().hasTag('TileWidth' as never);
  const blockWidth = tiled ? await numberTag(image, 'TileWidth', 0) : width;
  const blockHeight = tiled ? await numberTag(image, 'TileLength', 0) : Math.min(await numberTag(image, 'RowsPerStrip', height), height);
  const refuse = (problem: string): PiezomapError => inputError(`${label}: ${problem}`, { file: label, hint: CONVERT_HINT });
  if (!(blockWidth >= 1 && blockHeight >= 1))
    throw refuse(`invalid ${prefix}${tiled ? 'tile' : 'strip'} size ${blockWidth}x${blockHeight}`);
  const blocksAcross = Math.ceil(width / blockWidth);
  const blocksDown = Math.ceil(height / blockHeight);
  const blockCount = blocksAcross * blocksDown * planes;
  const what = `${prefix}${tiled ? 'tile' : 'strip'}`;
  const offsets = await numbersTag(image, tiled ? 'TileOffsets' : 'StripOffsets');
  const byteCounts = await numbersTag(image, tiled ? 'TileByteCounts' : 'StripByteCounts');
  if (!offsets || !byteCounts) throw refuse(`the ${what} offsets or byte counts are missing`);
  if (offsets.length < blockCount || byteCounts.length < blockCount) {
    throw refuse(`the file lists ${Math.min(offsets.length, byteCounts.length)} ${what}s where the image needs ${blockCount}`);
  }
  // geotiff.js reads a block that runs past the end of the file as zeros without complaint: check them all first.
  for (let i = 0; i < blockCount; i++) {
    const end = offsets[i]! + byteCounts[i]!;
    if (byteCounts[i]! > 0 && end > fileSize) {
      throw inputError(`${label}: the file is cut short: ${what} ${i} ends at byte ${end} but the file has ${fileSize} bytes`, {
        file: label,
        hint: 'the file was not copied or downloaded completely; copy it again',
      });
    }
  }
  return { tiled, blockWidth, blockHeight, blocksAcross, blocksDown, offsets, byteCounts };
}

/** Per-band metadata that changes the values: scale and offset (identity when absent), and the unit, if declared. */
interface BandMetadata {
  scale: number;
  offset: number;
  unit: string | null;
}

/** Roles of GDAL band metadata items that do not change the values (names and colours for display). */
const DISPLAY_ROLES = new Set(['description', 'colorinterp']);

/**
 * GDAL's band metadata (TIFF tag 42112, an XML list of `<Item name= sample= role=>value</Item>`, as GDAL's GTiff
 * driver writes it): "scale" and "offset" are applied (GDAL's unscaled value is stored x scale + offset), "unittype"
 * is reported, display roles are irrelevant; an item with a role we do not know is refused rather than ignored.
 * Items without a role are free metadata (statistics, notes) and change nothing.
 */
async function readBandMetadata(image: GeoTIFFImage, sample: number, label: string): Promise<BandMetadata> {
  const result: BandMetadata = { scale: 1, offset: 0, unit: null };
  const raw = await tagValue(image, 'GDAL_METADATA');
  if (typeof raw !== 'string') return result;
  const refuse = (problem: string, hint: string): PiezomapError => inputError(`${label}: ${problem}`, { file: label, hint });
  for (const match of raw.matchAll(/<Item\b([^>]*?)(?:\/>|>([^<]*)<\/Item>)/g)) {
    const attributes = new Map<string, string>();
    for (const a of match[1]!.matchAll(/([A-Za-z_]+)\s*=\s*"([^"]*)"/g)) attributes.set(a[1]!, xmlText(a[2]!));
    const role = attributes.get('role');
    const band = attributes.get('sample');
    if (role === undefined || band === undefined || Number(band) !== sample) continue;
    const text = xmlText(match[2] ?? '').trim();
    if (role === 'scale' || role === 'offset') {
      const value = Number(text);
      if (text === '' || !Number.isFinite(value) || (role === 'scale' && value === 0)) {
        throw refuse(
          `the band's ${role} "${text}" (GDAL metadata) is not a usable number`,
          `set it again, e.g. \`gdal_edit.py -${role} 1 file.tif\`, or write the values unscaled (\`gdal_translate -unscale -ot Float32 in.tif out.tif\`)`,
        );
      }
      result[role] = value;
    } else if (role === 'unittype') {
      result.unit = text === '' ? null : text;
    } else if (!DISPLAY_ROLES.has(role)) {
      throw refuse(
        `the band carries GDAL metadata "${attributes.get('name') ?? '?'}" with role "${role}", which piezomap does not know how to apply`,
        'write the values as they are meant, e.g. `gdal_translate -ot Float32 in.tif out.tif` and check the result with gdalinfo',
      );
    }
  }
  return result;
}

/** XML character references and the five predefined entities to text. */
function xmlText(text: string): string {
  return text.replace(/&(#x[0-9a-fA-F]+|#[0-9]+|amp|lt|gt|quot|apos);/g, (_, ref: string) => {
    if (ref[0] === '#') return String.fromCodePoint(ref[1] === 'x' ? parseInt(ref.slice(2), 16) : parseInt(ref.slice(1), 10));
    return { amp: '&', lt: '<', gt: '>', quot: '"', apos: "'" }[ref]!;
  });
}

/**
 * Set the cells the internal mask marks as missing (0) to NaN. The mask packs 8 cells per byte, most significant bit
 * first, each block row starting on a new byte (TIFF 6.0 sections 3 and 8).
 */
async function applyMask(bytes: Uint8Array, mask: Layout, values: Float64Array, label: string): Promise<void> {
  const { width, height, blockWidth, blockHeight, blocksAcross, blocksDown, rowBytes } = mask;
  const decompress = await decompressorFor(mask);
  const what = mask.tiled ? 'tile' : 'strip';
  for (let by = 0; by < blocksDown; by++) {
    const rows = Math.min(blockHeight, height - by * blockHeight);
    for (let bx = 0; bx < blocksAcross; bx++) {
      const cols = Math.min(blockWidth, width - bx * blockWidth);
      const index = by * blocksAcross + bx;
      const count = mask.byteCounts[index]!;
      // GDAL writes every mask block; a missing one could mean "all valid" or "all masked": do not guess
      if (count === 0) throw inputError(`${label}: mask ${what} ${index} is missing from the file`, { file: label, hint: DAMAGE_HINT });
      let block: Uint8Array;
      try {
        block = decompress(bytes.subarray(mask.offsets[index]!, mask.offsets[index]! + count));
      } catch (thrown) {
        throw inputError(`${label}: mask ${what} ${index} cannot be decompressed (${describeThrown(thrown)})`, {
          file: label,
          hint: DAMAGE_HINT,
        });
      }
      if (block.length < rows * rowBytes) {
        throw inputError(`${label}: mask ${what} ${index} holds ${block.length} bytes where ${rows * rowBytes} are needed`, {
          file: label,
          hint: DAMAGE_HINT,
        });
      }
      const firstCell = by * blockHeight * width + bx * blockWidth;
      for (let r = 0; r < rows; r++) {
        const start = r * rowBytes;
        const out = firstCell + r * width;
        for (let c = 0; c < cols; c++) if (((block[start + (c >> 3)]! >> (7 - (c & 7))) & 1) === 0) values[out + c] = Number.NaN;
      }
    }
  }
}

function sampleKind(format: number, bits: number): SampleKind | null {
  // SampleFormat 1 unsigned, 2 signed, 3 IEEE float, 4 undefined (read as unsigned, as GDAL does)
  if (format === 1 || format === 4) return bits === 8 ? 'UInt8' : bits === 16 ? 'UInt16' : bits === 32 ? 'UInt32' : null;
  if (format === 2) return bits === 8 ? 'Int8' : bits === 16 ? 'Int16' : bits === 32 ? 'Int32' : null;
  if (format === 3) return bits === 32 ? 'Float32' : bits === 64 ? 'Float64' : null;
  return null;
}

function describeSampleType(format: number, bits: number): string {
  const names: Record<number, string> = {
    1: 'unsigned integer',
    2: 'signed integer',
    3: 'floating point',
    4: 'untyped',
    5: 'complex integer',
    6: 'complex floating point',
  };
  return `${bits}-bit ${names[format] ?? `sample format ${format}`}; supported: 8/16/32-bit integers, Float32, Float64`;
}

async function readGeoKeys(image: GeoTIFFImage, label: string): Promise<GeoKeyRecord | null> {
  const directory = await numbersTag(image, 'GeoKeyDirectory');
  if (!directory) return null;
  const doubles = await numbersTag(image, 'GeoDoubleParams');
  const asciiValue = await tagValue(image, 'GeoAsciiParams');
  const ascii = typeof asciiValue === 'string' ? asciiValue : null;
  try {
    return parseGeoKeyDirectory(directory, doubles, ascii);
  } catch (thrown) {
    throw inputError(`${label}: the GeoTIFF key directory is damaged (${describeThrown(thrown)})`, {
      file: label,
      hint: 'assign the CRS again, e.g. `gdal_edit.py -a_srs EPSG:xxxx file.tif`',
    });
  }
}

/**
 * The GDAL geotransform [originX, pixelWidth, 0, originY, 0, pixelHeight] of the PixelIsArea corner, computed as GDAL
 * computes it (GeoTIFF standard OGC 19-008r4 section 7.2 and GDAL's GTiff driver; the PixelIsPoint half-cell shift is
 * GDAL's documented default, GTIFF_POINT_GEO_IGNORE=NO).
 */
async function readGeotransform(
  image: GeoTIFFImage,
  label: string,
  geoKeys: GeoKeyRecord | null,
): Promise<[number, number, number, number, number, number]> {
  const refuse = (problem: string, hint: string): PiezomapError => inputError(`${label}: ${problem}`, { file: label, hint });
  const transformation = await numbersTag(image, 'ModelTransformation');
  const scale = await numbersTag(image, 'ModelPixelScale');
  const tiepoints = await numbersTag(image, 'ModelTiepoint');
  let gt: [number, number, number, number, number, number];
  if (transformation) {
    if (transformation.length < 8) throw refuse('the ModelTransformation tag is incomplete', 'assign the georeferencing again in the GIS');
    const [a, b, , d, e, f, , h] = transformation as [number, number, number, number, number, number, number, number];
    // geotiff.js drops b and e silently; a rotated or sheared grid cannot be modelled cell by cell here.
    if (b !== 0 || e !== 0) {
      throw refuse(
        `the grid is rotated or sheared (geotransform terms ${b}, ${e})`,
        'warp it to a north-up grid first, e.g. `gdalwarp in.tif out.tif` (same CRS)',
      );
    }
    gt = [d, a, 0, h, 0, f];
  } else if (scale && tiepoints && scale.length >= 2 && tiepoints.length >= 6) {
    if (tiepoints.length > 6) {
      throw refuse(
        `the file is georeferenced by ${tiepoints.length / 6} ground control points, not a regular grid`,
        'warp it to a regular grid first, e.g. `gdalwarp in.tif out.tif`',
      );
    }
    const [i, j, , x, y] = tiepoints as [number, number, number, number, number];
    const [sx, sy] = scale as [number, number];
    gt = [x - i * sx, sx, 0, y + j * sy, 0, -sy];
  } else if (tiepoints && tiepoints.length >= 6) {
    throw refuse(
      'the file has tie points but no pixel size (ground control points only)',
      'warp it to a regular grid first, e.g. `gdalwarp in.tif out.tif`',
    );
  } else {
    throw refuse(
      'the file has no georeferencing (no ModelPixelScale/ModelTiepoint or ModelTransformation tag)',
      'assign the grid position in a GIS, or `gdal_translate -a_ullr ulx uly lrx lry -a_srs EPSG:xxxx in.tif out.tif`',
    );
  }
  if (geoKeys && geoKeys.GTRasterTypeGeoKey === RASTER_PIXEL_IS_POINT) {
    // PixelIsPoint: the tie point is the centre of cell (0,0); GDAL moves the origin to its outer corner.
    gt[0] -= 0.5 * gt[1] + 0.5 * gt[2];
    gt[3] -= 0.5 * gt[4] + 0.5 * gt[5];
  }
  if (!gt.every(Number.isFinite))
    throw refuse(`the geotransform is not finite [${gt.join(', ')}]`, 'assign the georeferencing again in the GIS');
  if (gt[1] <= 0) {
    throw refuse(
      `the pixel width is ${gt[1] === 0 ? 'zero' : `negative (${gt[1]})`}`,
      'the grid must run west to east with a positive cell size; warp it with `gdalwarp in.tif out.tif`',
    );
  }
  if (gt[5] === 0) throw refuse('the pixel height is zero', 'assign the georeferencing again in the GIS');
  return gt;
}

/** GDAL's nodata tag (TIFF tag 42113, ASCII): null when absent; "nan", "inf" and numbers as GDAL writes them. */
async function readNodata(image: GeoTIFFImage, label: string): Promise<number | null> {
  const raw = await tagValue(image, 'GDAL_NODATA');
  if (raw === undefined || raw === null) return null;
  const text = String(raw).replace(/\0/g, '').trim();
  if (text === '') return null;
  const lower = text.toLowerCase();
  if (lower === 'nan' || lower === '-nan' || lower === '+nan') return Number.NaN;
  if (lower === 'inf' || lower === '+inf' || lower === 'infinity') return Number.POSITIVE_INFINITY;
  if (lower === '-inf' || lower === '-infinity') return Number.NEGATIVE_INFINITY;
  const value = Number(text);
  if (Number.isNaN(value)) {
    throw inputError(`${label}: the nodata value "${text}" is not a number`, {
      file: label,
      hint: 'set it again, e.g. `gdal_edit.py -a_nodata -9999 file.tif`',
    });
  }
  return value;
}

// Scratch word to reinterpret integer bits as a float (little-endian host checked below).
const F32 = new Float32Array(1);
const F32_BITS = new Uint32Array(F32.buffer);
const HOST_LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

async function decodeBand(bytes: Uint8Array, layout: Layout, sample: number, nodata: number | null, label: string): Promise<Float64Array> {
  if (!HOST_LITTLE_ENDIAN) throw new PiezomapError('internal', 'GeoTIFF decoding assumes a little-endian machine');
  const { width, height, blockWidth, blockHeight, blocksAcross, blocksDown, planar, samplesPerPixel, bytesPerSample } = layout;
  const values = new Float64Array(width * height);
  // Missing blocks (byte count 0, "sparse" files) read as nodata, or 0 without nodata, as GDAL reads them.
  const sparseFill = nodata === null ? 0 : Number.NaN;
  // The value cells are compared with: Float32 samples hold the nodata rounded to float32.
  const nodataMatch = nodata === null ? Number.NaN : layout.kind === 'Float32' ? Math.fround(nodata) : nodata;
  const pixelBytes = planar === 1 ? samplesPerPixel * bytesPerSample : bytesPerSample;
  const sampleByte = planar === 1 ? sample * bytesPerSample : 0;
  const sampleStride = planar === 1 ? samplesPerPixel : 1;
  const rowBytes = blockWidth * pixelBytes;
  const planeFirstBlock = planar === 2 ? sample * blocksAcross * blocksDown : 0;
  const decompress = await decompressorFor(layout);
  const what = layout.tiled ? 'tile' : 'strip';
  const scratch = floatRowScratch(layout.predictor === 3 ? blockWidth : 0);

  for (let by = 0; by < blocksDown; by++) {
    const rows = Math.min(blockHeight, height - by * blockHeight);
    for (let bx = 0; bx < blocksAcross; bx++) {
      const cols = Math.min(blockWidth, width - bx * blockWidth);
      const index = planeFirstBlock + by * blocksAcross + bx;
      const firstCell = by * blockHeight * width + bx * blockWidth;
      const count = layout.byteCounts[index]!;
      if (count === 0) {
        for (let r = 0; r < rows; r++) values.fill(sparseFill, firstCell + r * width, firstCell + r * width + cols);
        continue;
      }
      const offset = layout.offsets[index]!;
      let block: Uint8Array;
      try {
        block = decompress(bytes.subarray(offset, offset + count));
      } catch (thrown) {
        throw inputError(`${label}: ${what} ${index} cannot be decompressed (${describeThrown(thrown)})`, {
          file: label,
          hint: 'the file is damaged or was not copied completely; copy or export it again',
        });
      }
      if (block.length < rows * rowBytes) {
        throw inputError(`${label}: ${what} ${index} holds ${block.length} bytes where ${rows * rowBytes} are needed`, {
          file: label,
          hint: 'the file is damaged or was not copied completely; copy or export it again',
        });
      }
      const view = new DataView(block.buffer, block.byteOffset, block.byteLength);
      for (let r = 0; r < rows; r++) {
        const rowStart = r * rowBytes;
        const out = firstCell + r * width;
        if (layout.predictor === 1) {
          readPlainRow(view, layout, rowStart + sampleByte, sampleStride * bytesPerSample, cols, values, out, nodataMatch);
        } else if (layout.predictor === 2) {
          readDifferencedRow(view, layout, rowStart + sampleByte, sampleStride * bytesPerSample, cols, values, out, nodataMatch);
        } else {
          readFloatPredictedRow(
            block,
            layout,
            rowStart,
            blockWidth * sampleStride,
            sampleStride,
            planar === 1 ? sample : 0,
            cols,
            values,
            out,
            nodataMatch,
            scratch,
          );
        }
      }
    }
  }
  return values;
}

/**
 * A function turning one compressed block into its bytes. The returned bytes may be modified by the caller
 * (predictor 3 works in place), so uncompressed blocks are copied when a predictor is set.
 */
async function decompressorFor(layout: Layout): Promise<(data: Uint8Array) => Uint8Array> {
  const { compression } = layout;
  if (compression === 1) return layout.predictor === 3 ? (data) => data.slice() : (data) => data;
  // A block never holds more than its full size; a larger output is damage (or a decompression bomb), refused
  // before it fills memory.
  const blockBytes = layout.blockBytes;
  if (compression === 8 || compression === 32946) {
    return (data) => {
      try {
        return inflateSync(data, { maxOutputLength: blockBytes + 4096 });
      } catch (thrown) {
        if ((thrown as { code?: string }).code === 'ERR_BUFFER_TOO_LARGE')
          throw new Error(`it expands to more than the ${blockBytes} bytes a block holds`);
        throw thrown;
      }
    };
  }
  if (compression === 5) return (data) => decodeLzw(data, blockBytes);
  if (compression === 50000) {
    await zstd.init();
    return (data) => {
      // With the block size given, the decoder never writes more than that; an error comes back as a huge size.
      const out = zstd.decode(data, blockBytes);
      if (out.byteLength > blockBytes) throw new Error('the ZSTD data is damaged');
      return out;
    };
  }
  const decoder = await getDecoder(compression, {
    tileWidth: layout.blockWidth,
    tileHeight: layout.blockHeight,
    planarConfiguration: layout.planar,
    bitsPerSample: [layout.bits],
    predictor: 1, // predictors are undone here, not by geotiff.js
  });
  return (data) => {
    const copy = data.slice();
    // geotiff.js decoders are synchronous underneath (decodeBlock); the async wrapper is only for worker pools.
    // Its LZW decoder reports a block that ends without its end code by console.warn and carries on: catch the
    // warning (so nothing reaches the user's terminal) and treat the block as damaged.
    const warn = console.warn;
    let warned: string | null = null;
    console.warn = (...args: unknown[]) => {
      warned ??= args.map(String).join(' ');
    };
    let out: ArrayBufferLike;
    try {
      out = (decoder as unknown as { decodeBlock(b: ArrayBuffer): ArrayBufferLike }).decodeBlock(copy.buffer);
    } finally {
      console.warn = warn;
    }
    if (warned !== null) throw new Error(warned);
    if (out.byteLength > blockBytes + 4096) throw new Error(`it expands to more than the ${blockBytes} bytes a block holds`);
    return new Uint8Array(out);
  };
}

/** No predictor: read each sample in the file's byte order. `nd` is the nodata value as stored (NaN when none). */
function readPlainRow(
  view: DataView,
  layout: Layout,
  start: number,
  step: number,
  cols: number,
  out: Float64Array,
  at: number,
  nd: number,
): void {
  const le = layout.littleEndian;
  let p = start;
  switch (layout.kind) {
    case 'Float32':
      for (let c = 0; c < cols; c++, p += step) {
        const v = view.getFloat32(p, le);
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'Float64':
      for (let c = 0; c < cols; c++, p += step) {
        const v = view.getFloat64(p, le);
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'UInt8':
      for (let c = 0; c < cols; c++, p += step) {
        const v = view.getUint8(p);
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'Int8':
      for (let c = 0; c < cols; c++, p += step) {
        const v = view.getInt8(p);
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'UInt16':
      for (let c = 0; c < cols; c++, p += step) {
        const v = view.getUint16(p, le);
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'Int16':
      for (let c = 0; c < cols; c++, p += step) {
        const v = view.getInt16(p, le);
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'UInt32':
      for (let c = 0; c < cols; c++, p += step) {
        const v = view.getUint32(p, le);
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'Int32':
      for (let c = 0; c < cols; c++, p += step) {
        const v = view.getInt32(p, le);
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
  }
}

/**
 * Horizontal differencing (TIFF 6.0 section 14, predictor 2): each sample word is stored as the difference from the
 * same sample of the pixel to its left, modulo 2^bits, restarting at every block row. Undo it on the unsigned words
 * (in the file's byte order), then reinterpret them as the sample type. Float32 words are summed as integers, as
 * libtiff does.
 */
function readDifferencedRow(
  view: DataView,
  layout: Layout,
  start: number,
  step: number,
  cols: number,
  out: Float64Array,
  at: number,
  nd: number,
): void {
  const le = layout.littleEndian;
  let p = start;
  let acc = 0;
  switch (layout.kind) {
    case 'UInt8':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getUint8(p)) & 0xff;
        out[at + c] = acc === nd ? Number.NaN : acc;
      }
      break;
    case 'Int8':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getUint8(p)) & 0xff;
        const v = (acc << 24) >> 24;
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'UInt16':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getUint16(p, le)) & 0xffff;
        out[at + c] = acc === nd ? Number.NaN : acc;
      }
      break;
    case 'Int16':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getUint16(p, le)) & 0xffff;
        const v = (acc << 16) >> 16;
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'UInt32':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getUint32(p, le)) >>> 0;
        out[at + c] = acc === nd ? Number.NaN : acc;
      }
      break;
    case 'Int32':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getInt32(p, le)) | 0;
        out[at + c] = acc === nd ? Number.NaN : acc;
      }
      break;
    case 'Float32':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getUint32(p, le)) >>> 0;
        F32_BITS[0] = acc;
        const v = F32[0]!;
        out[at + c] = v !== v || v === nd ? Number.NaN : v;
      }
      break;
    case 'Float64':
      throw new PiezomapError('internal', 'Float64 with predictor 2 should have been refused earlier');
  }
}

/** A row of one sample gathered back into little-endian floats, allocated once per band. */
interface FloatRowScratch {
  bytes: Uint8Array;
  f32: Float32Array;
  f64: Float64Array;
}

function floatRowScratch(width: number): FloatRowScratch {
  const bytes = new Uint8Array(8 * width);
  return { bytes, f32: new Float32Array(bytes.buffer), f64: new Float64Array(bytes.buffer) };
}

/**
 * Floating-point predictor (Adobe Photoshop TIFF Technical Note 3, predictor 3): a row of `words` samples is stored
 * as byte planes, most significant byte first, then byte-wise differenced with a stride of the samples per pixel.
 * Undo the differencing in place over the whole row, then gather each wanted sample's bytes from the planes into
 * little-endian order and read them as floats.
 */
function readFloatPredictedRow(
  block: Uint8Array,
  layout: Layout,
  rowStart: number,
  words: number,
  stride: number,
  sampleInPixel: number,
  cols: number,
  out: Float64Array,
  at: number,
  nd: number,
  scratch: FloatRowScratch,
): void {
  const bps = layout.bytesPerSample;
  const rowEnd = rowStart + words * bps;
  for (let i = rowStart + stride; i < rowEnd; i++) block[i] = (block[i]! + block[i - stride]!) & 0xff;
  const gathered = scratch.bytes;
  const first = rowStart + sampleInPixel;
  for (let c = 0, k = first, o = 0; c < cols; c++, k += stride, o += bps) {
    // plane j holds byte j counted from the most significant one
    for (let j = 0; j < bps; j++) gathered[o + bps - 1 - j] = block[k + j * words]!;
  }
  if (bps === 4) {
    const f32 = scratch.f32;
    for (let c = 0; c < cols; c++) {
      const v = f32[c]!;
      out[at + c] = v !== v || v === nd ? Number.NaN : v;
    }
  } else {
    const f64 = scratch.f64;
    for (let c = 0; c < cols; c++) {
      const v = f64[c]!;
      out[at + c] = v !== v || v === nd ? Number.NaN : v;
    }
  }
}

function formatBytes(n: number): string {
  if (n >= 1e9) return `${(n / 1e9).toFixed(1)} GB`;
  if (n >= 1e6) return `${(n / 1e6).toFixed(1)} MB`;
  return `${Math.round(n / 1e3)} kB`;
}
