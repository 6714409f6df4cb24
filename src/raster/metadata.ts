/**
 * What the stored values mean and where they are: GDAL's band metadata (scale, offset, unit; unknown roles refused),
 * the GeoKeys and the vertical unit they imply, the geotransform as GDAL reports it, and the nodata value.
 */
import { createRequire } from 'node:module';
import type { GeoTIFFImage } from 'geotiff';
import { type PiezomapError, describeThrown, inputError } from '../errors.js';
import { RASTER_PIXEL_IS_POINT, linearUnitName, parseGeoKeyDirectory } from './geokeys.js';
import type { GeoKeyRecord } from './geokeys.js';
import { numbersTag, tagValue } from './layout.js';

export const require = createRequire(import.meta.url);

/**
 * The unit GDAL gives a band from the GeoKeys when the file sets none: that of VerticalUnitsGeoKey, else that of the
 * vertical CRS (VerticalCSTypeGeoKey, looked up in the offline EPSG index). Null when neither is known.
 */
export function verticalUnit(geoKeys: GeoKeyRecord | null): string | null {
  const unitCode = geoKeys?.VerticalUnitsGeoKey;
  if (typeof unitCode === 'number') return linearUnitName(unitCode) ?? `EPSG unit ${unitCode}`;
  const crsCode = geoKeys?.VerticalCSTypeGeoKey;
  if (typeof crsCode !== 'number' || crsCode === 32767) return null;
  try {
    const entry = require(`epsg-index/s/${crsCode}.json`) as { unit?: unknown };
    return typeof entry.unit === 'string' ? entry.unit : null;
  } catch {
    return null; // an unknown code: no unit we could name
  }
}

/** Per-band metadata that changes the values: scale and offset (identity when absent), and the unit, if declared. */
export interface BandMetadata {
  scale: number;
  offset: number;
  unit: string | null;
}

/** Roles of GDAL band metadata items that do not change the values (names and colours for display). */
export const DISPLAY_ROLES = new Set(['description', 'colorinterp']);

/**
 * GDAL's band metadata (TIFF tag 42112, an XML list of `<Item name= sample= role=>value</Item>`, as GDAL's GTiff
 * driver writes it): "scale" and "offset" are applied (GDAL's unscaled value is stored x scale + offset), "unittype"
 * is reported, display roles are irrelevant; an item with a role we do not know is refused rather than ignored.
 * Items without a role are free metadata (statistics, notes) and change nothing.
 */
export async function readBandMetadata(image: GeoTIFFImage, sample: number, label: string): Promise<BandMetadata> {
  const result: BandMetadata = { scale: 1, offset: 0, unit: null };
  const raw = await tagValue(image, 'GDAL_METADATA');
  if (typeof raw !== 'string') return result;
  const refuse = (problem: string, hint: string): PiezomapError => inputError(`${label}: ${problem}`, { file: label, hint });
  for (const match of raw.matchAll(/<Item\b([^>]*?)(?:\/>|>([^<]*)<\/Item>)/g)) {
    const attributes = new Map<string, string>();
    for (const a of match[1]!.matchAll(/([A-Za-z_]+)\s*=\s*"([^"]*)"/g)) attributes.set(a[1]!, xmlText(a[2]!));
    const role = attributes.get('role');
    const band = attributes.get('sample');
    if (role === undefined || band === undefined || Number(band) !== sample) continue;
    const text = xmlText(match[2] ?? '').trim();
    if (role === 'scale' || role === 'offset') {
      const value = Number(text);
      if (text === '' || !Number.isFinite(value) || (role === 'scale' && value === 0)) {
        throw refuse(
          `the band's ${role} "${text}" (GDAL metadata) is not a usable number`,
          `set it again, e.g. \`gdal_edit.py -${role} 1 file.tif\`, or write the values unscaled (\`gdal_translate -unscale -ot Float32 in.tif out.tif\`)`,
        );
      }
      result[role] = value;
    } else if (role === 'unittype') {
      result.unit = text === '' ? null : text;
    } else if (!DISPLAY_ROLES.has(role)) {
      throw refuse(
        `the band carries GDAL metadata "${attributes.get('name') ?? '?'}" with role "${role}", which piezomap does not know how to apply`,
        'write the values as they are meant, e.g. `gdal_translate -ot Float32 in.tif out.tif` and check the result with gdalinfo',
      );
    }
  }
  return result;
}

/** XML character references and the five predefined entities to text. */
export function xmlText(text: string): string {
  return text.replace(/&(#x[0-9a-fA-F]+|#[0-9]+|amp|lt|gt|quot|apos);/g, (_, ref: string) => {
    if (ref[0] === '#') return String.fromCodePoint(ref[1] === 'x' ? parseInt(ref.slice(2), 16) : parseInt(ref.slice(1), 10));
    return { amp: '&', lt: '<', gt: '>', quot: '"', apos: "'" }[ref]!;
  });
}

