/**
 * The particle-tracking result files of one solve (scenario key `tracking`), as bytes, and its parts of
 * summary.json and the printout:
 * - `capture-zones.geojson`: one Polygon/MultiPolygon feature per withdrawal well and capture time (`time` null for
 *   the steady capture zone), RFC 7946 (WGS 84 longitude/latitude, exterior rings counter-clockwise);
 * - `pathlines.geojson`: LineStrings, backward from every withdrawal well and forward from `tracking.points`,
 *   with `id`, `direction`, `travelTime`, `endsAt`;
 * - `capture-well.tif`: per cell the number of the well its water reaches (1, 2, ... in the order of
 *   summary.json `tracking.wells`), 0 where it reaches no withdrawal well, nodata on inactive cells;
 * - `travel-time.tif`: per cell the travel time to that well, nodata where no well captures it.
 * With the native-CRS option (as for contours) or a raster without an EPSG code, `*.native.geojson` in the raster's
 * own coordinates. Pure functions of a SolveResult: no file system here.
 */
import type { SolveResult } from '../analysis/result.js';
import type { TrackingRun } from '../analysis/tracking/run.js';
import type { CaptureComparison } from '../analysis/tracking/compareCapture.js';
import type { ReportTracking } from '../report/index.js';
import { signedArea, type CaptureZoneFeature, type PathlineFeature } from '../analysis/tracking/capture.js';
import { CAUTION } from '../caution.js';
import { makeTransform } from '../crs.js';
import { crsLabel, type Grid } from '../grid.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
import { VERSION } from '../version.js';
import { resultRasterOptions } from './rasterOptions.js';
import type { PendingFile, RasterEncoder } from './pending.js';

const WGS84 = 4326;
/** Decimals of written coordinates: 7 in degrees (about 1 cm), 3 in map units. */
const LONLAT_DECIMALS = 7;
const NATIVE_DECIMALS = 3;

export interface TrackingFileOptions {
  /** Also write the GeoJSON in the raster's own CRS (`*.native.geojson`); the contours' option. */
  nativeContours?: boolean;
}

type XY = (x: number, y: number) => [number, number];

/** The tracking files of one solve (none without `result.tracking`), with remarks for the summary. */
export function trackingFiles(
  result: SolveResult,
  prefix = '',
  options: TrackingFileOptions = {},
): { files: Array<PendingFile<Uint8Array>>; warnings: string[] } {
  return trackingFilesWith(result, prefix, options, encodeFloat32GeoTiff);
}

/** As trackingFiles, with the rasters encoded by `encode`. */
export function trackingFilesWith<B extends Uint8Array | Promise<Uint8Array>>(
  result: SolveResult,
  prefix: string,
  options: TrackingFileOptions,
  encode: RasterEncoder<B>,
): { files: Array<PendingFile<B>>; warnings: string[] } {
  const run = result.tracking;
  if (!run) return { files: [], warnings: [] };
  const { grid } = result.model;
  const files: Array<PendingFile<B>> = [];
  const warnings: string[] = [];
  const epsg = grid.crs?.epsg ?? null;
  if (epsg !== null) {
    const transform = makeTransform(epsg, WGS84);
    const toLonLat: XY = (x, y) => {
      const p = transform.forward(x, y, 'tracking vertex');
      return [round(p.x, LONLAT_DECIMALS), round(p.y, LONLAT_DECIMALS)];
    };
    files.push({ name: `${prefix}capture-zones.geojson`, bytes: json(captureZonesGeoJson(run, result, toLonLat, null)) });
    files.push({ name: `${prefix}pathlines.geojson`, bytes: json(pathlinesGeoJson(run, result, toLonLat, null)) });
  } else {
    warnings.push('the raster has no EPSG code, so capture zones and pathlines are written only in its own coordinates (*.native.geojson)');
  }
  if (options.nativeContours || epsg === null) {
    const native: XY = (x, y) => [round(x, NATIVE_DECIMALS), round(y, NATIVE_DECIMALS)];
    const label = crsLabel(grid.crs);
    files.push({ name: `${prefix}capture-zones.native.geojson`, bytes: json(captureZonesGeoJson(run, result, native, label)) });
    files.push({ name: `${prefix}pathlines.native.geojson`, bytes: json(pathlinesGeoJson(run, result, native, label)) });
  }
  const { wellRaster, timeRaster } = trackingRasters(run, result.system.active);
  files.push(
    raster(
      result,
      grid,
      `${prefix}capture-well.tif`,
      wellRaster,
      'capturing well number (see summary.json tracking.wells; 0 = none)',
      encode,
    ),
  );
  files.push(
    raster(result, grid, `${prefix}travel-time.tif`, timeRaster, `travel time to the capturing well (${result.model.units.time})`, encode),
  );
  return { files, warnings };
}

