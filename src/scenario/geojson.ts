/**
 * GeoJSON (RFC 7946) features as shapes for the scenario: polygons and lines with their properties, checked and
 * reprojected into the raster CRS. Pure: takes parsed JSON, returns typed arrays; the file is read in load.ts.
 *
 * Decisions (documented for users in docs/scenario-shapes.md):
 * - The text may be a FeatureCollection, a single Feature or a bare geometry. GeometryCollection is refused.
 * - Coordinates are WGS 84 longitude/latitude (RFC 7946 section 4). A legacy `crs` member (the 2008 GeoJSON
 *   format, still written by GDAL for other CRSs) naming an EPSG code is honoured, e.g.
 *   `{"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32633"}}`; OGC CRS84 means EPSG:4326.
 * - A third coordinate (altitude) is ignored. Rings need not be closed (the last vertex joins the first) and may
 *   wind either way (RFC 7946 section 3.1.6 asks parsers not to reject on winding).
 * - Points, a feature without geometry, an empty geometry and non-finite coordinates are errors naming the feature.
 */
import { describeThrown, inputError, PiezomapError } from '../errors.js';
import type { PointTransform } from '../crs.js';

export type ShapeGeometry =
  /** polygons[i] = the rings of one polygon (outer ring, then holes), each as interleaved x, y. */
  | { type: 'polygon'; polygons: Float64Array[][] }
  /** lines[i] = one line's vertices as interleaved x, y. */
  | { type: 'line'; lines: Float64Array[] };

export interface ShapeFeature {
  /** Position in the file (0-based), as in the messages. */
  index: number;
  /** `feature 3`, or `feature 3 (id "north-lake")` when the feature has an id. */
  label: string;
  geometry: ShapeGeometry;
  /** The feature's properties ({} when it has none). */
  properties: Record<string, unknown>;
}

export interface ShapeCollection {
  /** EPSG code of the coordinates: 4326 unless a legacy `crs` member names another. */
  epsg: number;
  /** True when the EPSG code came from a legacy `crs` member. */
  crsFromMember: boolean;
  features: ShapeFeature[];
}

const GEOMETRY_TYPES = new Set(['Point', 'MultiPoint', 'LineString', 'MultiLineString', 'Polygon', 'MultiPolygon', 'GeometryCollection']);

/** Check parsed GeoJSON and collect its features. `label` names the file in messages (e.g. `lake.geojson`). */
export function readShapes(json: unknown, label: string): ShapeCollection {
  if (!isObject(json)) throw inputError(`${label}: not a GeoJSON object (found ${kindOf(json)})`, { hint: GEOJSON_HINT });
  const type = json.type;
  const { epsg, fromMember } = crsOf(json, label);
  let features: ShapeFeature[];
  if (type === 'FeatureCollection') {
    if (!Array.isArray(json.features)) throw inputError(`${label}: the FeatureCollection has no "features" list`, { hint: GEOJSON_HINT });
    features = json.features.map((feature: unknown, index: number) => readFeature(feature, index, label));
  } else if (type === 'Feature') {
    features = [readFeature(json, 0, label)];
  } else if (typeof type === 'string' && GEOMETRY_TYPES.has(type)) {
    features = [{ index: 0, label: 'geometry', geometry: readGeometry(json, `${label} geometry`), properties: {} }];
  } else {
    throw inputError(`${label}: "type" is ${JSON.stringify(type) ?? 'missing'}, not a GeoJSON FeatureCollection, Feature or geometry`, {
      hint: GEOJSON_HINT,
    });
  }
  if (features.length === 0)
    throw inputError(`${label}: the FeatureCollection has no features`, { hint: 'the file needs at least one polygon or line' });
  return { epsg, crsFromMember: fromMember, features };
}

const GEOJSON_HINT =
  'expected GeoJSON (RFC 7946) polygons or lines, e.g. exported with: ogr2ogr -f GeoJSON -t_srs EPSG:4326 out.geojson in.shp';

