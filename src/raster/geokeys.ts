/**
 * GeoTIFF GeoKeys: the key table, reading the GeoKeyDirectory into a name -> value record, writing one back, and
 * the CRS they describe. Key ids, names and value types from the OGC GeoTIFF standard (OGC 19-008r4, section 7 and
 * annex B; the names are those of GeoTIFF 1.0). Ids and names agree with geotiff.js's table; the SHORT/DOUBLE split is
 * from memory of the standard and is checked by a GDAL round trip of a user-defined CRS (test/raster/raster-write.test.ts).
 */
import type { Crs } from '../grid.js';

export type GeoKeyValue = number | string | number[];
export type GeoKeyRecord = Record<string, GeoKeyValue>;

/** TIFF tags that carry the GeoKeys (OGC 19-008r4, 7.1). */
export const GEO_KEY_DIRECTORY_TAG = 34735;
export const GEO_DOUBLE_PARAMS_TAG = 34736;
export const GEO_ASCII_PARAMS_TAG = 34737;

export const GT_MODEL_TYPE = 1024;
export const GT_RASTER_TYPE = 1025;
export const GEOGRAPHIC_TYPE = 2048;
export const PROJECTED_CS_TYPE = 3072;
export const PROJ_LINEAR_UNITS = 3076;
/** Code meaning "user-defined" for every *Type key. */
export const USER_DEFINED = 32767;
/** GTModelTypeGeoKey values. */
export const MODEL_PROJECTED = 1;
export const MODEL_GEOGRAPHIC = 2;
/** GTRasterTypeGeoKey values. */
export const RASTER_PIXEL_IS_AREA = 1;
export const RASTER_PIXEL_IS_POINT = 2;

const KEY_NAMES: ReadonlyArray<readonly [number, string]> = [
  [1024, 'GTModelTypeGeoKey'],
  [1025, 'GTRasterTypeGeoKey'],
  [1026, 'GTCitationGeoKey'],
  [2048, 'GeographicTypeGeoKey'],
  [2049, 'GeogCitationGeoKey'],
  [2050, 'GeogGeodeticDatumGeoKey'],
  [2051, 'GeogPrimeMeridianGeoKey'],
  [2052, 'GeogLinearUnitsGeoKey'],
  [2053, 'GeogLinearUnitSizeGeoKey'],
  [2054, 'GeogAngularUnitsGeoKey'],
  [2055, 'GeogAngularUnitSizeGeoKey'],
  [2056, 'GeogEllipsoidGeoKey'],
  [2057, 'GeogSemiMajorAxisGeoKey'],
  [2058, 'GeogSemiMinorAxisGeoKey'],
  [2059, 'GeogInvFlatteningGeoKey'],
  [2060, 'GeogAzimuthUnitsGeoKey'],
  [2061, 'GeogPrimeMeridianLongGeoKey'],
  [2062, 'GeogTOWGS84GeoKey'],
  [3072, 'ProjectedCSTypeGeoKey'],
  [3073, 'PCSCitationGeoKey'],
  [3074, 'ProjectionGeoKey'],
  [3075, 'ProjCoordTransGeoKey'],
  [3076, 'ProjLinearUnitsGeoKey'],
  [3077, 'ProjLinearUnitSizeGeoKey'],
  [3078, 'ProjStdParallel1GeoKey'],
  [3079, 'ProjStdParallel2GeoKey'],
  [3080, 'ProjNatOriginLongGeoKey'],
  [3081, 'ProjNatOriginLatGeoKey'],
  [3082, 'ProjFalseEastingGeoKey'],
  [3083, 'ProjFalseNorthingGeoKey'],
  [3084, 'ProjFalseOriginLongGeoKey'],
  [3085, 'ProjFalseOriginLatGeoKey'],
  [3086, 'ProjFalseOriginEastingGeoKey'],
  [3087, 'ProjFalseOriginNorthingGeoKey'],
  [3088, 'ProjCenterLongGeoKey'],
  [3089, 'ProjCenterLatGeoKey'],
  [3090, 'ProjCenterEastingGeoKey'],
  [3091, 'ProjCenterNorthingGeoKey'],
  [3092, 'ProjScaleAtNatOriginGeoKey'],
  [3093, 'ProjScaleAtCenterGeoKey'],
  [3094, 'ProjAzimuthAngleGeoKey'],
  [3095, 'ProjStraightVertPoleLongGeoKey'],
  [3096, 'ProjRectifiedGridAngleGeoKey'],
  [4096, 'VerticalCSTypeGeoKey'],
  [4097, 'VerticalCitationGeoKey'],
  [4098, 'VerticalDatumGeoKey'],
  [4099, 'VerticalUnitsGeoKey'],
];

