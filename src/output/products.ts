/**
 * The derived products of one solve, as files: contours (GeoJSON), Darcy flux and velocity rasters, the
 * quick-look map and the pieces of the HTML report. Pure functions of a SolveResult: no file system here.
 */
import { contourField, contoursToGeoJson, type ContourSet } from '../analysis/contours.js';
import { darcyFlux, linearVelocity, type DarcyFlux } from '../analysis/flux.js';
import { crsLabel, type Grid } from '../grid.js';
import { CAUTION } from '../caution.js';
import { VERSION } from '../version.js';
import { encodeFloat32GeoTiff, type EncodeOptions } from '../raster/write.js';
import { makeTransform } from '../crs.js';
import { renderMapPng, type MapInput } from '../report/index.js';
import type { ReportRun, ReportMap } from '../report/index.js';
import type { SolveResult } from '../analysis/result.js';
import type { OutputFile } from './resultFolder.js';
import { mapCellLayers } from '../discretisation/terms/types.js';
import { headRange } from './summary.js';

export interface ProductOptions {
  /** Write contours, flux rasters, the quick-look map and the report (default true). */
  maps?: boolean;
  /** Also write contours in the raster's own CRS (`*.native.geojson`). */
  nativeContours?: boolean;
  /** Contour interval in length units; default an automatic round interval. */
  contourInterval?: number;
}

/** One rendered map, kept for the HTML report. */
export interface RenderedMap {
  caption: string;
  file: string;
  png: Uint8Array;
}

export interface Products {
  files: OutputFile[];
  maps: RenderedMap[];
  warnings: string[];
}

/**
 * Encodes a raster product: `encodeFloat32GeoTiff` (bytes at once), or `encodeFloat32GeoTiffAsync` (the tiles are
 * compressed on the thread pool while the other products are computed; the same bytes).
 */
export type RasterEncoder<B extends Uint8Array | Promise<Uint8Array>> = (grid: Grid, values: Float64Array, options: EncodeOptions) => B;

/** A result file whose bytes may still be on their way (a raster being compressed); settled before writing. */
export interface PendingFile<B extends Uint8Array | Promise<Uint8Array>> {
  name: string;
  bytes: string | Uint8Array | B;
}

const WGS84 = 4326;

/** Contour GeoJSON files for a field: RFC 7946 (WGS 84) when the raster has an EPSG code, native on request. */
export function contourFiles(
  grid: Grid,
  field: Float64Array,
  quantity: 'head' | 'drawdown',
  units: string,
  options: ProductOptions,
  prefix: string,
): { files: OutputFile[]; contours: ContourSet; warnings: string[] } {
  const contours = contourField(grid, field, options.contourInterval ? { interval: options.contourInterval } : {});
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
    warnings.push(`the raster has no EPSG code, so ${quantity} contours are written only in its own coordinates (${quantity}-contours.native.geojson)`);
  }
  if (options.nativeContours || epsg === null) {
    const collection = contoursToGeoJson(contours, { quantity, units, crsLabel: crsLabel(grid.crs) });
    files.push({ name: `${prefix}${quantity}-contours.native.geojson`, bytes: JSON.stringify(collection) + '\n' });
  }
  return { files, contours, warnings };
}

function fluxOf(result: SolveResult): DarcyFlux {
  return darcyFlux({
    grid: result.model.grid,
    head: result.head,
    eastConductance: result.system.conductanceEast,
    southConductance: result.system.conductanceSouth,
    thickness: result.model.thickness,
  });
}

function raster<B extends Uint8Array | Promise<Uint8Array>>(result: SolveResult, name: string, values: Float64Array, what: string, encode: RasterEncoder<B>): PendingFile<B> {
  const { units, title } = result.model;
  return {
    name,
    bytes: encode(result.model.grid, values, { nodata: -9999, description: `piezomap ${VERSION} ${what} (${units.length}/${units.time}): ${title}. ${CAUTION}` }),
  };
}