function readFeature(value: unknown, index: number, file: string): ShapeFeature {
  const id = isObject(value) && (typeof value.id === 'string' || typeof value.id === 'number') ? value.id : undefined;
  const label = id === undefined ? `feature ${index}` : `feature ${index} (id ${JSON.stringify(id)})`;
  const where = `${file} ${label}`;
  if (!isObject(value)) throw inputError(`${where}: not a GeoJSON Feature object (found ${kindOf(value)})`, { hint: GEOJSON_HINT });
  if (value.type !== 'Feature')
    throw inputError(`${where}: "type" is ${JSON.stringify(value.type) ?? 'missing'}, not "Feature"`, { hint: GEOJSON_HINT });
  if (value.geometry === null || value.geometry === undefined) {
    throw inputError(`${where} has no geometry`, { hint: 'give every feature a polygon or a line, or delete the feature' });
  }
  const properties = value.properties;
  if (properties !== null && properties !== undefined && !isObject(properties)) {
    throw inputError(`${where}: "properties" must be an object or null (found ${kindOf(properties)})`);
  }
  return {
    index,
    label,
    geometry: readGeometry(value.geometry, where),
    properties: (properties as Record<string, unknown> | null | undefined) ?? {},
  };
}

function readGeometry(value: unknown, where: string): ShapeGeometry {
  if (!isObject(value)) throw inputError(`${where}: the geometry is not an object (found ${kindOf(value)})`, { hint: GEOJSON_HINT });
  const type = value.type;
  const coordinates = value.coordinates;
  switch (type) {
    case 'Point':
    case 'MultiPoint':
      throw inputError(`${where} is a ${type}: a point cannot be a fixed head or an inactive area here`, {
        hint: 'use a small polygon around the place (its cells whose centre lies inside are used), or a line',
      });
    case 'GeometryCollection':
      throw inputError(`${where} is a GeometryCollection, which is not supported here`, {
        hint: 'split it into one feature per geometry, e.g. ogr2ogr -explodecollections out.geojson in.geojson',
      });
    case 'LineString':
      return { type: 'line', lines: [readLine(coordinates, where, 'coordinates')] };
    case 'MultiLineString':
      return {
        type: 'line',
        lines: readList(coordinates, where, 'coordinates', 'lines').map((line, i) => readLine(line, where, `coordinates[${i}]`)),
      };
    case 'Polygon':
      return { type: 'polygon', polygons: [readPolygon(coordinates, where, 'coordinates')] };
    case 'MultiPolygon':
      return {
        type: 'polygon',
        polygons: readList(coordinates, where, 'coordinates', 'polygons').map((polygon, i) =>
          readPolygon(polygon, where, `coordinates[${i}]`),
        ),
      };
    default:
      throw inputError(`${where}: geometry "type" is ${JSON.stringify(type) ?? 'missing'}, not a GeoJSON geometry type`, {
        hint: 'expected Polygon, MultiPolygon, LineString or MultiLineString',
      });
  }
}

/** A non-empty JSON array, else an error naming the path inside the geometry. */
function readList(value: unknown, where: string, path: string, what: string): unknown[] {
  if (!Array.isArray(value))
    throw inputError(`${where}: ${path} must be a list of ${what} (found ${kindOf(value)})`, { hint: GEOJSON_HINT });
  if (value.length === 0)
    throw inputError(`${where}: ${path} is empty (the geometry has no ${what})`, {
      hint: 'delete the empty feature or give it coordinates',
    });
  return value;
}

function readPolygon(value: unknown, where: string, path: string): Float64Array[] {
  return readList(value, where, path, 'rings').map((ring, i) => {
    const ringPath = `${path}[${i}]`;
    let xy = readPositions(ring, where, ringPath);
    const m = xy.length >> 1;
    // The closing vertex repeats the first (RFC 7946 section 3.1.6); drop it, the fill joins last to first anyway.
    if (m > 1 && xy[0] === xy[2 * m - 2] && xy[1] === xy[2 * m - 1]) xy = xy.slice(0, 2 * m - 2);
    if (xy.length < 6)
      throw inputError(`${where}: ${ringPath} is not a ring: it needs at least 3 different vertices`, { hint: GEOJSON_HINT });
    return xy;
  });
}

function readLine(value: unknown, where: string, path: string): Float64Array {
  const xy = readPositions(value, where, path);
  if (xy.length < 4) throw inputError(`${where}: ${path} is not a line: it needs at least 2 vertices`, { hint: GEOJSON_HINT });
  return xy;
}

