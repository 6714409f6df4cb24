/**
 * How the result GeoTIFFs are encoded: Float32, nodata -9999, 256 x 256 tiles, DEFLATE with the floating-point
 * predictor at level 4. Level 4 (zlib's lightest level with lazy matching) takes about 28 % less CPU than zlib's
 * default 6 on the benchmark's head and flux rasters, for files about 1.2 % larger (bench/README.md, "Whole run
 * against the reference"); GDAL and every other DEFLATE reader read any level.
 */
import type { EncodeOptions } from '../raster/write.js';

export const RESULT_DEFLATE_LEVEL = 4;

/** The encoding options of a result raster with this description (ImageDescription tag). */
export function resultRasterOptions(description: string): EncodeOptions {
  return { nodata: -9999, compressionLevel: RESULT_DEFLATE_LEVEL, description };
}
