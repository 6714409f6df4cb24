/**
 * GeoJSON (RFC 7946) Point features for point lists (wells, observations, receptors). Pure: takes parsed JSON,
 * returns the points with their properties; the file is read and the points reprojected in load.ts.
 *
 * Decisions:
 * - A FeatureCollection or a single Feature; each feature's geometry must be a Point (or a MultiPoint holding one
 *   point, as some GIS exports write). Anything else is an error naming the feature by its index.
 * - Coordinates are WGS 84 longitude, latitude (RFC 7946 section 4); a third value (altitude) is ignored. A legacy
 *   `crs` member naming an EPSG code (the 2008 GeoJSON format, still written by GIS tools) is honoured.
 * - Ids come from `properties.id`, else the feature's own `id`; whole numbers are taken as text. Duplicate ids are
 *   refused, naming both features.
 */
import { inputError } from '../errors.js';

export interface PointFeature {
  /** Position in the file, 0-based. */
  index: number;
  id: string;
  /** x = longitude (or easting in a legacy `crs`), y = latitude (or northing). */
  x: number;
  y: number;
  properties: Record<string, unknown>;
}

export interface PointFeatureCollection {
  /** EPSG code of the coordinates: 4326 unless a legacy `crs` member names another. */
  epsg: number;
  features: PointFeature[];
}

const HINT = 'expected a GeoJSON FeatureCollection of Point features with WGS 84 longitude/latitude and properties such as "id"';

function isObject(value: unknown): value is Record<string, unknown> {
  return typeof value === 'object' && value !== null && !Array.isArray(value);
}

function kindOf(value: unknown): string {
  return Array.isArray(value)
    ? 'a list'
    : value === null
      ? 'null'
      : typeof value === 'object'
        ? 'an object'
        : `${typeof value} ${JSON.stringify(value)}`;
}

/** The EPSG code of a legacy `crs` member, 4326 without one. */
function crsOf(json: Record<string, unknown>, label: string): number {
  const crs = json.crs;
  if (crs === undefined || crs === null) return 4326;
  const name = isObject(crs) && isObject(crs.properties) ? crs.properties.name : undefined;
  if (typeof name === 'string') {
    if (/CRS84$/i.test(name)) return 4326;
    const match = /EPSG:{1,2}(\d{3,6})$/i.exec(name);
    if (match) return Number(match[1]);
  }
  throw inputError(`${label}: the "crs" member ${JSON.stringify(crs)} does not name an EPSG code`, {
    hint: 'RFC 7946 GeoJSON is WGS 84 longitude/latitude without a "crs" member; re-export the file as such (e.g. ogr2ogr -t_srs EPSG:4326)',
  });
}

export function readPointFeatures(json: unknown, label: string, what: string): PointFeatureCollection {
  if (!isObject(json)) throw inputError(`${label}: not a GeoJSON object (found ${kindOf(json)})`, { hint: HINT });
  const epsg = crsOf(json, label);
  let list: unknown[];
  if (json.type === 'FeatureCollection') {
    if (!Array.isArray(json.features)) throw inputError(`${label}: the FeatureCollection has no "features" list`, { hint: HINT });
    list = json.features;
  } else if (json.type === 'Feature') {
    list = [json];
  } else {
    throw inputError(`${label}: "type" is ${JSON.stringify(json.type) ?? 'missing'}, not a GeoJSON FeatureCollection or Feature`, {
      hint: HINT,
    });
  }
  const features: PointFeature[] = [];
  const firstIndex = new Map<string, number>();
  list.forEach((feature, index) => {
    const where = `${label} feature ${index}`;
    if (!isObject(feature) || feature.type !== 'Feature')
      throw inputError(`${where}: not a GeoJSON Feature (found ${kindOf(feature)})`, { hint: HINT });
    const geometry = feature.geometry;
    if (!isObject(geometry)) throw inputError(`${where}: has no geometry`, { hint: `each ${what} needs a Point geometry` });
    let position: unknown;
    if (geometry.type === 'Point') position = geometry.coordinates;
    else if (geometry.type === 'MultiPoint' && Array.isArray(geometry.coordinates) && geometry.coordinates.length === 1)
      position = geometry.coordinates[0];
    else
      throw inputError(`${where}: geometry is ${JSON.stringify(geometry.type)}, not a Point`, {
        hint: `each ${what} is one Point feature`,
      });
    if (
      !Array.isArray(position) ||
      position.length < 2 ||
      typeof position[0] !== 'number' ||
      typeof position[1] !== 'number' ||
      !Number.isFinite(position[0]) ||
      !Number.isFinite(position[1])
    ) {
      throw inputError(`${where}: coordinates ${JSON.stringify(position)} are not [longitude, latitude] numbers`, { hint: HINT });
    }
    const [x, y] = position as [number, number];
    if (epsg === 4326 && (Math.abs(x) > 180 || Math.abs(y) > 90)) {
      throw inputError(`${where}: [${x}, ${y}] is not a WGS 84 longitude/latitude`, {
        hint: 'RFC 7946 GeoJSON is in longitude/latitude; projected coordinates belong in the scenario JSON or a CSV file',
      });
    }
    const properties = isObject(feature.properties) ? feature.properties : {};
    const rawId = properties.id ?? feature.id;
    const id = typeof rawId === 'number' && Number.isInteger(rawId) ? String(rawId) : typeof rawId === 'string' ? rawId.trim() : '';
    if (id === '') throw inputError(`${where}: has no id (a text "id" property)`, { hint: `each ${what} needs an id` });
    const earlier = firstIndex.get(id);
    if (earlier !== undefined)
      throw inputError(`${where}: duplicate ${what} id "${id}" (also feature ${earlier})`, { hint: 'ids must be unique within a list' });
    firstIndex.set(id, index);
    features.push({ index, id, x, y, properties });
  });
  return { epsg, features };
}

/**
 * A numeric property: a finite number, or undefined when absent; anything else is an error naming the feature.
 * `where` names the feature, e.g. `wells.geojson feature 3`.
 */
export function numberProperty(feature: PointFeature, where: string, key: string): number | undefined {
  const value = feature.properties[key];
  if (value === undefined || value === null) return undefined;
  if (typeof value !== 'number' || !Number.isFinite(value)) {
    throw inputError(`${where} (id "${feature.id}"): property "${key}" is ${JSON.stringify(value)}, not a number`);
  }
  return value;
}
