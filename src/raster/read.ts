/**
 * Read one band of a GeoTIFF into doubles, with its grid (size, geotransform as GDAL reports it, CRS) and nodata.
 *
 * geotiff.js parses the TIFF structure (classic and BigTIFF IFDs, tags) and supplies the PackBits decompressor;
 * DEFLATE goes through node:zlib, ZSTD through zstddec with the output bounded by the block size, LZW through our own
 * bounded decoder (lzw.ts). Block assembly, predictors, byte order, sample conversion and
 * nodata masking are done here, in one pass per block row, because geotiff 3.0.5 gets several of them wrong
 * (horizontal differencing on big-endian files, Float64 with predictor 2, silently zero-filled truncated blocks).
 * Everything a user can get wrong ends as PiezomapError('input') naming the file.
 */
import { readFile, stat } from 'node:fs/promises';
import { inflateSync } from 'node:zlib';
import { fromArrayBuffer, getDecoder } from 'geotiff';
import type { GeoTIFFImage } from 'geotiff';
import { PiezomapError, describeThrown, inputError } from '../errors.js';
import { ZSTDDecoder } from 'zstddec/stream';
import { decodeLzw } from './lzw.js';
import type { Grid } from '../grid.js';
import { RASTER_PIXEL_IS_POINT, crsFromGeoKeys, parseGeoKeyDirectory } from './geokeys.js';
import type { GeoKeyRecord } from './geokeys.js';
import type { RasterData } from './types.js';

export interface ReadRasterOptions {
  /** 1-based band number, default 1. */
  band?: number;
  /** How messages name the file, default the path. */
  label?: string;
  /**
   * Most bytes one raster may take while it is read (the file, the decoded values as doubles, one block), and how
   * messages describe that limit; default no limit beyond MAX_CELLS. The caller's memory policy sets it.
   */
  sizeLimit?: SizeLimit;
}

export interface SizeLimit {
  bytes: number;
  /** E.g. "half of the memory a run may use". */
  description: string;
}

const NO_LIMIT: SizeLimit = { bytes: Infinity, description: 'the size limit' };

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
  offsets: number[];
  byteCounts: number[];
}

export async function readRaster(path: string, options: ReadRasterOptions = {}): Promise<RasterData> {
  const label = options.label ?? path;
  const band = options.band ?? 1;
  if (!Number.isInteger(band) || band < 1) {
    throw inputError(`${label}: band must be a whole number from 1, got ${String(band)}`, { file: label });
  }
  const limit = options.sizeLimit ?? NO_LIMIT;
  const bytes = await readBytes(path, label, limit);
  try {
    return await decodeGeoTiff(path, label, bytes, band, limit);
  } catch (thrown) {
    if (thrown instanceof PiezomapError) throw thrown;
    // geotiff.js and the decompressors throw Errors, RangeErrors and sometimes plain strings
    throw inputError(`${label}: the TIFF structure is damaged or unreadable (${describeThrown(thrown)})`, {
      file: label,
      hint: 'check that the file was copied completely; re-export it from the GIS if it still fails',
    });
  }
}

