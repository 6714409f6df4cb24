/**
 * A compact Float32 GeoTIFF encoder of our own: tiled, DEFLATE with the floating-point predictor, GDAL nodata tag,
 * GeoKeys from the grid's CRS. Classic TIFF, or BigTIFF when asked or when the file would pass 4 GiB.
 * Identical input gives identical bytes (no dates, no software tag). It only encodes; writing files is the output
 * layer's job.
 *
 * Formats: TIFF 6.0 (Adobe, 1992) for the container, tiles and tags; BigTIFF (libtiff design note, 2007) for 64-bit
 * offsets; Adobe Photoshop TIFF Technical Note 3 (2005) for the floating-point predictor; OGC GeoTIFF 1.1
 * (OGC 19-008r4) for ModelPixelScale/ModelTiepoint/ModelTransformation and GeoKeys; GDAL's GTiff driver documentation
 * for tag 42113 (GDAL_NODATA, ASCII).
 */
import { constants as zlibConstants, deflate, deflateSync, type ZlibOptions } from 'node:zlib';
import { promisify } from 'node:util';
import { PiezomapError } from '../errors.js';
import type { Grid } from '../grid.js';
import {
  GEO_ASCII_PARAMS_TAG,
  GEO_DOUBLE_PARAMS_TAG,
  GEO_KEY_DIRECTORY_TAG,
  RASTER_PIXEL_IS_AREA,
  encodeGeoKeys,
  geoKeysForEpsg,
} from './geokeys.js';
import type { GeoKeyRecord } from './geokeys.js';
import type { WriteRasterOptions } from './types.js';

export interface EncodeOptions extends WriteRasterOptions {
  /** Force BigTIFF (true) or classic TIFF (false); default: BigTIFF only when the file would pass 4 GiB. */
  bigTiff?: boolean;
}

const deflateAsync = promisify(deflate);

const OPTION_NAMES = new Set(['nodata', 'tileSize', 'compressionLevel', 'runLengthOnly', 'description', 'bigTiff']);

// TIFF field types (TIFF 6.0 section 2; LONG8 from BigTIFF).
const ASCII = 2;
const SHORT = 3;
const LONG = 4;
const DOUBLE = 12;
const LONG8 = 16;
const TYPE_SIZE: Record<number, number> = { [ASCII]: 1, [SHORT]: 2, [LONG]: 4, [DOUBLE]: 8, [LONG8]: 8 };

// TIFF tags (TIFF 6.0 appendix A; GeoTIFF; GDAL).
const TAG = {
  imageWidth: 256,
  imageLength: 257,
  bitsPerSample: 258,
  compression: 259,
  photometric: 262,
  imageDescription: 270,
  samplesPerPixel: 277,
  planarConfiguration: 284,
  predictor: 317,
  tileWidth: 322,
  tileLength: 323,
  tileOffsets: 324,
  tileByteCounts: 325,
  sampleFormat: 339,
  modelPixelScale: 33550,
  modelTiepoint: 33922,
  modelTransformation: 34264,
  gdalNodata: 42113,
} as const;

const COMPRESSION_DEFLATE = 8;
const PREDICTOR_FLOATING_POINT = 3;
const SAMPLE_FORMAT_FLOAT = 3;
const PHOTOMETRIC_MIN_IS_BLACK = 1;
const CLASSIC_LIMIT = 2 ** 32 - 1;

interface Entry {
  tag: number;
  type: number;
  /** Numbers for SHORT/LONG/DOUBLE/LONG8, bytes (NUL included) for ASCII. */
  values: ArrayLike<number>;
}

/**
 * Encode one band of `grid.nx * grid.ny` values (row-major, row 0 at the top) as a Float32 GeoTIFF.
 * NaN cells are written as the nodata value, which is declared in the GDAL_NODATA tag.
 */
export function encodeFloat32GeoTiff(grid: Grid, values: ArrayLike<number>, options: EncodeOptions = {}): Uint8Array {
  const job = prepare(grid, values, options);
  const tiles: Uint8Array[] = [];
  // one predicted-tile buffer, compressed at once
  eachPredictedTile(grid.nx, grid.ny, values, job.tileSize, job.nodata, false, 0, Infinity, (t) => tiles.push(deflateSync(t, job.zlib)));
  return finish(grid, job, tiles, options);
}