/** The capturing-well number (k + 1, 0 for none, NaN inactive) and the travel time (NaN where none) per cell. */
export function trackingRasters(run: TrackingRun, active: Uint8Array): { wellRaster: Float64Array; timeRaster: Float64Array } {
  const { capturingWell, travelTime } = run.capture;
  const n = capturingWell.length;
  const wellRaster = new Float64Array(n);
  const timeRaster = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    if (!active[p]) {
      wellRaster[p] = NaN;
      timeRaster[p] = NaN;
      continue;
    }
    const k = capturingWell[p]!;
    wellRaster[p] = k + 1;
    timeRaster[p] = k >= 0 ? travelTime[p]! : NaN;
  }
  return { wellRaster, timeRaster };
}

function raster<B extends Uint8Array | Promise<Uint8Array>>(
  result: SolveResult,
  grid: Grid,
  name: string,
  values: Float64Array,
  what: string,
  encode: RasterEncoder<B>,
): PendingFile<B> {
  const description = `piezomap ${VERSION} ${what}: ${result.model.title}. ${CAUTION}`;
  return { name, bytes: encode(grid, values, resultRasterOptions(description)) };
}

function json(value: unknown): string {
  return JSON.stringify(value) + '\n';
}

function round(v: number, decimals: number): number {
  const f = 10 ** decimals;
  return Math.round(v * f) / f;
}

function collection(features: unknown[], crs: string | null): Record<string, unknown> {
  const out: Record<string, unknown> = { type: 'FeatureCollection', features };
  if (crs !== null) {
    out.coordinateSystem = `${crs} (the raster's own coordinates, not WGS 84: not RFC 7946 GeoJSON; assign this CRS when loading)`;
  }
  return out;
}

/** Capture zones as GeoJSON: contract properties `well`, `time` (null = steady), plus `area` in square map units. */
export function captureZonesGeoJson(run: TrackingRun, result: SolveResult, xy: XY, crs: string | null): Record<string, unknown> {
  const units = result.model.units;
  const features = run.capture.zones
    .filter((z) => z.geometry !== null)
    .map((zone) => ({
      type: 'Feature',
      properties: {
        well: zone.properties.well,
        time: zone.properties.time,
        area: round(zone.properties.area, 3),
        areaUnits: `${units.length}2`,
        timeUnits: units.time,
      },
      geometry: projectZone(zone, xy),
    }));
  return collection(features, crs);
}

/** Rings mapped through `xy`, closing vertices kept, exterior rings counter-clockwise and holes clockwise after it. */
function projectZone(zone: CaptureZoneFeature, xy: XY): Record<string, unknown> {
  const polygon = (rings: number[][][]) =>
    rings.map((ring, r) => {
      let out = ring.map(([x, y]) => xy(x!, y!));
      const ccw = signedArea(out) > 0;
      if ((r === 0) !== ccw) out = out.reverse();
      return out;
    });
  const g = zone.geometry!;
  return g.type === 'Polygon'
    ? { type: 'Polygon', coordinates: polygon(g.coordinates) }
    : { type: 'MultiPolygon', coordinates: g.coordinates.map(polygon) };
}