/** Keys whose value is a SHORT code (stored in the directory itself); the others are DOUBLE or ASCII. */
const SHORT_KEYS = new Set([1024, 1025, 2048, 2050, 2051, 2052, 2054, 2056, 2060, 3072, 3074, 3075, 3076, 4096, 4098, 4099]);

const NAME_OF = new Map<number, string>(KEY_NAMES);
const ID_OF = new Map<string, number>(KEY_NAMES.map(([id, name]) => [name, id]));

/** Name used for a key id; unknown ids keep their number (`GeoKey5000`) so that they survive a round trip. */
export function geoKeyName(id: number): string {
  return NAME_OF.get(id) ?? `GeoKey${id}`;
}

export function geoKeyId(name: string): number | null {
  const known = ID_OF.get(name);
  if (known !== undefined) return known;
  const m = /^GeoKey(\d+)$/.exec(name);
  return m ? Number(m[1]) : null;
}

/**
 * Read a GeoKeyDirectory (SHORT array: header version, revision, minor, count; then id, location, count, offset per key).
 * ASCII values drop the trailing '|' terminator (OGC 19-008r4, 7.1.4). Throws a plain Error on a malformed directory;
 * the caller turns it into an input error naming the file.
 */
export function parseGeoKeyDirectory(directory: ArrayLike<number>, doubles: ArrayLike<number> | null, ascii: string | null): GeoKeyRecord {
  if (directory.length < 4) throw new Error('GeoKeyDirectory shorter than its 4-value header');
  const count = directory[3]!;
  if (directory.length < 4 + 4 * count) throw new Error(`GeoKeyDirectory announces ${count} keys but holds fewer`);
  const keys: GeoKeyRecord = {};
  for (let k = 0; k < count; k++) {
    const id = directory[4 + 4 * k]!;
    const location = directory[5 + 4 * k]!;
    const n = directory[6 + 4 * k]!;
    const offset = directory[7 + 4 * k]!;
    const name = geoKeyName(id);
    if (location === 0) {
      keys[name] = offset;
    } else if (location === GEO_DOUBLE_PARAMS_TAG) {
      if (!doubles || offset + n > doubles.length) throw new Error(`GeoKey ${name} points past GeoDoubleParams`);
      keys[name] = n === 1 ? doubles[offset]! : Array.from({ length: n }, (_, i) => doubles[offset + i]!);
    } else if (location === GEO_ASCII_PARAMS_TAG) {
      if (ascii === null || offset + n > ascii.length + 1) throw new Error(`GeoKey ${name} points past GeoAsciiParams`);
      let text = ascii.substring(offset, offset + n);
      if (text.endsWith('|')) text = text.slice(0, -1);
      keys[name] = text.replace(/\0+$/, '');
    } else if (location === GEO_KEY_DIRECTORY_TAG) {
      // values stored inside the directory itself after the key list (allowed, rarely used)
      if (offset + n > directory.length) throw new Error(`GeoKey ${name} points past the GeoKeyDirectory`);
      keys[name] = n === 1 ? directory[offset]! : Array.from({ length: n }, (_, i) => directory[offset + i]!);
    } else {
      throw new Error(`GeoKey ${name} stored in unexpected tag ${location}`);
    }
  }
  return keys;
}

export interface EncodedGeoKeys {
  directory: Uint16Array;
  doubles: Float64Array | null;
  /** Including the '|' terminators; the TIFF writer adds the final NUL. */
  ascii: string | null;
}

/**
 * Encode a name -> value record as the three GeoTIFF tags, keys sorted by id (required by the standard).
 * Throws a plain Error for a name that is not a GeoKey or a value that does not fit its key.
 */