/** Rows of tiles encodeFloat32GeoTiff cuts a raster of this grid into. */
export function geoTiffTileRows(grid: Grid, options: EncodeOptions = {}): number {
  return Math.ceil(grid.ny / (options.tileSize ?? 256));
}

/**
 * The compressed tiles of tile rows `first` to `end - 1` of encodeFloat32GeoTiff, in its order, as one buffer and the
 * length of each tile: for a writer that splits a raster between threads and puts the file together with
 * assembleFloat32GeoTiff. Only the options are checked here; the whole raster's checks are assembleFloat32GeoTiff's.
 */
export function encodeFloat32GeoTiffTileRows(
  grid: Grid,
  values: ArrayLike<number>,
  options: EncodeOptions,
  first: number,
  end: number,
): { bytes: Uint8Array; lengths: number[] } {
  const job = prepareOptions(grid, values, options);
  const tiles: Uint8Array[] = [];
  eachPredictedTile(grid.nx, grid.ny, values, job.tileSize, job.nodata, false, first, end, (t) => tiles.push(deflateSync(t, job.zlib)));
  const bytes = new Uint8Array(tiles.reduce((sum, t) => sum + t.length, 0));
  let at = 0;
  for (const t of tiles) {
    bytes.set(t, at);
    at += t.length;
  }
  return { bytes, lengths: tiles.map((t) => t.length) };
}

/**
 * The GeoTIFF of `values` from its compressed tiles (encodeFloat32GeoTiffTileRows over every tile row, in order): the
 * bytes encodeFloat32GeoTiff gives, after the same checks.
 */
export function assembleFloat32GeoTiff(
  grid: Grid,
  values: ArrayLike<number>,
  options: EncodeOptions,
  parts: ReadonlyArray<{ bytes: Uint8Array; lengths: readonly number[] }>,
): Uint8Array {
  const job = prepare(grid, values, options);
  const tiles: Uint8Array[] = [];
  for (const part of parts) {
    let at = 0;
    for (const length of part.lengths) {
      tiles.push(part.bytes.subarray(at, at + length));
      at += length;
    }
  }
  const expected = Math.ceil(grid.nx / job.tileSize) * Math.ceil(grid.ny / job.tileSize);
  if (tiles.length !== expected) {
    throw new PiezomapError('internal', `GeoTIFF writer: ${tiles.length} tiles given for a raster of ${expected}`);
  }
  return finish(grid, job, tiles, options);
}

/**
 * As encodeFloat32GeoTiff, the same bytes, with the tiles compressed on the thread pool (zlib's asynchronous
 * DEFLATE): the calling thread cuts and predicts the tiles, then is free for other work (the other products) while
 * the tiles are compressed on the other cores. The checks are the same and throw at once (not as a rejection), before
 * anything is queued; `values` may change once this returns (the tiles are copies).
 */
export function encodeFloat32GeoTiffAsync(grid: Grid, values: ArrayLike<number>, options: EncodeOptions = {}): Promise<Uint8Array> {
  const job = prepare(grid, values, options);
  const pending: Array<Promise<Uint8Array>> = [];
  // every tile in its own buffer, all queued now
  eachPredictedTile(grid.nx, grid.ny, values, job.tileSize, job.nodata, true, 0, Infinity, (t) => pending.push(deflateAsync(t, job.zlib)));
  return Promise.all(pending).then((tiles) => finish(grid, job, tiles, options));
}

interface EncodeJob {
  nodata: number;
  tileSize: number;
  level: number;
  /** The DEFLATE settings of every tile. */
  zlib: ZlibOptions;
  /** The tags, with placeholder tile offsets and byte counts (assemble() fills them in). */
  entries: Entry[];
}

/** The options checked and the tags made: everything but the pass over the values. */
function prepareOptions(grid: Grid, values: ArrayLike<number>, options: EncodeOptions): EncodeJob {
  const nodata = options.nodata ?? -9999;
  const tileSize = options.tileSize ?? 256;
  const level = options.compressionLevel ?? 6;
  checkArguments(grid, values, options, nodata, tileSize, level);
  const zlib: ZlibOptions = options.runLengthOnly ? { level, strategy: zlibConstants.Z_RLE } : { level };
  return { nodata, tileSize, level, zlib, entries: tagEntries(grid, tileSize, nodata, options.description) };
}