/** A list of positions [x, y] or [x, y, z] as interleaved x, y. */
function readPositions(value: unknown, where: string, path: string): Float64Array {
  const list = readList(value, where, path, 'positions');
  const xy = new Float64Array(list.length * 2);
  for (let k = 0; k < list.length; k++) {
    const position = list[k];
    const x = Array.isArray(position) ? position[0] : undefined;
    const y = Array.isArray(position) ? position[1] : undefined;
    if (typeof x !== 'number' || typeof y !== 'number' || !Number.isFinite(x) || !Number.isFinite(y)) {
      throw inputError(
        `${where}: ${path}[${k}] is not a position [x, y] of two numbers (found ${JSON.stringify(position) ?? kindOf(position)})`,
        {
          hint: GEOJSON_HINT,
        },
      );
    }
    xy[2 * k] = x;
    xy[2 * k + 1] = y;
  }
  return xy;
}

/**
 * The EPSG code of the coordinates: a legacy `crs` member of type "name" (EPSG:n, urn:ogc:def:crs:EPSG::n, an
 * opengis.net EPSG URL, or OGC CRS84) or of type "EPSG" ({"code": n}); 4326 when there is none.
 */
function crsOf(json: Record<string, unknown>, label: string): { epsg: number; fromMember: boolean } {
  const crs = json.crs;
  if (crs === undefined || crs === null) return { epsg: 4326, fromMember: false };
  const hint =
    'RFC 7946 GeoJSON is WGS 84 longitude/latitude without a "crs" member; write it so, e.g. ogr2ogr -f GeoJSON -t_srs EPSG:4326 out.geojson in.geojson';
  if (isObject(crs) && isObject(crs.properties)) {
    if (crs.type === 'name' && typeof crs.properties.name === 'string') {
      const name = crs.properties.name.trim();
      if (/^urn:ogc:def:crs:OGC:[\d.]*:CRS84$/i.test(name) || /^OGC:CRS84$/i.test(name)) return { epsg: 4326, fromMember: true };
      const match =
        /^EPSG:(\d{3,6})$/i.exec(name) ??
        /^urn:ogc:def:crs:EPSG:[\d.]*:(\d{3,6})$/i.exec(name) ??
        /^https?:\/\/www\.opengis\.net\/def\/crs\/EPSG\/[\d.]+\/(\d{3,6})$/i.exec(name);
      if (match) return { epsg: Number(match[1]), fromMember: true };
      throw inputError(`${label}: the "crs" member names "${name}", which is not an EPSG code piezomap can read`, { hint });
    }
    if (crs.type === 'EPSG' && typeof crs.properties.code === 'number' && Number.isInteger(crs.properties.code)) {
      return { epsg: crs.properties.code, fromMember: true };
    }
  }
  throw inputError(`${label}: the "crs" member ${JSON.stringify(crs)} does not name an EPSG code`, { hint });
}

/**
 * Reproject every vertex in place with `transform` (null: already in the raster CRS). Straight edges stay straight
 * in the raster CRS: vertices are moved, edges are not bent (fine while edges are short against the curvature of
 * the projection; densify long edges before if needed). Errors name the file and feature.
 */
export function reprojectShapes(collection: ShapeCollection, transform: PointTransform | null, label: string): void {
  if (!transform) return;
  for (const feature of collection.features) {
    const what = `${label} ${feature.label}`;
    const arrays = feature.geometry.type === 'line' ? feature.geometry.lines : feature.geometry.polygons.flat();
    for (const xy of arrays) {
      for (let k = 0; k < xy.length; k += 2) {
        let point: { x: number; y: number };
        try {
          point = transform.forward(xy[k]!, xy[k + 1]!, what);
        } catch (thrown) {
          if (thrown instanceof PiezomapError) {
            const hint =
              transform.from.epsg === 4326 && !collection.crsFromMember
                ? 'RFC 7946 GeoJSON coordinates are longitude, latitude in degrees; a file in another CRS needs a "crs" member naming its EPSG code (ogr2ogr writes one), or reprojection to EPSG:4326'
                : thrown.detail.hint;
            throw inputError(thrown.message, hint ? { hint } : {});
          }
          throw inputError(`${what}: cannot reproject (${xy[k]}, ${xy[k + 1]}): ${describeThrown(thrown)}`);
        }
        xy[k] = point.x;
        xy[k + 1] = point.y;
      }
    }
  }
}