/** Backward pathlines of the wells, then forward tracks of the points: `id`, `direction`, `travelTime`, `endsAt`, `endReason`. */
export function pathlinesGeoJson(run: TrackingRun, result: SolveResult, xy: XY, crs: string | null): Record<string, unknown> {
  const units = result.model.units;
  const line = (f: PathlineFeature, well: string | null) => {
    const coordinates: number[][] = [];
    for (const [x, y] of f.geometry.coordinates) {
      const point = xy(x!, y!);
      const last = coordinates[coordinates.length - 1];
      if (!last || last[0] !== point[0] || last[1] !== point[1]) coordinates.push(point);
    }
    // RFC 7946 LineStrings need two positions: a track that never left its start point is drawn as a dot.
    if (coordinates.length === 1) coordinates.push([...coordinates[0]!]);
    return {
      type: 'Feature',
      properties: {
        id: f.properties.id,
        direction: f.properties.direction,
        travelTime: round(f.properties.travelTime, 6),
        endsAt: f.properties.endsAt,
        endReason: f.properties.endReason,
        ...(well !== null ? { well } : {}),
        timeUnits: units.time,
      },
      geometry: { type: 'LineString', coordinates },
    };
  };
  const wellOf = (id: string) => id.slice(0, id.lastIndexOf('-'));
  const features = [
    ...run.capture.pathlines.map((f) => line(f, wellOf(f.properties.id))),
    ...run.points.map((p) => line(p.pathline, null)),
  ];
  return collection(features, crs);
}

/** Zone areas per well and capture time (null = steady), square map units. */
export function zoneAreas(run: TrackingRun): Array<{ well: string; time: number | null; area: number }> {
  return run.capture.zones.map((z) => ({ well: z.properties.well, time: z.properties.time, area: z.properties.area }));
}

/** summary.json `tracking`. */
export function trackingSummary(run: TrackingRun): Record<string, unknown> {
  const { settings, capture } = run;
  return {
    captureTimes: settings.captureTimes,
    particlesPerWell: settings.particlesPerWell,
    maxTime: settings.maxTime ?? null,
    exactTravelTimeUpTo: Number.isFinite(capture.exactTime) ? capture.exactTime : null,
    wells: capture.wells.map((w, k) => ({
      id: w.id,
      rasterValue: k + 1,
      capturedCells: w.capturedCells,
      refined: w.refined,
      zones: capture.zones
        .filter((z) => z.properties.well === w.id)
        .map((z) => ({ time: z.properties.time, area: round(z.properties.area, 3) })),
    })),
    points: run.points.map((p) => ({
      id: p.id,
      endsAt: p.endsAt,
      endReason: p.endReason,
      travelTime: Number.isFinite(p.travelTime) ? Number(p.travelTime.toPrecision(12)) : null,
      end: { x: round(p.endX, 3), y: round(p.endY, 3), row: p.endRow, col: p.endCol },
    })),
    weakSinks: capture.weakSinks.map((w) => ({
      name: w.name,
      kind: w.kind,
      row: w.row,
      col: w.col,
      direction: w.direction,
      fraction: round(w.fraction, 6),
      stops: w.stops,
    })),
  };
}

/** Printout lines for summary.json `tracking` (none when absent). */
export function trackingLines(tracking: unknown, units: { length: string; time: string }): string[] {
  if (!tracking || typeof tracking !== 'object') return [];
  const t = tracking as {
    wells: Array<{ id: string; zones: Array<{ time: number | null; area: number }> }>;
    points: Array<{ id: string; endsAt: string; endReason: string; travelTime: number | null }>;
  };
  const out: string[] = [];
  if (t.wells.length) {
    out.push(`Capture  zone areas in ${units.length}² by travel time ("steady": all water that ever reaches the well)`);
    for (const w of t.wells) {
      const parts = w.zones.map((z) => `${z.time === null ? 'steady' : `${z.time} ${units.time}`}: ${formatArea(z.area)}`);
      out.push(`  ${w.id}: ${parts.join(' · ')}`);
    }
  }
  for (const p of t.points) {
    const time = p.travelTime === null ? '' : ` after ${formatTime(p.travelTime)} ${units.time}`;
    const where =
      p.endReason === 'well' ? `reaches well ${p.endsAt}` : p.endReason === 'boundary' ? `leaves through ${p.endsAt}` : `ends: ${p.endsAt}`;
    out.push(`Track    ${p.id} (forward): ${where}${time}`);
  }
  return out;
}