export function encodeGeoKeys(keys: GeoKeyRecord): EncodedGeoKeys {
  const entries: Array<[number, GeoKeyValue]> = [];
  for (const [name, value] of Object.entries(keys)) {
    const id = geoKeyId(name);
    if (id === null) throw new Error(`"${name}" is not a GeoKey name`);
    entries.push([id, value]);
  }
  entries.sort((a, b) => a[0] - b[0]);
  const directory = new Uint16Array(4 + 4 * entries.length);
  directory.set([1, 1, 0, entries.length]);
  const doubles: number[] = [];
  let ascii = '';
  entries.forEach(([id, value], k) => {
    const at = 4 + 4 * k;
    directory[at] = id;
    if (typeof value === 'string') {
      if (value.includes('\0')) throw new Error(`GeoKey ${geoKeyName(id)} text contains a NUL character`);
      directory.set([GEO_ASCII_PARAMS_TAG, value.length + 1, ascii.length], at + 1);
      ascii += `${value}|`;
    } else if (typeof value === 'number' && isShortKey(id, value)) {
      directory.set([0, 1, value], at + 1);
    } else {
      const list = typeof value === 'number' ? [value] : value;
      if (list.length === 0 || list.some((v) => typeof v !== 'number')) {
        throw new Error(`GeoKey ${geoKeyName(id)} has no numeric value`);
      }
      directory.set([GEO_DOUBLE_PARAMS_TAG, list.length, doubles.length], at + 1);
      for (const value of list) doubles.push(value); // a tag may hold more values than a call has arguments
    }
  });
  return {
    directory,
    doubles: doubles.length ? Float64Array.from(doubles) : null,
    ascii: ascii.length ? ascii : null,
  };
}

function isShortKey(id: number, value: number): boolean {
  const fitsShort = Number.isInteger(value) && value >= 0 && value <= 65535;
  if (SHORT_KEYS.has(id)) {
    if (!fitsShort) throw new Error(`GeoKey ${geoKeyName(id)} must be a code 0..65535, got ${value}`);
    return true;
  }
  // unknown keys: a small integer is most likely a code
  return !NAME_OF.has(id) && fitsShort;
}

/** The CRS described by a GeoKey record, or null when the file has no GeoKeys. */
export function crsFromGeoKeys(keys: GeoKeyRecord | null): Crs | null {
  if (!keys || Object.keys(keys).length === 0) return null;
  const modelType = numberKey(keys, 'GTModelTypeGeoKey');
  const projected = numberKey(keys, 'ProjectedCSTypeGeoKey');
  const geographicType = numberKey(keys, 'GeographicTypeGeoKey');
  const geographic = modelType === MODEL_GEOGRAPHIC || (modelType === null && projected === null && geographicType !== null);
  const code = geographic ? geographicType : projected;
  const epsg = code !== null && code >= 1 && code < USER_DEFINED ? code : null;
  const crs: Crs = { epsg, geographic, geoKeys: { ...keys } };
  const unit = linearUnitName(numberKey(keys, 'ProjLinearUnitsGeoKey'));
  if (!geographic && unit) crs.linearUnit = unit;
  return crs;
}

/** The GeoKeys we write for an EPSG code when no GeoKeys were read (PixelIsArea). */
export function geoKeysForEpsg(epsg: number, geographic: boolean): GeoKeyRecord {
  return geographic
    ? { GTModelTypeGeoKey: MODEL_GEOGRAPHIC, GTRasterTypeGeoKey: RASTER_PIXEL_IS_AREA, GeographicTypeGeoKey: epsg }
    : { GTModelTypeGeoKey: MODEL_PROJECTED, GTRasterTypeGeoKey: RASTER_PIXEL_IS_AREA, ProjectedCSTypeGeoKey: epsg };
}

function numberKey(keys: GeoKeyRecord, name: string): number | null {
  const v = keys[name];
  return typeof v === 'number' ? v : null;
}

/** EPSG unit-of-measure codes used by ProjLinearUnitsGeoKey (EPSG dataset: 9001 metre, 9002 foot, 9003 US survey foot). */
/** The name of an EPSG linear unit code (9001-9003), as GDAL names it. */
export function linearUnitName(code: number | null): string | undefined {
  switch (code) {
    case 9001:
      return 'metre';
    case 9002:
      return 'foot';
    case 9003:
      return 'US survey foot';
    default:
      return undefined;
  }
}
