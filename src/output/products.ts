/**
 * The derived products of one solve, as files: contours (GeoJSON), Darcy flux and velocity rasters, the
 * quick-look map and the pieces of the HTML report. Pure functions of a SolveResult: no file system here.
 */
import { dryCells, headsForOutput, saturatedThicknessField } from '../discretisation/aquifer.js';
import type { ContourSet } from '../analysis/contours.js';
import { darcyFlux, linearVelocity, type DarcyFlux } from '../analysis/flux.js';
import { sharedFloat64Array } from '../executor/shared.js';
import { CAUTION } from '../caution.js';
import { PiezomapError } from '../errors.js';
import { VERSION } from '../version.js';
import { resultRasterOptions } from './rasterOptions.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
import { renderMapPng, trackingOverlay, type MapInput } from '../report/index.js';
import type { ReportInputs, ReportRun, ReportMap } from '../report/index.js';
import type { SolveResult } from '../analysis/result.js';
import type { OutputFile } from './resultFolder.js';
import { mapCellLayers } from '../discretisation/terms/types.js';
import { headRange } from './summary.js';
import { reportTracking } from './tracking.js';
import { observed, type LaterFile, type PendingFile, type RasterEncoder } from './pending.js';
import type { MapJobInput, WritePool } from './writePool.js';

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

export type { PendingFile, RasterEncoder } from './pending.js';

export { contourFileNames, contourFiles, contourFilesOf, contourOptions } from './contourFiles.js';
import { contourFileNames, contourFiles, contourOptions } from './contourFiles.js';

function fluxOf(result: SolveResult, allocate?: (n: number) => Float64Array): DarcyFlux {
  return darcyFlux(
    {
      grid: result.model.grid,
      head: result.head,
      eastConductance: result.system.conductanceEast,
      southConductance: result.system.conductanceSouth,
      // Water tables: the Darcy flux per unit area divides by the saturated thickness, not a given one.
      thickness:
        result.system.waterTable === null ? result.model.thickness : saturatedThicknessField(result.system.waterTable, result.head),
    },
    allocate,
  );
}

/** The Darcy-flux rasters (east, north, magnitude) and, with a porosity, the average linear velocity. */
function fluxRasters<B extends Uint8Array | Promise<Uint8Array>>(
  result: SolveResult,
  prefix: string,
  flux: DarcyFlux,
  encode: RasterEncoder<B>,
): PendingFile<B>[] {
  const { model } = result;
  const rasters = [
    raster(result, `${prefix}darcy-flux-x.tif`, flux.qx, 'Darcy flux, east component', encode),
    raster(result, `${prefix}darcy-flux-y.tif`, flux.qy, 'Darcy flux, north component', encode),
    raster(result, `${prefix}darcy-flux.tif`, flux.magnitude, 'Darcy flux magnitude', encode),
  ];
  if (model.porosity !== undefined) {
    const velocity = linearVelocity(model.grid, flux, model.porosity);
    rasters.push(raster(result, `${prefix}velocity.tif`, velocity.speed, 'average linear velocity', encode));
  }
  return rasters;
}

function raster<B extends Uint8Array | Promise<Uint8Array>>(
  result: SolveResult,
  name: string,
  values: Float64Array,
  what: string,
  encode: RasterEncoder<B>,
): PendingFile<B> {
  const { units, title } = result.model;
  return {
    name,
    bytes: encode(
      result.model.grid,
      values,
      resultRasterOptions(`piezomap ${VERSION} ${what} (${units.length}/${units.time}): ${title}. ${CAUTION}`),
    ),
  };
}

/**
 * Per-cell exchange of every term that asks for it (head-dependent boundaries, leakage): `exchange-<name>.tif`,
 * Float32, the flow into the aquifer per cell (L^3/T, negative = out of the aquifer), nodata where the term has no
 * cell. Names are the budget term's, with characters other than letters, digits, "-" and "_" replaced by "-".
 */
export function exchangeRasters(result: SolveResult, prefix = ''): OutputFile[] {
  return exchangeRastersWith(result, prefix, encodeFloat32GeoTiff);
}

