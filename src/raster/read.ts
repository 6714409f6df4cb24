/**
 * Read one band of a GeoTIFF into doubles, with its grid (size, geotransform as GDAL reports it, CRS) and nodata.
 *
 * geotiff.js parses the TIFF structure (classic and BigTIFF IFDs, tags) and supplies the PackBits decompressor;
 * DEFLATE goes through node:zlib, ZSTD through zstddec with the output bounded by the block size, LZW through our own
 * bounded decoder (lzw.ts). Block assembly, predictors, byte order, sample conversion and
 * nodata masking are done by us (decode.ts), in one pass per block row, because geotiff 3.0.5 gets several of them
 * wrong (horizontal differencing on big-endian files, Float64 with predictor 2, silently zero-filled truncated
 * blocks). The image layout and the tags we refuse are read in layout.ts, the values' meaning in metadata.ts; this
 * module puts them together, checks the file's structure and side files, and sizes a raster from its header.
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
import { basename } from 'node:path';
import { fromArrayBuffer, fromFile } from 'geotiff';
import type { GeoTIFF } from 'geotiff';
import { PiezomapError, describeThrown, inputError } from '../errors.js';
import type { Grid } from '../grid.js';
import { crsFromGeoKeys } from './geokeys.js';
import type { RasterData } from './types.js';
import { applyMask, decodeBand } from './decode.js';
export { MAX_CELLS } from './layout.js';
import { DAMAGE_HINT, findMask, formatBytes, readLayout, refuseIgnoredTags, refuseOverlappingBlocks } from './layout.js';
import type { Layout } from './layout.js';
import { readBandMetadata, readGeoKeys, readGeotransform, readNodata, verticalUnit } from './metadata.js';
import { findValueOverlap, tiffStructure } from './structure.js';

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