/** How a shape entry's features get their head. */
export type HeadSpec = { head: number } | { headProperty: string };

/**
 * The head of a feature: one number for the whole feature, or for a line a value per vertex (NaN where a vertex
 * has null) to interpolate along it. A property holding a list gives per-vertex values: for a LineString one value
 * per vertex, for a MultiLineString one list per line. The first and last vertex of each line need a value.
 */
export type FeatureHead = { type: 'uniform'; head: number } | { type: 'vertices'; heads: Float64Array[] };

export function featureHead(feature: ShapeFeature, spec: HeadSpec, where: string): FeatureHead {
  if ('head' in spec) return { type: 'uniform', head: spec.head };
  const name = spec.headProperty;
  const at = `${where} ${feature.label}`;
  if (!(name in feature.properties)) {
    const known = Object.keys(feature.properties);
    throw inputError(`${at} has no property "${name}" for its head`, {
      hint: known.length
        ? `its properties are: ${known.join(', ')}`
        : 'the feature has no properties; give "head" in the scenario instead of "headProperty"',
    });
  }
  const value = feature.properties[name];
  if (typeof value === 'number') {
    if (!Number.isFinite(value)) throw inputError(`${at}: property "${name}" is ${value}, not a finite head`);
    return { type: 'uniform', head: value };
  }
  if (Array.isArray(value)) {
    const geometry = feature.geometry;
    if (geometry.type !== 'line') {
      throw inputError(`${at}: property "${name}" is a list, but per-vertex heads are only for lines (the feature is a polygon)`, {
        hint: 'give a polygon one head (a number)',
      });
    }
    const multi = geometry.lines.length > 1 || Array.isArray(value[0]);
    const lists = multi ? value : [value];
    if (lists.length !== geometry.lines.length) {
      throw inputError(`${at}: property "${name}" has ${lists.length} list(s) of heads for ${geometry.lines.length} line(s)`, {
        hint: 'a MultiLineString needs one list of vertex heads per line: [[h, ...], [h, ...]]',
      });
    }
    return {
      type: 'vertices',
      heads: lists.map((list: unknown, i: number) =>
        vertexHeads(list, geometry.lines[i]!.length >> 1, `${at}: property "${name}"${multi ? `[${i}]` : ''}`),
      ),
    };
  }
  const shown = typeof value === 'string' ? `the text ${JSON.stringify(value)}` : JSON.stringify(value);
  throw inputError(`${at}: property "${name}" is ${shown}, not a number`, {
    hint: 'store heads as numbers (not text) in the GeoJSON, or as a list with one value per vertex of a line',
  });
}

function vertexHeads(list: unknown, vertices: number, at: string): Float64Array {
  if (!Array.isArray(list)) throw inputError(`${at} is not a list of vertex heads (found ${kindOf(list)})`);
  if (list.length !== vertices) {
    throw inputError(`${at} has ${list.length} value(s) for a line of ${vertices} vertices`, {
      hint: 'give one head per vertex, null where unknown (it is interpolated)',
    });
  }
  const heads = new Float64Array(vertices);
  for (let k = 0; k < vertices; k++) {
    const h = list[k];
    if (h === null) {
      heads[k] = NaN;
    } else if (typeof h === 'number' && Number.isFinite(h)) {
      heads[k] = h;
    } else {
      throw inputError(`${at}[${k}] is ${JSON.stringify(h) ?? kindOf(h)}, not a finite head (or null)`);
    }
  }
  if (Number.isNaN(heads[0]!) || Number.isNaN(heads[vertices - 1]!)) {
    throw inputError(`${at}: the first and last vertex need a head (null is only for vertices in between)`, {
      hint: 'heads are interpolated between known vertices, never extrapolated',
    });
  }
  return heads;
}

function isObject(value: unknown): value is Record<string, unknown> {
  return typeof value === 'object' && value !== null && !Array.isArray(value);
}

function kindOf(value: unknown): string {
  if (value === undefined) return 'no value: the member is missing';
  if (value === null) return 'null';
  if (Array.isArray(value)) return 'a list';
  return typeof value === 'object' ? 'an object' : `${typeof value} ${JSON.stringify(value)}`;
}
