import type { Grid } from '../grid.js';

/** One band of a GeoTIFF, decoded to doubles. Cells equal to the nodata value (or NaN) are NaN here. */
export interface RasterData {
  /** The path as given (for messages). */
  path: string;
  grid: Grid;
  values: Float64Array;
  /** GDAL nodata value from the file, or null when it has none. */
  nodata: number | null;
  /** Number of bands in the file (only band 1 is read unless asked). */
  bandCount: number;
  /** e.g. "Float32", "Int16" (the stored type; `values` hold stored x scale + offset). */
  sampleType: string;
  /** GDAL's per-band scale and offset, applied to `values` (1 and 0 when the file sets none). */
  scale: number;
  offset: number;
  /** The unit the file declares for the values (GDAL's unit type), or null. Not converted: callers decide. */
  unit: string | null;
  /** Whether an internal mask marked cells as missing (NaN in `values`). */
  masked: boolean;
}

export interface WriteRasterOptions {
  /** Value written for NaN cells, and declared as GDAL nodata. Default -9999. */
  nodata?: number;
  /** Tile edge in pixels (multiple of 16). Default 256. */
  tileSize?: number;
  /** zlib level 1..9, default 6. */
  compressionLevel?: number;
  /**
   * DEFLATE with run-length matches only (zlib's Z_RLE strategy) instead of zlib's full match search at
   * `compressionLevel`: a standard DEFLATE stream every reader decodes, made in a fraction of the time on the
   * predicted bytes of noisy rasters, for somewhat larger files. Default false.
   */
  runLengthOnly?: boolean;
  /** Free-text description stored in the file (TIFF ImageDescription). */
  description?: string;
}