async function readBytes(path: string, label: string, limit: SizeLimit): Promise<Uint8Array> {
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
  if (size > limit.bytes) {
    throw inputError(`${label}: the file is ${formatBytes(size)}, more than ${limit.description}`, {
      file: label,
      hint: 'clip the raster to the model area or coarsen it before modelling',
    });
  }
  let bytes: Uint8Array;
  try {
    const buffer = await readFile(path);
    // a plain Uint8Array view: Buffer's slice() shares memory, Uint8Array's copies, and decoders rely on copies
    bytes = new Uint8Array(buffer.buffer, buffer.byteOffset, buffer.byteLength);
  } catch (thrown) {
    throw fileSystemError(thrown, label);
  }
  const magic = bytes.length >= 4 ? `${String.fromCharCode(bytes[0]!, bytes[1]!)}${bytes[2]},${bytes[3]}` : '';
  const tiff = magic === 'II42,0' || magic === 'MM0,42' || magic === 'II43,0' || magic === 'MM0,43';
  if (!tiff || bytes.length < 8) {
    throw inputError(`${label}: not a TIFF file (it does not start with the TIFF byte-order mark and version)`, {
      file: label,
      hint: 'the rasters must be GeoTIFF (.tif); convert other formats with `gdal_translate -of GTiff`',
    });
  }
  return bytes;
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

async function decodeGeoTiff(path: string, label: string, bytes: Uint8Array, band: number, limit: SizeLimit): Promise<RasterData> {
  const buffer = bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength) as ArrayBuffer;
  const tiff = await fromArrayBuffer(buffer);
  const image = await tiff.getImage(0);
  const layout = await readLayout(image, label, bytes.length, limit);
  if (band > layout.samplesPerPixel) {
    throw inputError(`${label}: band ${band} requested but the file has ${layout.samplesPerPixel} band(s)`, {
      file: label,
    });
  }
  const geoKeys = await readGeoKeys(image, label);
  const transform = await readGeotransform(image, label, geoKeys);
  const nodata = await readNodata(image, label);
  const grid: Grid = { nx: layout.width, ny: layout.height, transform, crs: crsFromGeoKeys(geoKeys) };
  const values = await decodeBand(bytes, layout, band - 1, nodata, label);
  return { path, grid, values, nodata, bandCount: layout.samplesPerPixel, sampleType: layout.kind };
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
  return v && v.length ? v[0]! : fallback;
}

async function readLayout(image: GeoTIFFImage, label: string, fileSize: number, limit: SizeLimit): Promise<Layout> {
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
    throw refuse('Float64 samples with the horizontal differencing predictor (PREDICTOR=2) are not supported',
      'rewrite it with `gdal_translate -co COMPRESS=DEFLATE -co PREDICTOR=3 in.tif out.tif`');
  }
  if (predictor === 3 && kind !== 'Float32' && kind !== 'Float64') {
    throw refuse(`the floating-point predictor (PREDICTOR=3) is set on ${kind} samples`);
  }
  if (predictor === 3 && !littleEndian) {
    throw refuse('big-endian file with the floating-point predictor (PREDICTOR=3) is not supported',
      'rewrite it with `gdal_translate -co ENDIANNESS=LITTLE -co COMPRESS=DEFLATE in.tif out.tif`');
  }
  const planarTag = await numberTag(image, 'PlanarConfiguration', 1);
  const planar: 1 | 2 = planarTag === 2 && samplesPerPixel > 1 ? 2 : 1;

  const tiled = image.getFileDirectory().hasTag('TileWidth' as never);
  const blockWidth = tiled ? await numberTag(image, 'TileWidth', 0) : width;
  const blockHeight = tiled
    ? await numberTag(image, 'TileLength', 0)
    : Math.min(await numberTag(image, 'RowsPerStrip', height), height);
  if (!(blockWidth >= 1 && blockHeight >= 1)) throw refuse(`invalid ${tiled ? 'tile' : 'strip'} size ${blockWidth}x${blockHeight}`);

  // Size limits before anything is allocated: the output doubles, plus one decoded block.
  const cells = width * height;
  const pixelBytes = planar === 1 ? samplesPerPixel * bytesPerSample : bytesPerSample;
  const blockBytes = blockWidth * blockHeight * pixelBytes;
  if (cells > MAX_CELLS) {
    throw refuse(`${width} x ${height} = ${cells.toExponential(2)} cells is more than this program handles (2^31)`,
      'clip the raster to the model area or coarsen it (e.g. `gdalwarp -tr` with a larger cell size)');
  }
  const needed = cells * 8 + blockBytes + fileSize;
  if (needed > limit.bytes) {
    throw refuse(`${width} x ${height} cells need about ${formatBytes(needed)} to read, more than ${limit.description}`,
      'clip the raster to the model area or coarsen it (e.g. `gdalwarp -tr` with a larger cell size)');
  }

  const blocksAcross = Math.ceil(width / blockWidth);
  const blocksDown = Math.ceil(height / blockHeight);
  const blockCount = blocksAcross * blocksDown * (planar === 2 ? samplesPerPixel : 1);
  const what = tiled ? 'tile' : 'strip';
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
  return {
    width, height, samplesPerPixel, planar, kind, bytesPerSample, littleEndian, compression,
    predictor: predictor as 1 | 2 | 3, tiled, blockWidth, blockHeight, blocksAcross, blocksDown, offsets, byteCounts,
  };
}

