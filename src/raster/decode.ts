/**
 * Pixel data of one band: blocks decompressed (DEFLATE through node:zlib, ZSTD through zstddec with its output bounded
 * by the block size, LZW through our own bounded decoder, PackBits from geotiff.js), predictors undone, byte order
 * and sample type converted, nodata and the internal mask applied, one pass per block row. The layout comes from
 * layout.ts; what the values mean (scale, offset, unit) from metadata.ts.
 */
import { inflateSync } from 'node:zlib';
import { getDecoder } from 'geotiff';
import { PiezomapError, describeThrown, inputError } from '../errors.js';
import { ZSTDDecoder } from 'zstddec/stream';
import { decodeLzw } from './lzw.js';
import { DAMAGE_HINT } from './layout.js';
import type { Layout } from './layout.js';

/** One ZSTD decoder (a WebAssembly instance) for every file, made on first use. */
export const zstd = new ZSTDDecoder();

/**
 * Set the cells the internal mask marks as missing (0) to NaN. The mask packs 8 cells per byte, most significant bit
 * first, each block row starting on a new byte (TIFF 6.0 sections 3 and 8).
 */
export async function applyMask(bytes: Uint8Array, mask: Layout, values: Float64Array, label: string): Promise<void> {
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

// Scratch word to reinterpret integer bits as a float (little-endian host checked below).
export const F32 = new Float32Array(1);
export const F32_BITS = new Uint32Array(F32.buffer);
export const HOST_LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

export async function decodeBand(
  bytes: Uint8Array,
  layout: Layout,
  sample: number,
  nodata: number | null,
  label: string,
): Promise<Float64Array> {
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
export async function decompressorFor(layout: Layout): Promise<(data: Uint8Array) => Uint8Array> {
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
export function readPlainRow(
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
export function readDifferencedRow(
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
export interface FloatRowScratch {
  bytes: Uint8Array;
  f32: Float32Array;
  f64: Float64Array;
}

export function floatRowScratch(width: number): FloatRowScratch {
  const bytes = new Uint8Array(8 * width);
  return { bytes, f32: new Float32Array(bytes.buffer), f64: new Float64Array(bytes.buffer) };
}

/**
 * Floating-point predictor (Adobe Photoshop TIFF Technical Note 3, predictor 3): a row of `words` samples is stored
 * as byte planes, most significant byte first, then byte-wise differenced with a stride of the samples per pixel.
 * Undo the differencing in place over the whole row, then gather each wanted sample's bytes from the planes into
 * little-endian order and read them as floats.
 */
export function readFloatPredictedRow(
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
