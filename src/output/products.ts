/**
 * The derived products of one solve, as files: contours (GeoJSON), Darcy flux and velocity rasters, the
 * quick-look map and the pieces of the HTML report. Pure functions of a SolveResult: no file system here.
 */
import { dryCells, headsForOutput, saturatedThicknessField } from '../discretisation/aquifer.js';
import { contourField, contoursToGeoJson, type ContourSet } from '../analysis/contours.js';
import { darcyFlux, linearVelocity, type DarcyFlux } from '../analysis/flux.js';
import { crsLabel, type Grid } from '../grid.js';
import { CAUTION } from '../caution.js';
import { VERSION } from '../version.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
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
    // Water tables: the Darcy flux per unit area divides by the saturated thickness, not a given one.
    thickness: result.system.waterTable === null ? result.model.thickness : saturatedThicknessField(result.system.waterTable, result.head),
  });
}

function raster(result: SolveResult, name: string, values: Float64Array, what: string): OutputFile {
  const { units, title } = result.model;
  return {
    name,
    bytes: encodeFloat32GeoTiff(result.model.grid, values, { nodata: -9999, description: `piezomap ${VERSION} ${what} (${units.length}/${units.time}): ${title}. ${CAUTION}` }),
  };
}

/** Contours, flux and velocity rasters, and the head map of one solve. */
export function solveProducts(result: SolveResult, options: ProductOptions = {}, prefix = ''): Products {
  if (options.maps === false) return { files: [], maps: [], warnings: [] };
  const { model, system } = result;
  const files: OutputFile[] = [];
  const warnings: string[] = [];

  // Dry cells (water tables) are nodata on the map and in the contours, and get a legend entry of their own.
  const shownHead = headsForOutput(system.waterTable, result.head);
  const headContours = contourFiles(model.grid, shownHead, 'head', model.units.length, options, prefix);
  files.push(...headContours.files);
  warnings.push(...headContours.warnings);

  const flux = fluxOf(result);
  files.push(raster(result, `${prefix}darcy-flux-x.tif`, flux.qx, 'Darcy flux, east component'));
  files.push(raster(result, `${prefix}darcy-flux-y.tif`, flux.qy, 'Darcy flux, north component'));
  files.push(raster(result, `${prefix}darcy-flux.tif`, flux.magnitude, 'Darcy flux magnitude'));
  if (model.porosity !== undefined) {
    const velocity = linearVelocity(model.grid, flux, model.porosity);
    files.push(raster(result, `${prefix}velocity.tif`, velocity.speed, 'average linear velocity'));
  }

  const mapInput: MapInput = {
    grid: model.grid,
    // The map keeps the (below-bottom) heads of dry cells so that their hatched layer has cells to draw on.
    values: result.head,
    quantity: 'head',
    units: model.units,
    title: model.title,
    caution: CAUTION,
    contours: headContours.contours,
    cellLayers: [
      ...mapCellLayers(system.terms, system.active.length),
      ...(system.waterTable === null ? [] : [{ legend: 'Dry cells', cells: dryCells(system.waterTable, result.head).mask }]),
    ],
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