function sampleKind(format: number, bits: number): SampleKind | null {
  // SampleFormat 1 unsigned, 2 signed, 3 IEEE float, 4 undefined (read as unsigned, as GDAL does)
  if (format === 1 || format === 4) return bits === 8 ? 'UInt8' : bits === 16 ? 'UInt16' : bits === 32 ? 'UInt32' : null;
  if (format === 2) return bits === 8 ? 'Int8' : bits === 16 ? 'Int16' : bits === 32 ? 'Int32' : null;
  if (format === 3) return bits === 32 ? 'Float32' : bits === 64 ? 'Float64' : null;
  return null;
}

function describeSampleType(format: number, bits: number): string {
  const names: Record<number, string> = { 1: 'unsigned integer', 2: 'signed integer', 3: 'floating point', 4: 'untyped', 5: 'complex integer', 6: 'complex floating point' };
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
      throw refuse(`the grid is rotated or sheared (geotransform terms ${b}, ${e})`,
        'warp it to a north-up grid first, e.g. `gdalwarp in.tif out.tif` (same CRS)');
    }
    gt = [d, a, 0, h, 0, f];
  } else if (scale && tiepoints && scale.length >= 2 && tiepoints.length >= 6) {
    if (tiepoints.length > 6) {
      throw refuse(`the file is georeferenced by ${tiepoints.length / 6} ground control points, not a regular grid`,
        'warp it to a regular grid first, e.g. `gdalwarp in.tif out.tif`');
    }
    const [i, j, , x, y] = tiepoints as [number, number, number, number, number];
    const [sx, sy] = scale as [number, number];
    gt = [x - i * sx, sx, 0, y + j * sy, 0, -sy];
  } else if (tiepoints && tiepoints.length >= 6) {
    throw refuse('the file has tie points but no pixel size (ground control points only)',
      'warp it to a regular grid first, e.g. `gdalwarp in.tif out.tif`');
  } else {
    throw refuse('the file has no georeferencing (no ModelPixelScale/ModelTiepoint or ModelTransformation tag)',
      'assign the grid position in a GIS, or `gdal_translate -a_ullr ulx uly lrx lry -a_srs EPSG:xxxx in.tif out.tif`');
  }
  if (geoKeys && geoKeys.GTRasterTypeGeoKey === RASTER_PIXEL_IS_POINT) {
    // PixelIsPoint: the tie point is the centre of cell (0,0); GDAL moves the origin to its outer corner.
    gt[0] -= 0.5 * gt[1] + 0.5 * gt[2];
    gt[3] -= 0.5 * gt[4] + 0.5 * gt[5];
  }
  if (!gt.every(Number.isFinite)) throw refuse(`the geotransform is not finite [${gt.join(', ')}]`, 'assign the georeferencing again in the GIS');
  if (gt[1] <= 0) {
    throw refuse(`the pixel width is ${gt[1] === 0 ? 'zero' : `negative (${gt[1]})`}`,
      'the grid must run west to east with a positive cell size; warp it with `gdalwarp in.tif out.tif`');
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
          readFloatPredictedRow(block, layout, rowStart, blockWidth * sampleStride, sampleStride, planar === 1 ? sample : 0, cols, values, out, nodataMatch, scratch);
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
  const pixelBytes = layout.planar === 1 ? layout.samplesPerPixel * layout.bytesPerSample : layout.bytesPerSample;
  const blockBytes = layout.blockWidth * layout.blockHeight * pixelBytes;
  if (compression === 8 || compression === 32946) {
    return (data) => {
      try {
        return inflateSync(data, { maxOutputLength: blockBytes + 4096 });
      } catch (thrown) {
        if ((thrown as { code?: string }).code === 'ERR_BUFFER_TOO_LARGE') throw new Error(`it expands to more than the ${blockBytes} bytes a block holds`);
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
    bitsPerSample: [layout.bytesPerSample * 8],
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
function readPlainRow(view: DataView, layout: Layout, start: number, step: number, cols: number, out: Float64Array, at: number, nd: number): void {
  const le = layout.littleEndian;
  let p = start;
  switch (layout.kind) {
    case 'Float32':
      for (let c = 0; c < cols; c++, p += step) { const v = view.getFloat32(p, le); out[at + c] = v === nd ? Number.NaN : v; }
      break;
    case 'Float64':
      for (let c = 0; c < cols; c++, p += step) { const v = view.getFloat64(p, le); out[at + c] = v === nd ? Number.NaN : v; }
      break;
    case 'UInt8':
      for (let c = 0; c < cols; c++, p += step) { const v = view.getUint8(p); out[at + c] = v === nd ? Number.NaN : v; }
      break;
    case 'Int8':
      for (let c = 0; c < cols; c++, p += step) { const v = view.getInt8(p); out[at + c] = v === nd ? Number.NaN : v; }
      break;
    case 'UInt16':
      for (let c = 0; c < cols; c++, p += step) { const v = view.getUint16(p, le); out[at + c] = v === nd ? Number.NaN : v; }
      break;
    case 'Int16':
      for (let c = 0; c < cols; c++, p += step) { const v = view.getInt16(p, le); out[at + c] = v === nd ? Number.NaN : v; }
      break;
    case 'UInt32':
      for (let c = 0; c < cols; c++, p += step) { const v = view.getUint32(p, le); out[at + c] = v === nd ? Number.NaN : v; }
      break;
    case 'Int32':
      for (let c = 0; c < cols; c++, p += step) { const v = view.getInt32(p, le); out[at + c] = v === nd ? Number.NaN : v; }
      break;
  }
}

/**
 * Horizontal differencing (TIFF 6.0 section 14, predictor 2): each sample word is stored as the difference from the
 * same sample of the pixel to its left, modulo 2^bits, restarting at every block row. Undo it on the unsigned words
 * (in the file's byte order), then reinterpret them as the sample type. Float32 words are summed as integers, as
 * libtiff does.
 */
function readDifferencedRow(view: DataView, layout: Layout, start: number, step: number, cols: number, out: Float64Array, at: number, nd: number): void {
  const le = layout.littleEndian;
  let p = start;
  let acc = 0;
  switch (layout.kind) {
    case 'UInt8':
      for (let c = 0; c < cols; c++, p += step) { acc = (acc + view.getUint8(p)) & 0xff; out[at + c] = acc === nd ? Number.NaN : acc; }
      break;
    case 'Int8':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getUint8(p)) & 0xff;
        const v = (acc << 24) >> 24;
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'UInt16':
      for (let c = 0; c < cols; c++, p += step) { acc = (acc + view.getUint16(p, le)) & 0xffff; out[at + c] = acc === nd ? Number.NaN : acc; }
      break;
    case 'Int16':
      for (let c = 0; c < cols; c++, p += step) {
        acc = (acc + view.getUint16(p, le)) & 0xffff;
        const v = (acc << 16) >> 16;
        out[at + c] = v === nd ? Number.NaN : v;
      }
      break;
    case 'UInt32':
      for (let c = 0; c < cols; c++, p += step) { acc = (acc + view.getUint32(p, le)) >>> 0; out[at + c] = acc === nd ? Number.NaN : acc; }
      break;
    case 'Int32':
      for (let c = 0; c < cols; c++, p += step) { acc = (acc + view.getInt32(p, le)) | 0; out[at + c] = acc === nd ? Number.NaN : acc; }
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
  block: Uint8Array, layout: Layout, rowStart: number, words: number, stride: number, sampleInPixel: number,
  cols: number, out: Float64Array, at: number, nd: number, scratch: FloatRowScratch,
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