function prepare(grid: Grid, values: ArrayLike<number>, options: EncodeOptions): EncodeJob {
  const job = prepareOptions(grid, values, options);
  checkSinglePrecisionRange(grid, values, options.description);
  return job;
}

function finish(grid: Grid, job: EncodeJob, tiles: Uint8Array[], options: EncodeOptions): Uint8Array {
  const entries = job.entries;
  const dataBytes = tiles.reduce((sum, t) => sum + t.length, 0);
  const classicSize = layoutSize(entries, tiles.length, false) + dataBytes;
  const bigTiff = options.bigTiff ?? classicSize > CLASSIC_LIMIT;
  if (!bigTiff && classicSize > CLASSIC_LIMIT) {
    throw new PiezomapError('usage', `a ${grid.nx} x ${grid.ny} raster needs BigTIFF (the file passes 4 GiB)`, {
      hint: 'leave the bigTiff option unset',
    });
  }
  return assemble(entries, tiles, bigTiff);
}

/** Smallest double that rounds to infinity in single precision: 2^128 - 2^103, halfway between the largest float and 2^128 (IEEE 754 round-to-nearest-even). */
const FLOAT32_LIMIT = 3.4028235677973366e38;

/**
 * A finite value that single precision cannot hold would be written as infinity without a word (a head of 1e300
 * did). Refuse it, naming the cell; such magnitudes come from the inputs (units, a conductivity or rate far out
 * of range), so it is an input error. Infinity and NaN given as such are written as they are (NaN as nodata).
 */
function checkSinglePrecisionRange(grid: Grid, values: ArrayLike<number>, description: string | undefined): void {
  for (let p = 0; p < values.length; p++) {
    const v = values[p]!;
    if (Math.abs(v) >= FLOAT32_LIMIT && Math.abs(v) < Infinity) {
      const what =
        description
          ?.split(':')[0]
          ?.replace(/^piezomap \S+ /, '')
          .trim() || 'a raster';
      const row = Math.floor(p / grid.nx);
      const col = p % grid.nx;
      throw new PiezomapError(
        'input',
        `cannot write ${what} as a Float32 GeoTIFF: the value ${v.toExponential(3)} at row ${row}, col ${col} lies beyond single precision (±3.4e38) and would become infinity`,
        {
          cell: { row, col },
          hint: 'such magnitudes come from the inputs: check the units of conductivity, thickness, well rates and heads',
        },
      );
    }
  }
}

function usage(message: string): PiezomapError {
  return new PiezomapError('usage', `GeoTIFF writer: ${message}`);
}

function checkArguments(
  grid: Grid,
  values: ArrayLike<number>,
  options: EncodeOptions,
  nodata: number,
  tileSize: number,
  level: number,
): void {
  for (const key of Object.keys(options)) {
    if (!OPTION_NAMES.has(key)) throw usage(`unknown option "${key}" (known: ${[...OPTION_NAMES].join(', ')})`);
  }
  if (!Number.isInteger(grid.nx) || !Number.isInteger(grid.ny) || grid.nx < 1 || grid.ny < 1) {
    throw usage(`grid size ${grid.nx} x ${grid.ny} must be whole numbers of at least 1`);
  }
  if (values.length !== grid.nx * grid.ny) {
    throw usage(`${values.length} values given for a ${grid.nx} x ${grid.ny} grid (${grid.nx * grid.ny} cells)`);
  }
  const t = grid.transform;
  if (!t.every(Number.isFinite)) throw usage(`geotransform [${t.join(', ')}] is not finite`);
  if (t[2] !== 0 || t[4] !== 0) throw usage(`rotated geotransform [${t.join(', ')}] cannot be written`);
  if (!(t[1] > 0) || t[5] === 0) throw usage(`pixel size ${t[1]} x ${t[5]} must be positive wide and non-zero high`);
  if (!Number.isNaN(nodata) && Math.fround(nodata) !== nodata) {
    throw usage(`nodata ${nodata} is not exactly representable as Float32 (e.g. use -9999)`);
  }
  if (!Number.isInteger(tileSize) || tileSize < 16 || tileSize > 4096 || tileSize % 16 !== 0) {
    throw usage(`tileSize ${tileSize} must be a multiple of 16 from 16 to 4096`);
  }
  if (!Number.isInteger(level) || level < 1 || level > 9) throw usage(`compressionLevel ${level} must be 1..9`);
  if (options.runLengthOnly !== undefined && typeof options.runLengthOnly !== 'boolean') throw usage('runLengthOnly must be true or false');
  if (options.description !== undefined && (typeof options.description !== 'string' || options.description.includes('\0'))) {
    throw usage('description must be text without NUL characters');
  }
}