/** Contours, flux and velocity rasters, and the head map of one solve. */
export function solveProducts(result: SolveResult, options: ProductOptions = {}, prefix = ''): Products {
  return solveProductsWith(result, options, prefix, encodeFloat32GeoTiff);
}

/**
 * As solveProducts, with the rasters encoded by `encode`. The rasters are started first, so that an asynchronous
 * encoder compresses them while the contours and the map are computed; the files keep solveProducts' order.
 */
export function solveProductsWith<B extends Uint8Array | Promise<Uint8Array>>(
  result: SolveResult,
  options: ProductOptions,
  prefix: string,
  encode: RasterEncoder<B>,
): { files: Array<PendingFile<B>>; maps: RenderedMap[]; warnings: string[] } {
  if (options.maps === false) return { files: [], maps: [], warnings: [] };
  const { model, system } = result;
  const files: Array<PendingFile<B>> = [];
  const warnings: string[] = [];

  const flux = fluxOf(result);
  const rasters = [
    raster(result, `${prefix}darcy-flux-x.tif`, flux.qx, 'Darcy flux, east component', encode),
    raster(result, `${prefix}darcy-flux-y.tif`, flux.qy, 'Darcy flux, north component', encode),
    raster(result, `${prefix}darcy-flux.tif`, flux.magnitude, 'Darcy flux magnitude', encode),
  ];
  if (model.porosity !== undefined) {
    const velocity = linearVelocity(model.grid, flux, model.porosity);
    rasters.push(raster(result, `${prefix}velocity.tif`, velocity.speed, 'average linear velocity', encode));
  }

  const headContours = contourFiles(model.grid, result.head, 'head', model.units.length, options, prefix);
  files.push(...headContours.files);
  warnings.push(...headContours.warnings);
  files.push(...rasters);

  const mapInput: MapInput = {
    grid: model.grid,
    values: result.head,
    quantity: 'head',
    units: model.units,
    title: model.title,
    caution: CAUTION,
    contours: headContours.contours,
    cellLayers: mapCellLayers(system.terms, system.active.length),
    wells: result.wells.map((w) => ({ id: w.id, x: w.x, y: w.y, rate: w.rate })),
    observations: result.observations.map((o) => ({ id: o.id, x: o.x, y: o.y })),
    flux: { qx: flux.qx, qy: flux.qy },
    footnote: `piezomap ${VERSION}`,
  };
  const map = renderMapPng(mapInput);
  const mapName = `${prefix}head-map.png`;
  files.push({ name: mapName, bytes: map.png });
  return { files, maps: [{ caption: `Head, ${model.units.length}`, file: mapName, png: map.png }], warnings };
}

/** The report's view of one run. */
export function reportRun(name: string, result: SolveResult, maps: RenderedMap[], extra: Partial<ReportRun> = {}): ReportRun {
  const { stats, model } = result;
  const { min, max } = headRange(result.head);
  return {
    name,
    solver: {
      method: stats.method,
      converged: stats.converged,
      stopReason: stats.stopReason,
      iterations: stats.iterations,
      relativeResidual: stats.relativeResidual,
      tolerance: model.solver.tolerance,
      criterion: stats.criterion,
      setupSeconds: stats.setupSeconds,
      solveSeconds: stats.solveSeconds,
      convergenceFactor: stats.convergenceFactor,
      notes: stats.notes,
      history: stats.history,
    },
    budget: { terms: result.budget.terms, discrepancyPercent: result.budget.discrepancyPercent },
    head: { min, max },
    wells: result.wells.map((w) => ({ id: w.id, x: w.x, y: w.y, row: w.row, col: w.col, rate: w.rate, cellHead: w.cellHead })),
    observations: result.observations.map((o) => ({ id: o.id, observed: o.observed, simulated: o.simulated, residual: o.residual })),
    maps: maps.map((m): ReportMap => ({ caption: m.caption, png: m.png, file: m.file })),
    warnings: result.warnings,
    ...extra,
  };
}
