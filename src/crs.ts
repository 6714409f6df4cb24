/**
 * EPSG codes to proj4 definitions, offline, and point transforms between two EPSG CRSs.
 *
 * proj4 ships EPSG:4326, 4269, 3857 and the WGS 84 UTM zones (326xx/327xx); every other code is looked up in the
 * `epsg-index` package's per-code files (node_modules/epsg-index/s/<code>.json, field `proj4`). A code that cannot be
 * resolved, or whose definition needs a datum grid-shift file (`+nadgrids=...`), is an input error: proj4 would
 * otherwise return NaN or silently skip the shift.
 */
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import type proj4Type from 'proj4';
import { describeThrown, inputError } from './errors.js';

export interface Projection {
  epsg: number;
  /** proj4 definition string. */
  definition: string;
  /** Longitude/latitude in degrees (proj4 order: x = lon, y = lat). */
  geographic: boolean;
  /** Human name when known (from epsg-index), else `EPSG:<code>`. */
  name: string;
}

export interface PointTransform {
  from: Projection;
  to: Projection;
  /**
   * Transform one point. `what` names the point for messages (e.g. `wells[2] (W3)`).
   * Throws an input error instead of returning non-finite coordinates, or when a geographic input is out of range.
   */
  forward(x: number, y: number, what: string): { x: number; y: number };
}

const cache = new Map<number, Projection>();
const require = createRequire(import.meta.url);

let proj4Module: typeof proj4Type | null = null;
/**
 * proj4, loaded on first use (the same package entry an `import` resolves to): most runs give every point in the
 * raster's CRS and never transform, and loading it costs about 50 ms of start-up.
 */
function proj4(): typeof proj4Type {
  proj4Module ??= require('proj4') as typeof proj4Type;
  return proj4Module;
}

/** Parse `EPSG:32633` (any case, optional spaces) into 32633; null when the text is not of that form. */
export function parseEpsg(text: string): number | null {
  const match = /^\s*EPSG\s*:\s*(\d{3,6})\s*$/i.exec(text);
  return match ? Number(match[1]) : null;
}

/** The proj4 projection for an EPSG code, resolved offline. */
export function projectionFor(epsg: number): Projection {
  const cached = cache.get(epsg);
  if (cached) return cached;
  const key = `EPSG:${epsg}`;
  let projection: Projection;
  if (proj4().defs(key)) {
    // Built into proj4 (WGS 84 geographic, NAD83 geographic, Web Mercator, WGS 84 UTM zones): proj4 accepts the key itself.
    projection = { epsg, definition: key, geographic: isGeographic(key), name: key };
  } else {
    const entry = readEpsgIndexEntry(epsg);
    const name = entry.name ? `${key} (${entry.name})` : key;
    if (entry.kind !== undefined && !HORIZONTAL_KINDS.has(entry.kind)) {
      throw inputError(`${name} is not a horizontal coordinate reference system (kind ${entry.kind})`, {
        hint: 'pointCrs needs the code of a projected or geographic CRS',
      });
    }
    if (!entry.proj4) {
      throw inputError(`${name}: no proj4 definition is known for this code`, {
        hint: 'give the points in the raster CRS and drop "pointCrs", or reproject them first (e.g. with GDAL ogr2ogr)',
      });
    }
    const shiftGrid = gridShiftFile(entry.proj4);
    if (shiftGrid) {
      throw inputError(`${name} needs the datum grid-shift file "${shiftGrid}", which piezomap does not carry`, {
        hint: 'reproject the points with a tool that has the grid (e.g. GDAL), or give them in the raster CRS and drop "pointCrs"',
      });
    }
    projection = { epsg, definition: entry.proj4, geographic: isGeographic(entry.proj4), name };
  }
  cache.set(epsg, projection);
  return projection;
}

const HORIZONTAL_KINDS = new Set(['CRS-PROJCRS', 'CRS-GEOGCRS', 'CRS-GEOG3DCRS']);