/**
 * Cut the raster into tiles, apply the floating-point predictor and hand each predicted tile of tile rows `first` to
 * `end - 1` to `each`, in row-major tile order: into one reused buffer, or (`fresh`) into a new buffer per tile, for
 * compressing later. One Float32 tile workspace is reused; cells beyond the raster's right and bottom edges are padded
 * with nodata.
 */
function eachPredictedTile(
  nx: number,
  ny: number,
  values: ArrayLike<number>,
  tileSize: number,
  nodata: number,
  fresh: boolean,
  first: number,
  end: number,
  each: (predicted: Uint8Array) => void,
): void {
  const tilesAcross = Math.ceil(nx / tileSize);
  const tilesDown = Math.min(Math.ceil(ny / tileSize), end);
  const tile = new Float32Array(tileSize * tileSize);
  const tileBytes = new Uint8Array(tile.buffer);
  const rowBytes = tileSize * 4;
  let predicted = new Uint8Array(tileBytes.length);
  for (let ty = Math.max(0, first); ty < tilesDown; ty++) {
    const rows = Math.min(tileSize, ny - ty * tileSize);
    for (let tx = 0; tx < tilesAcross; tx++) {
      const cols = Math.min(tileSize, nx - tx * tileSize);
      if (rows < tileSize || cols < tileSize) tile.fill(nodata);
      for (let r = 0; r < rows; r++) {
        const src = (ty * tileSize + r) * nx + tx * tileSize;
        const dst = r * tileSize;
        for (let c = 0; c < cols; c++) {
          const v = values[src + c]!;
          tile[dst + c] = v !== v ? nodata : v;
        }
      }
      if (fresh) predicted = new Uint8Array(tileBytes.length);
      for (let r = 0; r < tileSize; r++) predictFloatRow(tileBytes, predicted, r * rowBytes, tileSize);
      each(predicted);
    }
  }
}

/**
 * Floating-point predictor for one row of `n` little-endian Float32 samples: split into byte planes, most
 * significant first, then replace each byte by its difference from the previous byte of the row (TN3, stride 1).
 */
function predictFloatRow(src: Uint8Array, out: Uint8Array, start: number, n: number): void {
  for (let i = 0; i < n; i++) {
    const s = start + 4 * i;
    out[start + i] = src[s + 3]!;
    out[start + n + i] = src[s + 2]!;
    out[start + 2 * n + i] = src[s + 1]!;
    out[start + 3 * n + i] = src[s]!;
  }
  for (let k = start + 4 * n - 1; k > start; k--) out[k] = (out[k]! - out[k - 1]!) & 0xff;
}