/** As exchangeRasters, with the rasters encoded by `encode`. */
export function exchangeRastersWith<B extends Uint8Array | Promise<Uint8Array>>(
  result: SolveResult,
  prefix: string,
  encode: RasterEncoder<B>,
): Array<PendingFile<B>> {
  const { system, head } = result;
  const files: Array<PendingFile<B>> = [];
  const used = new Set<string>();
  for (const term of system.terms) {
    if (!term.exchangeRaster) continue;
    const flow = new Float64Array(term.cells.length);
    term.flow(head, flow);
    const values = new Float64Array(head.length).fill(NaN);
    for (let k = 0; k < term.cells.length; k++) values[term.cells[k]!] = flow[k]!;
    const stem = term.label.replace(/[^A-Za-z0-9_-]+/g, '-');
    let name = `exchange-${stem}`;
    for (let k = 2; used.has(name.toLowerCase()); k++) name = `exchange-${stem}-${k}`;
    used.add(name.toLowerCase());
    const { units, title } = result.model;
    const description = `piezomap ${VERSION} exchange with "${term.label}" per cell, into the aquifer positive (${units.length}3/${units.time}): ${title}. ${CAUTION}`;
    files.push({ name: `${prefix}${name}.tif`, bytes: encode(result.model.grid, values, resultRasterOptions(description)) });
  }
  return files;
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

  // Dry cells (water tables) are nodata on the map and in the contours, and get a legend entry of their own.
  const shownHead = headsForOutput(system.waterTable, result.head);
  const flux = fluxOf(result);
  const rasters = fluxRasters(result, prefix, flux, encode);

  const headContours = contourFiles(model.grid, shownHead, 'head', model.units.length, options, prefix);
  files.push(...headContours.files);
  warnings.push(...headContours.warnings);
  files.push(...rasters);

  const mapInput = headMapInput(result, headContours.contours, flux);
  const map = renderMapPng(mapInput);
  const mapName = `${prefix}head-map.png`;
  files.push({ name: mapName, bytes: map.png });
  return { files, maps: [{ caption: `Head, ${model.units.length}`, file: mapName, png: map.png }], warnings };
}

/**
 * As solveProducts, built on a write pool (./writePool.ts): the contour levels are traced in the workers first (the
 * longest chain: contours, then the map), the flux here meanwhile, then the rasters and the map in the workers; the
 * GeoJSON is written here as the contours come back. The same files in the same order, their bytes on their way.
 */
export function solveProductsOnPool(
  result: SolveResult,
  options: ProductOptions,
  prefix: string,
  pool: WritePool,
): { files: LaterFile[]; maps: Promise<RenderedMap[]>; warnings: Promise<string[]> } {
  if (options.maps === false) return { files: [], maps: Promise.resolve([]), warnings: Promise.resolve([]) };
  const { model, system } = result;
  const shownHead = headsForOutput(system.waterTable, result.head);
  const contours = observed(pool.contours(model.grid, shownHead, contourOptions(options)));
  const encode: RasterEncoder<Promise<Uint8Array>> = (grid, values, encodeOptions) => pool.geotiff(grid, values, encodeOptions);
  const flux = fluxOf(result, sharedFloat64Array); // in shared memory: the workers read it without a copy
  const rasters = fluxRasters(result, prefix, flux, encode);
  // The map is handed out as soon as the contours are back, then their GeoJSON (both in the workers).
  const png = observed(contours.then((c) => pool.mapPng(mapJobInput(headMapInput(result, c, flux), result))));
  const contourOut = observed(contours.then((c) => pool.contourFiles(model.grid, c, 'head', model.units.length, options, prefix)));
  const files: LaterFile[] = contourFileNames(model.grid, 'head', options, prefix).map((name) => ({
    name,
    bytes: contourOut.then((out) => out.files.find((f) => f.name === name)!.bytes),
  }));
  files.push(...rasters);
  const mapName = `${prefix}head-map.png`;
  files.push({ name: mapName, bytes: png });
  return {
    files,
    maps: png.then((bytes) => [{ caption: `Head, ${model.units.length}`, file: mapName, png: bytes }]),
    warnings: contourOut.then((out) => out.warnings),
  };
}

/** A map input for a worker thread: its overlays (drawing functions) replaced by the tracking run they come from. */
export function mapJobInput(input: MapInput, result: SolveResult): MapJobInput {
  const { overlays, ...rest } = input;
  if (!overlays?.length) return rest;
  if (!result.tracking || overlays.length !== 1)
    throw new PiezomapError('internal', 'a map overlay other than the tracking run cannot be drawn in a worker');
  return { ...rest, tracking: { run: result.tracking, units: result.model.units } };
}

