export { readRaster, readRasterHeader, MAX_CELLS } from './read.js';
export type { ReadRasterOptions, RasterHeader } from './read.js';
export { encodeFloat32GeoTiff } from './write.js';
export type { EncodeOptions } from './write.js';
export type { RasterData, WriteRasterOptions } from './types.js';