function tagEntries(grid: Grid, tileSize: number, nodata: number, description: string | undefined): Entry[] {
  const t = grid.transform;
  const tileCount = Math.ceil(grid.nx / tileSize) * Math.ceil(grid.ny / tileSize);
  const entries: Entry[] = [
    { tag: TAG.imageWidth, type: LONG, values: [grid.nx] },
    { tag: TAG.imageLength, type: LONG, values: [grid.ny] },
    { tag: TAG.bitsPerSample, type: SHORT, values: [32] },
    { tag: TAG.compression, type: SHORT, values: [COMPRESSION_DEFLATE] },
    { tag: TAG.photometric, type: SHORT, values: [PHOTOMETRIC_MIN_IS_BLACK] },
    { tag: TAG.samplesPerPixel, type: SHORT, values: [1] },
    { tag: TAG.planarConfiguration, type: SHORT, values: [1] },
    { tag: TAG.predictor, type: SHORT, values: [PREDICTOR_FLOATING_POINT] },
    { tag: TAG.tileWidth, type: LONG, values: [tileSize] },
    { tag: TAG.tileLength, type: LONG, values: [tileSize] },
    // offsets and byte counts are filled in by assemble(); their count fixes the layout
    { tag: TAG.tileOffsets, type: LONG, values: new Array<number>(tileCount).fill(0) },
    { tag: TAG.tileByteCounts, type: LONG, values: new Array<number>(tileCount).fill(0) },
    { tag: TAG.sampleFormat, type: SHORT, values: [SAMPLE_FORMAT_FLOAT] },
  ];
  if (description !== undefined) entries.push({ tag: TAG.imageDescription, type: ASCII, values: asciiBytes(description) });
  if (t[5] < 0) {
    // north-up: the usual pair (GeoTIFF 1.1, 7.2.1); ModelPixelScale holds the magnitude of the pixel height
    entries.push({ tag: TAG.modelPixelScale, type: DOUBLE, values: [t[1], -t[5], 0] });
    entries.push({ tag: TAG.modelTiepoint, type: DOUBLE, values: [0, 0, 0, t[0], t[3], 0] });
  } else {
    // south-up cannot be said with a pixel scale; GDAL writes the full (unrotated) matrix in this case too
    entries.push({ tag: TAG.modelTransformation, type: DOUBLE, values: [t[1], 0, 0, t[0], 0, t[5], 0, t[3], 0, 0, 0, 0, 0, 0, 0, 1] });
  }
  let encoded;
  try {
    encoded = encodeGeoKeys(geoKeysFor(grid));
  } catch (thrown) {
    throw usage(`the grid's GeoKeys cannot be written: ${(thrown as Error).message}`);
  }
  entries.push({ tag: GEO_KEY_DIRECTORY_TAG, type: SHORT, values: encoded.directory });
  if (encoded.doubles) entries.push({ tag: GEO_DOUBLE_PARAMS_TAG, type: DOUBLE, values: encoded.doubles });
  if (encoded.ascii) entries.push({ tag: GEO_ASCII_PARAMS_TAG, type: ASCII, values: asciiBytes(encoded.ascii) });
  entries.push({ tag: TAG.gdalNodata, type: ASCII, values: asciiBytes(nodataText(nodata)) });
  return entries.sort((a, b) => a.tag - b.tag);
}

/** The GeoKeys read with the grid when there are some, else the ones an EPSG code implies; always PixelIsArea. */
function geoKeysFor(grid: Grid): GeoKeyRecord {
  const crs = grid.crs;
  let keys: GeoKeyRecord = {};
  if (crs && Object.keys(crs.geoKeys).length > 0) keys = { ...crs.geoKeys };
  else if (crs && crs.epsg !== null) keys = geoKeysForEpsg(crs.epsg, crs.geographic);
  // our transform is the outer corner of cell (0,0), whatever the source file said
  keys.GTRasterTypeGeoKey = RASTER_PIXEL_IS_AREA;
  return keys;
}

/** Nodata as GDAL writes it: "nan", integers without a decimal point, others as the shortest exact text. */
function nodataText(nodata: number): string {
  if (Number.isNaN(nodata)) return 'nan';
  if (nodata === Number.POSITIVE_INFINITY) return 'inf';
  if (nodata === Number.NEGATIVE_INFINITY) return '-inf';
  return String(nodata);
}

function asciiBytes(text: string): Uint8Array {
  const utf8 = new TextEncoder().encode(text);
  const bytes = new Uint8Array(utf8.length + 1); // NUL-terminated (TIFF 6.0 section 2)
  bytes.set(utf8);
  return bytes;
}

function valueBytes(entry: Entry): number {
  return TYPE_SIZE[entry.type]! * entry.values.length;
}

/** Bytes before the tile data: header, IFD, out-of-line values (each on an even offset). */
function layoutSize(entries: Entry[], tileCount: number, bigTiff: boolean): number {
  const inline = bigTiff ? 8 : 4;
  let size = bigTiff ? 16 : 8;
  size += bigTiff ? 8 + 20 * entries.length + 8 : 2 + 12 * entries.length + 4;
  for (const e of entries) {
    let bytes = valueBytes(e);
    if (bigTiff && (e.tag === TAG.tileOffsets || e.tag === TAG.tileByteCounts)) bytes = 8 * tileCount;
    if (bytes > inline) size += bytes + (bytes & 1);
  }
  return size;
}