/** The head map of one solve: heads, contours, flow arrows, each term's cells, wells, receptors, residuals. */
export function headMapInput(result: SolveResult, contours: ContourSet, flux: DarcyFlux = fluxOf(result)): MapInput {
  const { model, system } = result;
  return {
    grid: model.grid,
    // The map keeps the (below-bottom) heads of dry cells so that their hatched layer has cells to draw on.
    values: result.head,
    quantity: 'head',
    units: model.units,
    title: model.title,
    caution: CAUTION,
    contours,
    cellLayers: [
      ...mapCellLayers(system.terms, system.active.length),
      ...(system.waterTable === null
        ? []
        : [
            {
              legend: 'Dry cells',
              cells: dryCells(system.waterTable, result.head).mask,
              style: { pattern: 'dots', colour: '#a50f15' } as const,
            },
          ]),
    ],
    wells: result.wells.map((w) => ({ id: w.id, x: w.x, y: w.y, rate: w.rate })),
    observations: result.observations.map((o) => ({ id: o.id, x: o.x, y: o.y, residual: o.residual })),
    receptors: (model.receptors ?? []).map((r) => ({ id: r.id, x: r.x, y: r.y })),
    flux: { qx: flux.qx, qy: flux.qy },
    footnote: `piezomap ${VERSION}`,
    ...(result.tracking ? { overlays: [trackingOverlay(result.tracking, model.units)] } : {}),
  };
}

/** The inputs a solve used, over its active cells: aquifer properties, recharge, boundary groups and wells. */
export function reportInputs(result: SolveResult): ReportInputs {
  const { model, system } = result;
  const active = system.active;
  const k = { min: Infinity, max: -Infinity, logSum: 0, count: 0 };
  const b = { min: Infinity, max: -Infinity };
  const r = { min: Infinity, max: -Infinity };
  for (let p = 0; p < active.length; p++) {
    if (!active[p]) continue;
    const kp = model.conductivity[p]!;
    if (kp < k.min) k.min = kp;
    if (kp > k.max) k.max = kp;
    k.logSum += Math.log(kp);
    k.count++;
    const bp = typeof model.thickness === 'number' ? model.thickness : model.thickness[p]!;
    if (bp < b.min) b.min = bp;
    if (bp > b.max) b.max = bp;
    const rp = typeof model.recharge === 'number' ? model.recharge : model.recharge[p]!;
    if (rp < r.min) r.min = rp;
    if (rp > r.max) r.max = rp;
  }
  const finite = (x: { min: number; max: number }) => (x.min <= x.max ? { min: x.min, max: x.max } : { min: NaN, max: NaN });
  // Boundary groups: every term drawn on maps (fixed heads now, head-dependent boundaries later), with its heads if prescribed.
  const boundaries = system.terms
    .filter((t) => t.mapLegend !== null)
    .map((t) => {
      let lo = Infinity;
      let hi = -Infinity;
      if (t.prescribedHeads)
        for (const h of t.prescribedHeads) {
          if (h < lo) lo = h;
          if (h > hi) hi = h;
        }
      return { name: t.label, cells: t.cells.length, headMin: lo <= hi ? lo : null, headMax: lo <= hi ? hi : null };
    });
  let withdrawal = 0;
  for (const w of model.wells) if (w.rate < 0) withdrawal -= w.rate;
  return {
    conductivity: { ...finite(k), geometricMean: k.count ? Math.exp(k.logSum / k.count) : NaN },
    thickness: finite(b),
    anisotropy: model.anisotropy,
    recharge: finite(r),
    boundaries,
    wells: model.wells.length,
    withdrawal,
  };
}

/** The report's view of one run. */
export function reportRun(name: string, result: SolveResult, maps: RenderedMap[], extra: Partial<ReportRun> = {}): ReportRun {
  const { stats, model } = result;
  const { min, max } = headRange(result.head, result.system.waterTable);
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
    wells: result.wells.map((w, k) => {
      const bore = result.wellbore[k];
      return {
        id: w.id,
        x: w.x,
        y: w.y,
        row: w.row,
        col: w.col,
        rate: w.rate,
        cellHead: w.cellHead,
        ...(bore && bore.id === w.id ? { wellboreHead: bore.wellboreHead, belowMinimum: bore.belowMinimum } : {}),
      };
    }),
    observations: result.observations.map((o) => ({ id: o.id, observed: o.observed, simulated: o.simulated, residual: o.residual })),
    calibration: result.calibration,
    maps: maps.map((m): ReportMap => ({ caption: m.caption, png: m.png, file: m.file })),
    warnings: result.warnings,
    ...(result.tracking ? { tracking: reportTracking(result.tracking) } : {}),
    ...extra,
  };
}