export async function readGeoKeys(image: GeoTIFFImage, label: string): Promise<GeoKeyRecord | null> {
  const directory = await numbersTag(image, 'GeoKeyDirectory');
  if (!directory) return null;
  const doubles = await numbersTag(image, 'GeoDoubleParams');
  const asciiValue = await tagValue(image, 'GeoAsciiParams');
  const ascii = typeof asciiValue === 'string' ? asciiValue : null;
  try {
    return parseGeoKeyDirectory(directory, doubles, ascii);
  } catch (thrown) {
    throw inputError(`${label}: the GeoTIFF key directory is damaged (${describeThrown(thrown)})`, {
      file: label,
      hint: 'assign the CRS again, e.g. `gdal_edit.py -a_srs EPSG:xxxx file.tif`',
    });
  }
}

/**
 * The GDAL geotransform [originX, pixelWidth, 0, originY, 0, pixelHeight] of the PixelIsArea corner, computed as GDAL
 * computes it (GeoTIFF standard OGC 19-008r4 section 7.2 and GDAL's GTiff driver; the PixelIsPoint half-cell shift is
 * GDAL's documented default, GTIFF_POINT_GEO_IGNORE=NO).
 */
export async function readGeotransform(
  image: GeoTIFFImage,
  label: string,
  geoKeys: GeoKeyRecord | null,
): Promise<[number, number, number, number, number, number]> {
  const refuse = (problem: string, hint: string): PiezomapError => inputError(`${label}: ${problem}`, { file: label, hint });
  const transformation = await numbersTag(image, 'ModelTransformation');
  const scale = await numbersTag(image, 'ModelPixelScale');
  const tiepoints = await numbersTag(image, 'ModelTiepoint');
  let gt: [number, number, number, number, number, number];
  if (transformation) {
    if (transformation.length < 8) throw refuse('the ModelTransformation tag is incomplete', 'assign the georeferencing again in the GIS');
    const [a, b, , d, e, f, , h] = transformation as [number, number, number, number, number, number, number, number];
    // geotiff.js drops b and e silently; a rotated or sheared grid cannot be modelled cell by cell here.
    if (b !== 0 || e !== 0) {
      throw refuse(
        `the grid is rotated or sheared (geotransform terms ${b}, ${e})`,
        'warp it to a north-up grid first, e.g. `gdalwarp in.tif out.tif` (same CRS)',
      );
    }
    gt = [d, a, 0, h, 0, f];
  } else if (scale && tiepoints && scale.length >= 2 && tiepoints.length >= 6) {
    if (tiepoints.length > 6) {
      throw refuse(
        `the file is georeferenced by ${tiepoints.length / 6} ground control points, not a regular grid`,
        'warp it to a regular grid first, e.g. `gdalwarp in.tif out.tif`',
      );
    }
    const [i, j, , x, y] = tiepoints as [number, number, number, number, number];
    const [sx, sy] = scale as [number, number];
    gt = [x - i * sx, sx, 0, y + j * sy, 0, -sy];
  } else if (tiepoints && tiepoints.length >= 6) {
    throw refuse(
      'the file has tie points but no pixel size (ground control points only)',
      'warp it to a regular grid first, e.g. `gdalwarp in.tif out.tif`',
    );
  } else {
    throw refuse(
      'the file has no georeferencing (no ModelPixelScale/ModelTiepoint or ModelTransformation tag)',
      'assign the grid position in a GIS, or `gdal_translate -a_ullr ulx uly lrx lry -a_srs EPSG:xxxx in.tif out.tif`',
    );
  }
  if (geoKeys && geoKeys.GTRasterTypeGeoKey === RASTER_PIXEL_IS_POINT) {
    // PixelIsPoint: the tie point is the centre of cell (0,0); GDAL moves the origin to its outer corner.
    gt[0] -= 0.5 * gt[1] + 0.5 * gt[2];
    gt[3] -= 0.5 * gt[4] + 0.5 * gt[5];
  }
  if (!gt.every(Number.isFinite))
    throw refuse(`the geotransform is not finite [${gt.join(', ')}]`, 'assign the georeferencing again in the GIS');
  if (gt[1] <= 0) {
    throw refuse(
      `the pixel width is ${gt[1] === 0 ? 'zero' : `negative (${gt[1]})`}`,
      'the grid must run west to east with a positive cell size; warp it with `gdalwarp in.tif out.tif`',
    );
  }
  if (gt[5] === 0) throw refuse('the pixel height is zero', 'assign the georeferencing again in the GIS');
  return gt;
}

/** GDAL's nodata tag (TIFF tag 42113, ASCII): null when absent; "nan", "inf" and numbers as GDAL writes them. */
export async function readNodata(image: GeoTIFFImage, label: string): Promise<number | null> {
  const raw = await tagValue(image, 'GDAL_NODATA');
  if (raw === undefined || raw === null) return null;
  const text = String(raw).replace(/\0/g, '').trim();
  if (text === '') return null;
  const lower = text.toLowerCase();
  if (lower === 'nan' || lower === '-nan' || lower === '+nan') return Number.NaN;
  if (lower === 'inf' || lower === '+inf' || lower === 'infinity') return Number.POSITIVE_INFINITY;
  if (lower === '-inf' || lower === '-infinity') return Number.NEGATIVE_INFINITY;
  const value = Number(text);
  if (Number.isNaN(value)) {
    throw inputError(`${label}: the nodata value "${text}" is not a number`, {
      file: label,
      hint: 'set it again, e.g. `gdal_edit.py -a_nodata -9999 file.tif`',
    });
  }
  return value;
}
