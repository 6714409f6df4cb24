/**
 * Contour GeoJSON files of a field (head, drawdown): RFC 7946 (WGS 84) when the raster has an EPSG code, and in the
 * raster's own CRS on request or when it has none. Pure functions: no file system here.
 */
import { contourField, contoursToGeoJson, type ContourOptions, type ContourSet } from '../analysis/contours.js';
import { makeTransform } from '../crs.js';
import { crsLabel, type Grid } from '../grid.js';
import type { OutputFile } from './resultFolder.js';

/** What contour files are made of: the product options that concern them. */
export interface ContourFileOptions {
  nativeContours?: boolean;
  contourInterval?: number;
}

const WGS84 = 4326;

/** Contour GeoJSON files for a field: RFC 7946 (WGS 84) when the raster has an EPSG code, native on request. */
export function contourFiles(
  grid: Grid,
  field: Float64Array,
  quantity: 'head' | 'drawdown',
  units: string,
  options: ContourFileOptions,
  prefix: string,
): { files: OutputFile[]; contours: ContourSet; warnings: string[] } {
  const contours = contourField(grid, field, contourOptions(options));
  return { ...contourFilesOf(grid, contours, quantity, units, options, prefix), contours };
}

/** The contour options of the product options. */
export function contourOptions(options: ContourFileOptions): ContourOptions {
  return options.contourInterval ? { interval: options.contourInterval } : {};
}

/** The names contourFiles gives its files, known before the contours are traced. */
export function contourFileNames(grid: Grid, quantity: 'head' | 'drawdown', options: ContourFileOptions, prefix: string): string[] {
  const epsg = grid.crs?.epsg ?? null;
  const names: string[] = [];
  if (epsg !== null) names.push(`${prefix}${quantity}-contours.geojson`);
  if (options.nativeContours || epsg === null) names.push(`${prefix}${quantity}-contours.native.geojson`);
  return names;
}

/** The files and warnings of contourFiles for contours already traced. */
export function contourFilesOf(
  grid: Grid,
  contours: ContourSet,
  quantity: 'head' | 'drawdown',
  units: string,
  options: ContourFileOptions,
  prefix: string,
): { files: OutputFile[]; warnings: string[] } {
  const files: OutputFile[] = [];
  const warnings: string[] = contours.note ? [`${quantity} contours: ${contours.note}`] : [];
  const epsg = grid.crs?.epsg ?? null;
  if (epsg !== null) {
    const transform = makeTransform(epsg, WGS84);
    const collection = contoursToGeoJson(contours, {
      quantity,
      units,
      toLonLat: (x, y) => transform.forward(x, y, `${quantity} contour vertex`),
    });
    files.push({ name: `${prefix}${quantity}-contours.geojson`, bytes: JSON.stringify(collection) + '\n' });
  } else {
    warnings.push(
      `the raster has no EPSG code, so ${quantity} contours are written only in its own coordinates (${quantity}-contours.native.geojson)`,
    );
  }
  if (options.nativeContours || epsg === null) {
    const collection = contoursToGeoJson(contours, { quantity, units, crsLabel: crsLabel(grid.crs) });
    files.push({ name: `${prefix}${quantity}-contours.native.geojson`, bytes: JSON.stringify(collection) + '\n' });
  }
  return { files, warnings };
}