/** Header, one IFD, out-of-line tag values, then the tiles in row-major tile order. */
function assemble(entries: Entry[], tiles: Uint8Array[], bigTiff: boolean): Uint8Array {
  if (bigTiff) {
    for (const e of entries) if (e.tag === TAG.tileOffsets || e.tag === TAG.tileByteCounts) e.type = LONG8;
  }
  const headerSize = layoutSize(entries, tiles.length, bigTiff);
  const offsets = new Array<number>(tiles.length);
  let at = headerSize;
  for (let i = 0; i < tiles.length; i++) {
    offsets[i] = at;
    at += tiles[i]!.length;
  }
  const total = at;
  for (const e of entries) {
    if (e.tag === TAG.tileOffsets) e.values = offsets;
    if (e.tag === TAG.tileByteCounts) e.values = tiles.map((t) => t.length);
  }

  const out = new Uint8Array(total);
  const view = new DataView(out.buffer);
  const inline = bigTiff ? 8 : 4;
  // header: little-endian byte order, version 42 (classic) or 43 (BigTIFF), first IFD right after it
  out[0] = 0x49;
  out[1] = 0x49;
  if (bigTiff) {
    view.setUint16(2, 43, true);
    view.setUint16(4, 8, true);
    view.setUint16(6, 0, true);
    setOffset(view, 8, 16, true);
  } else {
    view.setUint16(2, 42, true);
    view.setUint32(4, 8, true);
  }
  const ifd = bigTiff ? 16 : 8;
  let entryAt: number;
  if (bigTiff) {
    setOffset(view, ifd, entries.length, true);
    entryAt = ifd + 8;
  } else {
    view.setUint16(ifd, entries.length, true);
    entryAt = ifd + 2;
  }
  const entrySize = bigTiff ? 20 : 12;
  let extraAt = entryAt + entrySize * entries.length + (bigTiff ? 8 : 4); // after the zero "next IFD" offset
  for (const e of entries) {
    view.setUint16(entryAt, e.tag, true);
    view.setUint16(entryAt + 2, e.type, true);
    if (bigTiff) setOffset(view, entryAt + 4, e.values.length, true);
    else view.setUint32(entryAt + 4, e.values.length, true);
    const valueAt = entryAt + (bigTiff ? 12 : 8);
    const bytes = valueBytes(e);
    if (bytes <= inline) {
      writeValues(view, valueAt, e);
    } else {
      setOffset(view, valueAt, extraAt, bigTiff);
      writeValues(view, extraAt, e);
      extraAt += bytes + (bytes & 1);
    }
    entryAt += entrySize;
  }
  if (extraAt !== headerSize) throw new PiezomapError('internal', `GeoTIFF writer layout mismatch (${extraAt} vs ${headerSize})`);
  for (let i = 0; i < tiles.length; i++) out.set(tiles[i]!, offsets[i]!);
  return out;
}

function setOffset(view: DataView, at: number, value: number, eightBytes: boolean): void {
  if (eightBytes) {
    view.setUint32(at, value % 2 ** 32, true);
    view.setUint32(at + 4, Math.floor(value / 2 ** 32), true);
  } else {
    view.setUint32(at, value, true);
  }
}

function writeValues(view: DataView, at: number, e: Entry): void {
  const n = e.values.length;
  switch (e.type) {
    case ASCII:
      for (let i = 0; i < n; i++) view.setUint8(at + i, e.values[i]!);
      break;
    case SHORT:
      for (let i = 0; i < n; i++) view.setUint16(at + 2 * i, e.values[i]!, true);
      break;
    case LONG:
      for (let i = 0; i < n; i++) view.setUint32(at + 4 * i, e.values[i]!, true);
      break;
    case DOUBLE:
      for (let i = 0; i < n; i++) view.setFloat64(at + 8 * i, e.values[i]!, true);
      break;
    case LONG8:
      for (let i = 0; i < n; i++) setOffset(view, at + 8 * i, e.values[i]!, true);
      break;
    default:
      throw new PiezomapError('internal', `GeoTIFF writer: no encoder for field type ${e.type}`);
  }
}