function formatArea(a: number): string {
  return Math.round(a).toLocaleString('en-US');
}

function formatTime(t: number): string {
  return t >= 100 ? Math.round(t).toLocaleString('en-US') : t.toPrecision(3);
}

/** The report's view of a run's tracking; with `change`, a variant's zones against the baseline's. */
export function reportTracking(run: TrackingRun, change: CaptureComparison | null = null): ReportTracking {
  const changeOf = new Map((change?.zones ?? []).map((z) => [`${z.well}\u0000${z.time}`, z.change]));
  const out: ReportTracking = {
    captureTimes: run.settings.captureTimes,
    wells: run.capture.wells.map((w) => ({
      id: w.id,
      zones: run.capture.zones
        .filter((z) => z.properties.well === w.id)
        .map((z) => ({
          time: z.properties.time,
          area: z.properties.area,
          ...(change ? { change: changeOf.get(`${w.id}\u0000${z.properties.time}`) ?? null } : {}),
        })),
    })),
    points: run.points.map((p) => ({ id: p.id, endsAt: p.endsAt, endReason: p.endReason, travelTime: p.travelTime })),
    warnings: run.warnings,
  };
  if (change) {
    out.newCaptures = change.newCaptures;
    out.lostZones = change.zones
      .filter((z) => z.variant === null && z.time === null && z.baseline !== null)
      .map((z) => ({ well: z.well, area: z.baseline! }));
  }
  return out;
}

/** A variant's `capture` in the comparison's summary.json. */
export function captureComparisonJson(c: CaptureComparison): Record<string, unknown> {
  return {
    zones: c.zones.map((z) => ({
      well: z.well,
      time: z.time,
      baselineArea: z.baseline === null ? null : round(z.baseline, 3),
      variantArea: z.variant === null ? null : round(z.variant, 3),
      areaChange: round(z.change, 3),
    })),
    receptorsInNewCaptureZones: c.newCaptures.map((n) => ({
      receptor: n.receptor,
      well: n.well,
      travelTime: Number.isFinite(n.travelTime) ? Number(n.travelTime.toPrecision(12)) : null,
      baselineWell: n.baselineWell,
    })),
  };
}

/** Printout lines of the comparison: each well's steady-zone change and receptors inside new capture zones. */
export function captureComparisonLines(
  variants: ReadonlyArray<{ name: string; capture?: unknown }>,
  units: { length: string; time: string },
): string[] {
  const out: string[] = [];
  for (const v of variants) {
    const c = v.capture as
      | {
          zones: Array<{ well: string; time: number | null; variantArea: number | null; areaChange: number }>;
          receptorsInNewCaptureZones: Array<{ receptor: string; well: string; travelTime: number | null; baselineWell: string | null }>;
        }
      | undefined;
    if (!c) continue;
    if (!out.length) out.push(`Capture zones against the baseline: area in ${units.length}² (change)`);
    const byWell = new Map<string, string[]>();
    for (const z of c.zones) {
      const parts = byWell.get(z.well) ?? [];
      const sign = z.areaChange > 0 ? '+' : '';
      parts.push(
        `${z.time === null ? 'steady' : `${z.time} ${units.time}`}: ${formatArea(z.variantArea ?? 0)} (${sign}${formatArea(z.areaChange)})`,
      );
      byWell.set(z.well, parts);
    }
    for (const [well, parts] of byWell) out.push(`  ${v.name} ${well}: ${parts.join(' · ')}`);
    for (const n of c.receptorsInNewCaptureZones) {
      const time = n.travelTime === null ? '' : `, travel time ${formatTime(n.travelTime)} ${units.time}`;
      out.push(
        `  ${v.name}: receptor ${n.receptor} lies inside a new capture zone of ${n.well}${time}${n.baselineWell ? ` (baseline: ${n.baselineWell})` : ''}`,
      );
    }
  }
  return out;
}
