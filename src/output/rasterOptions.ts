/**
 * How the result GeoTIFFs are encoded: Float32, nodata -9999, 256 x 256 tiles, DEFLATE with the floating-point
 * predictor, run-length matches only (zlib's Z_RLE strategy). Measured on the 1024² benchmark's predicted tiles
 * (bench/README.md, "Whole run against the reference"): the four result rasters took 105 ms of CPU against 278 ms at
 * level 4 (the previous setting), for files 5 % (flux) to 14 % (head) larger: the low bytes of Float32 values are
 * noise that longer match searches rarely shorten. GDAL and every other DEFLATE reader read it: the stream is
 * standard DEFLATE. (With Z_RLE zlib's level does not change the matches; it is kept for readers of the options.)
 */
import type { EncodeOptions } from '../raster/write.js';

export const RESULT_DEFLATE_LEVEL = 4;

/** The encoding options of a result raster with this description (ImageDescription tag). */
export function resultRasterOptions(description: string): EncodeOptions {
  return { nodata: -9999, compressionLevel: RESULT_DEFLATE_LEVEL, runLengthOnly: true, description };
}