/** A transform from one EPSG CRS to another; both codes must resolve (see projectionFor). */
export function makeTransform(fromEpsg: number, toEpsg: number): PointTransform {
  const from = projectionFor(fromEpsg);
  const to = projectionFor(toEpsg);
  let converter: proj4Type.Converter;
  try {
    converter = proj4()(from.definition, to.definition);
  } catch (thrown) {
    throw inputError(`cannot build a transform from ${from.name} to ${to.name}: ${describeThrown(thrown)}`);
  }
  const forward = (x: number, y: number, what: string): { x: number; y: number } => {
    if (!Number.isFinite(x) || !Number.isFinite(y)) {
      throw inputError(`${what}: coordinates (${x}, ${y}) are not finite numbers`);
    }
    if (from.geographic && (x < -180 || x > 180 || y < -90 || y > 90)) {
      throw inputError(`${what}: (${x}, ${y}) is not a longitude/latitude pair in degrees, as ${from.name} requires`, {
        hint: 'pointCrs geographic coordinates are x = longitude, y = latitude; drop "pointCrs" if the points are already in the raster CRS',
      });
    }
    let out: number[];
    try {
      out = converter.forward([x, y]);
    } catch (thrown) {
      throw inputError(`${what}: cannot transform (${x}, ${y}) from ${from.name} to ${to.name}: ${describeThrown(thrown)}`);
    }
    const ox = out[0];
    const oy = out[1];
    if (ox === undefined || oy === undefined || !Number.isFinite(ox) || !Number.isFinite(oy)) {
      throw inputError(`${what}: (${x}, ${y}) in ${from.name} has no valid position in ${to.name}`, {
        hint: 'check that the point lies inside the area where both coordinate systems are defined',
      });
    }
    return { x: ox, y: oy };
  };
  return { from, to, forward };
}

/**
 * The linear unit of a projected EPSG CRS ("metre", "US survey foot", ...), or undefined when unknown or geographic.
 * Never throws: it only feeds a warning.
 */
export function linearUnitOf(epsg: number): string | undefined {
  if ((epsg > 32600 && epsg <= 32660) || (epsg > 32700 && epsg <= 32760) || epsg === 3857) return 'metre';
  try {
    const entry = readEpsgIndexEntry(epsg);
    return entry.kind === 'CRS-PROJCRS' && typeof entry.unit === 'string' ? entry.unit : undefined;
  } catch {
    return undefined;
  }
}

interface EpsgIndexEntry {
  unit?: string;
  code?: string;
  kind?: string;
  name?: string;
  proj4?: string;
}

function readEpsgIndexEntry(epsg: number): EpsgIndexEntry {
  let file: string;
  try {
    file = require.resolve(`epsg-index/s/${epsg}.json`);
  } catch {
    throw inputError(`EPSG:${epsg} is not a known EPSG code`, {
      hint: 'check the code (for example EPSG:4326 for WGS 84 longitude/latitude, EPSG:326zz for WGS 84 / UTM zone zz north)',
    });
  }
  try {
    return JSON.parse(readFileSync(file, 'utf8')) as EpsgIndexEntry;
  } catch (thrown) {
    throw inputError(`EPSG:${epsg}: the offline definition file ${file} cannot be read: ${describeThrown(thrown)}`);
  }
}

/** The first grid-shift file a definition needs, ignoring `@null` (the explicit "no shift" grid). */
function gridShiftFile(definition: string): string | null {
  const match = /\+nadgrids=(\S+)/.exec(definition);
  if (!match) return null;
  const grids = match[1]!.split(',').filter((grid) => grid !== '@null');
  return grids.length ? grids.join(',') : null;
}

function isGeographic(definition: string): boolean {
  let projName: string | undefined;
  try {
    projName = (proj4().Proj(definition) as unknown as { projName?: string }).projName;
  } catch (thrown) {
    throw inputError(`proj4 cannot read the definition "${definition}": ${describeThrown(thrown)}`);
  }
  return projName === 'longlat' || projName === 'latlong' || projName === 'lonlat';
}
