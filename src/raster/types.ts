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
  /** e.g. "Float32", "Int16". */
  sampleType: string;
}

export interface WriteRasterOptions {
  /** Value written for NaN cells, and declared as GDAL nodata. Default -9999. */
  nodata?: number;
  /** Tile edge in pixels (multiple of 16). Default 256. */
  tileSize?: number;
  /** zlib level 1..9, default 6. */
  compressionLevel?: number;
  /** Free-text description stored in the file (TIFF ImageDescription). */
  description?: string;
}
