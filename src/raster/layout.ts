/**
 * How a GeoTIFF image lays out its samples: tags read into a `Layout` (sample type, byte order, predictor,
 * compression, tiles or strips and their byte ranges), the internal mask's layout, and the checks that refuse what
 * we do not read as GDAL does (baseline tags that change the samples' meaning, overlapping blocks, blocks past the
 * end of the file). Nothing here decodes pixel data (decode.ts does); read.ts puts the two together.
 */
import type { GeoTIFF, GeoTIFFImage } from 'geotiff';
import { type PiezomapError, inputError } from '../errors.js';
import { findBlockOverlap, type tiffStructure } from './structure.js';

/** Cells beyond this are refused outright (typed-array lengths and index arithmetic stay in int32 range). */
export const MAX_CELLS = 2 ** 31 - 1;

/** TIFF Compression codes we decode (TIFF 6.0 section 3, 5, 9; Adobe DEFLATE; ZSTD as registered by GDAL/libtiff). */
export const COMPRESSION_NAMES: ReadonlyMap<number, string> = new Map([
  [1, 'none'],
  [5, 'LZW'],
  [8, 'DEFLATE'],
  [32946, 'DEFLATE'],
  [32773, 'PackBits'],
  [50000, 'ZSTD'],
]);

export const CONVERT_HINT = 'rewrite it as a plain GeoTIFF, e.g. `gdal_translate -ot Float32 -co COMPRESS=DEFLATE in.tif out.tif`';

/** The numeric type of a band, decided from SampleFormat and BitsPerSample (TIFF 6.0 section 19). */
export type SampleKind = 'UInt8' | 'Int8' | 'UInt16' | 'Int16' | 'UInt32' | 'Int32' | 'Float32' | 'Float64';

export interface Layout {
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

export const DAMAGE_HINT = 'the file is damaged; copy or export it again from the original';

/**
 * Baseline TIFF tags that change what the stored samples mean and that we do not apply: refuse the file rather than
 * read it differently from GDAL (TIFF 6.0 sections 3, 8; palette colour, bit order, orientation).
 */
export async function refuseIgnoredTags(image: GeoTIFFImage, label: string): Promise<void> {
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
export async function findMask(tiff: GeoTIFF, ifdCount: number, layout: Layout, label: string, fileSize: number): Promise<Layout | null> {
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

export async function readMaskLayout(image: GeoTIFFImage, label: string, fileSize: number, main: Layout): Promise<Layout> {
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
export function refuseOverlappingBlocks(
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

export async function tagValue(image: GeoTIFFImage, name: string): Promise<unknown> {
  const fd = image.getFileDirectory();
  return fd.hasTag(name as never) ? await fd.loadValue(name as never) : undefined;
}

/** A tag as a list of numbers (single values become one-element lists), or null when absent. */
export async function numbersTag(image: GeoTIFFImage, name: string): Promise<number[] | null> {
  const v = await tagValue(image, name);
  if (v === undefined || v === null) return null;
  if (typeof v === 'number' || typeof v === 'bigint') return [Number(v)];
  if (typeof v === 'object' && 'length' in (v as object)) return Array.from(v as ArrayLike<number | bigint>, Number);
  return null;
}

export function nonEmpty(list: number[] | null): number[] | null {
  return list && list.length > 0 ? list : null;
}

export async function numberTag(image: GeoTIFFImage, name: string, fallback: number): Promise<number> {
  const v = await numbersTag(image, name);
  return v?.length ? v[0]! : fallback;
}

export async function readLayout(image: GeoTIFFImage, label: string, fileSize: number): Promise<Layout> {
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

export function sampleKind(format: number, bits: number): SampleKind | null {
  // SampleFormat 1 unsigned, 2 signed, 3 IEEE float, 4 undefined (read as unsigned, as GDAL does)
  if (format === 1 || format === 4) return bits === 8 ? 'UInt8' : bits === 16 ? 'UInt16' : bits === 32 ? 'UInt32' : null;
  if (format === 2) return bits === 8 ? 'Int8' : bits === 16 ? 'Int16' : bits === 32 ? 'Int32' : null;
  if (format === 3) return bits === 32 ? 'Float32' : bits === 64 ? 'Float64' : null;
  return null;
}

export function describeSampleType(format: number, bits: number): string {
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

export function formatBytes(n: number): string {
  if (n >= 1e9) return `${(n / 1e9).toFixed(1)} GB`;
  if (n >= 1e6) return `${(n / 1e6).toFixed(1)} MB`;
  return `${Math.round(n / 1e3)} kB`;
}

/**
 * Block size, count and byte ranges of an image (tiles or strips; `planes` separate sample planes), each block checked
 * to end within the file. `prefix` names the image in messages ('' for the image, 'mask ' for its mask).
 */
export async function readBlocks(
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
