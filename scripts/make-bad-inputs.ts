/**
 * A corpus of malformed inputs for the command line: each case is a set of files (scenario JSON, rasters, CSVs)
 * plus the command to run, the exit code it must give and a fragment its message must contain.
 * Deterministic: the same bytes on every run. `npm test` (test/e2e/bad-inputs.test.ts) writes the corpus into a temporary
 * folder and runs every case through `node bin/piezomap.js`; to look at the files, run
 * `node dist/scripts/make-bad-inputs.js OUTDIR` (prints the list of cases).
 *
 * Bad rasters that our own Float32 encoder cannot make (strips, several bands, integer or complex samples, rotated
 * georeferencing, unknown compression) come from the small strip TIFF writer below (TIFF 6.0 layout, one IFD).
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { encodeFloat32GeoTiff } from '../src/raster/write.js';
import type { Grid } from '../src/grid.js';

export interface BadInputCase {
  /** Short name; also the scenario file name stem. */
  name: string;
  /** What is wrong, in words. */
  what: string;
  /** Arguments after `node bin/piezomap.js` (absolute paths). */
  args: string[];
  /** The result folder the command is given (checked for leftovers). */
  out: string;
  /** Exit status the contract requires. */
  code: number;
  /** Text the message on stderr must contain (a regular expression). */
  message: RegExp;
  /** Result files allowed to remain: none for input errors; the diagnostics for a solver failure. */
  allowedFiles: string[];
  /** Extra environment for the run. */
  env?: Record<string, string>;
}

// The valid base model: 12 x 8 cells of 100 m, EPSG:32633 (a label; the frame is invented), west edge 50 m, east 45 m.
const NX = 12;
const NY = 8;
const CELL = 100;
const X0 = 500000;
const Y0 = 4100000;
const EPSG = 32633;

export const baseGrid: Grid = {
  nx: NX,
  ny: NY,
  transform: [X0, CELL, 0, Y0, 0, -CELL],
  crs: { epsg: EPSG, geographic: false, geoKeys: { GTModelTypeGeoKey: 1, GTRasterTypeGeoKey: 1, ProjectedCSTypeGeoKey: EPSG } },
};

/** Centre of a cell in map coordinates. */
export function centre(row: number, col: number): { x: number; y: number } {
  return { x: X0 + (col + 0.5) * CELL, y: Y0 - (row + 0.5) * CELL };
}

/** Conductivity 5 m/d with an inactive block (rows 3-4, cols 5-6). */
export function baseConductivity(): Float64Array {
  const k = new Float64Array(NX * NY).fill(5);
  for (let r = 3; r <= 4; r++) for (let c = 5; c <= 6; c++) k[r * NX + c] = Number.NaN;
  return k;
}

export function baseScenario(conductivity = 'k.tif'): Record<string, unknown> {
  const w = centre(2, 3);
  const o = centre(6, 8);
  return {
    title: 'Robustness corpus base (invented)',
    units: { length: 'm', time: 'd' },
    aquifer: { conductivity, thickness: 20 },
    fixedHeads: [
      { edge: 'west', head: 50 },
      { edge: 'east', head: 45 },
    ],
    recharge: 0.0001,
    wells: [{ id: 'W1', x: w.x, y: w.y, rate: -200 }],
    observations: [{ id: 'OB1', x: o.x, y: o.y, head: 47 }],
    solver: { method: 'auto', tolerance: 1e-10, maxIterations: 5000 },
  };
}

// ---------------------------------------------------------------------------------------------------------------
// A minimal little-endian strip TIFF writer (TIFF 6.0: header, one IFD, strips), for rasters our encoder refuses to make.

const SHORT = 3;
const LONG = 4;
const DOUBLE = 12;
const ASCII = 2;

interface TiffEntry {
  tag: number;
  type: number;
  values: number[] | string;
}

export interface StripTiffSpec {
  width: number;
  height: number;
  /** Pixel bytes, chunky, row-major, uncompressed (written as is whatever `compression` says). */
  pixels: Uint8Array;
  samplesPerPixel?: number;
  bitsPerSample?: number;
  /** 1 unsigned, 2 signed, 3 float, 5/6 complex. */
  sampleFormat?: number;
  compression?: number;
  rowsPerStrip?: number;
  /** Georeferencing: north-up pixel scale + tie point (default), a 4x4 model transformation, or none. */
  georef?: { kind: 'scale' } | { kind: 'matrix'; matrix: number[] } | { kind: 'none' };
  /** CRS GeoKeys: projected (default EPSG:32633), geographic, or none. */
  crs?: { epsg: number; geographic: boolean } | null;
  nodata?: string;
  /** GDAL's metadata XML (TIFF tag 42112), e.g. band scale and offset items. */
  gdalMetadata?: string;
  /** PhotometricInterpretation (default 1, min-is-black; 3 = palette). */
  photometric?: number;
}

export function stripTiff(spec: StripTiffSpec): Uint8Array {
  const spp = spec.samplesPerPixel ?? 1;
  const bits = spec.bitsPerSample ?? 32;
  const rowsPerStrip = spec.rowsPerStrip ?? spec.height;
  const rowBytes = (spec.width * spp * bits) / 8;
  const strips: Array<[number, number]> = [];
  for (let r = 0; r < spec.height; r += rowsPerStrip) {
    const start = r * rowBytes;
    strips.push([start, Math.min(spec.height - r, rowsPerStrip) * rowBytes]);
  }
  const entries: TiffEntry[] = [
    { tag: 256, type: LONG, values: [spec.width] },
    { tag: 257, type: LONG, values: [spec.height] },
    { tag: 258, type: SHORT, values: new Array(spp).fill(bits) },
    { tag: 259, type: SHORT, values: [spec.compression ?? 1] },
    { tag: 262, type: SHORT, values: [spec.photometric ?? 1] },
    { tag: 273, type: LONG, values: strips.map((s) => 8 + s[0]) },
    { tag: 277, type: SHORT, values: [spp] },
    { tag: 278, type: LONG, values: [rowsPerStrip] },
    { tag: 279, type: LONG, values: strips.map((s) => s[1]) },
    { tag: 284, type: SHORT, values: [1] },
    { tag: 339, type: SHORT, values: new Array(spp).fill(spec.sampleFormat ?? 3) },
  ];
  const georef = spec.georef ?? { kind: 'scale' };
  if (georef.kind === 'scale') {
    entries.push({ tag: 33550, type: DOUBLE, values: [CELL, CELL, 0] });
    entries.push({ tag: 33922, type: DOUBLE, values: [0, 0, 0, X0, Y0, 0] });
  } else if (georef.kind === 'matrix') {
    entries.push({ tag: 34264, type: DOUBLE, values: georef.matrix });
  }
  const crs = spec.crs === undefined ? { epsg: EPSG, geographic: false } : spec.crs;
  if (crs) {
    const keys = crs.geographic
      ? [1, 1, 0, 3, 1024, 0, 1, 2, 1025, 0, 1, 1, 2048, 0, 1, crs.epsg]
      : [1, 1, 0, 3, 1024, 0, 1, 1, 1025, 0, 1, 1, 3072, 0, 1, crs.epsg];
    entries.push({ tag: 34735, type: SHORT, values: keys });
  }
  if (spec.gdalMetadata !== undefined) entries.push({ tag: 42112, type: ASCII, values: spec.gdalMetadata });
  if (spec.nodata !== undefined) entries.push({ tag: 42113, type: ASCII, values: spec.nodata });
  entries.sort((a, b) => a.tag - b.tag);

  const size = (e: TiffEntry) =>
    typeof e.values === 'string' ? e.values.length + 1 : e.values.length * (e.type === DOUBLE ? 8 : e.type === LONG ? 4 : 2);
  const ifdAt = 8 + spec.pixels.length + (spec.pixels.length % 2);
  let extraAt = ifdAt + 2 + entries.length * 12 + 4;
  const total = extraAt + entries.reduce((sum, e) => sum + (size(e) > 4 ? size(e) + (size(e) % 2) : 0), 0);
  const bytes = new Uint8Array(total);
  const view = new DataView(bytes.buffer);
  bytes[0] = 0x49;
  bytes[1] = 0x49;
  view.setUint16(2, 42, true);
  view.setUint32(4, ifdAt, true);
  bytes.set(spec.pixels, 8);
  view.setUint16(ifdAt, entries.length, true);
  entries.forEach((e, k) => {
    const at = ifdAt + 2 + 12 * k;
    const count = typeof e.values === 'string' ? e.values.length + 1 : e.values.length;
    view.setUint16(at, e.tag, true);
    view.setUint16(at + 2, e.type, true);
    view.setUint32(at + 4, count, true);
    const n = size(e);
    let p = at + 8;
    if (n > 4) {
      view.setUint32(at + 8, extraAt, true);
      p = extraAt;
      extraAt += n + (n % 2);
    }
    if (typeof e.values === 'string') {
      for (let i = 0; i < e.values.length; i++) bytes[p + i] = e.values.charCodeAt(i);
    } else {
      for (const v of e.values) {
        if (e.type === DOUBLE) {
          view.setFloat64(p, v, true);
          p += 8;
        } else if (e.type === LONG) {
          view.setUint32(p, v, true);
          p += 4;
        } else {
          view.setUint16(p, v, true);
          p += 2;
        }
      }
    }
  });
  return bytes;
}

/** Float32 pixel bytes of `bands` interleaved copies of the values (band b gets values + b). */
export function float32Pixels(values: ArrayLike<number>, bands = 1): Uint8Array {
  const out = new Float32Array(values.length * bands);
  for (let p = 0; p < values.length; p++) for (let b = 0; b < bands; b++) out[p * bands + b] = values[p]! + b;
  return new Uint8Array(out.buffer);
}

// ---------------------------------------------------------------------------------------------------------------

/** Write the corpus into `dir` and return its cases. */
export function writeBadInputs(dir: string): BadInputCase[] {
  mkdirSync(dir, { recursive: true });
  const file = (name: string, bytes: Uint8Array | string) => {
    writeFileSync(join(dir, name), bytes);
    return join(dir, name);
  };
  const k = baseConductivity();
  const kBytes = encodeFloat32GeoTiff(baseGrid, k, { tileSize: 16 });
  file('k.tif', kBytes);
  // The same values in strips, for damage that needs the strip layout.
  const kStrip = stripTiff({
    width: NX,
    height: NY,
    pixels: float32Pixels(k.map((v) => (Number.isNaN(v) ? -9999 : v))),
    rowsPerStrip: 2,
    nodata: '-9999',
  });
  file('k-strip.tif', kStrip);

  const cases: BadInputCase[] = [];
  const outFor = (name: string) => join(dir, 'out', name);
  /** A case running `solve` on a scenario = base with `overrides` (keys set to undefined are removed). */
  const solveCase = (
    name: string,
    what: string,
    overrides: Record<string, unknown>,
    code: number,
    message: RegExp,
    extra: Partial<BadInputCase> = {},
  ) => {
    const scenario: Record<string, unknown> = { ...baseScenario(), ...overrides };
    for (const key of Object.keys(scenario)) if (scenario[key] === undefined) delete scenario[key];
    const path = file(`${name}.json`, JSON.stringify(scenario, null, 2));
    const out = outFor(name);
    cases.push({ name, what, args: ['solve', path, '-o', out], out, code, message, allowedFiles: [], ...extra });
  };
  const aquifer = (conductivity: string, more: Record<string, unknown> = {}) => ({ aquifer: { conductivity, thickness: 20, ...more } });
  const rasterCase = (name: string, what: string, bytes: Uint8Array | string, message: RegExp) => {
    file(`${name}.tif`, bytes);
    solveCase(name, what, aquifer(`${name}.tif`), 2, message);
  };

  // --- rasters -----------------------------------------------------------------------------------------------
  rasterCase(
    'raster-not-tiff',
    'a PNG signature under a .tif name',
    new Uint8Array([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13]),
    /not a TIFF file/,
  );
  rasterCase('raster-text', 'an ASCII grid under a .tif name', 'ncols 12\nnrows 8\nxllcorner 500000\n', /not a TIFF file/);
  rasterCase('raster-empty', 'an empty file', new Uint8Array(0), /empty \(0 bytes\)/);
  rasterCase('raster-header-only', 'only the 8-byte TIFF header', kBytes.slice(0, 8), /damaged|unreadable/);
  rasterCase('raster-truncated-strips', 'a strip TIFF cut in the middle of its pixel data', cutStripFile(kStrip), /cut short|damaged/);
  rasterCase(
    'raster-truncated-tiles',
    'a tiled DEFLATE TIFF cut short',
    kBytes.slice(0, Math.floor(kBytes.length * 0.6)),
    /cut short|damaged/,
  );
  rasterCase('raster-corrupt-tiles', 'tile data overwritten with noise', corruptTiles(kBytes), /cannot be decompressed|damaged/);
  rasterCase('raster-bad-ifd-offset', 'IFD offset past the end of the file', withIfdOffset(kBytes, 0x7ffffff0), /damaged|unreadable/);
  rasterCase(
    'raster-rotated',
    'a rotated grid (ModelTransformation with rotation terms)',
    stripTiff({
      width: NX,
      height: NY,
      pixels: float32Pixels(k),
      georef: { kind: 'matrix', matrix: [86.6, 50, 0, X0, 50, -86.6, 0, Y0, 0, 0, 0, 0, 0, 0, 0, 1] },
    }),
    /rotated or sheared/,
  );
  rasterCase(
    'raster-two-bands',
    'two bands and no way to tell which is meant',
    stripTiff({ width: NX, height: NY, pixels: float32Pixels(k, 2), samplesPerPixel: 2 }),
    /2 bands/,
  );
  rasterCase(
    'raster-complex',
    'complex floating-point samples',
    stripTiff({ width: NX, height: NY, pixels: new Uint8Array(NX * NY * 8), bitsPerSample: 64, sampleFormat: 6 }),
    /unsupported sample type/,
  );
  const oneBit = stripTiff({ width: NX, height: NY, pixels: new Uint8Array(NX * NY), bitsPerSample: 8, sampleFormat: 1 });
  oneBit[findShortTag(oneBit, 258)] = 1; // BitsPerSample 1, as a bilevel mask would have
  rasterCase('raster-1bit', '1-bit samples', oneBit, /unsupported sample type/);
  rasterCase(
    'raster-jpeg',
    'JPEG compression (not supported)',
    stripTiff({ width: NX, height: NY, pixels: float32Pixels(k), compression: 7 }),
    /unsupported compression/,
  );
  rasterCase(
    'raster-no-georef',
    'no georeferencing tags',
    stripTiff({ width: NX, height: NY, pixels: float32Pixels(k), georef: { kind: 'none' } }),
    /no georeferencing/,
  );
  rasterCase(
    'raster-huge-header',
    'a header claiming 1,000,000 x 1,000,000 cells',
    stripTiff({ width: 1_000_000, height: 1_000_000, pixels: new Uint8Array(16), rowsPerStrip: 1 }).slice(),
    /more than|cells/,
  );
  rasterCase(
    'raster-geographic',
    'EPSG:4326 (degrees are not lengths)',
    stripTiff({ width: NX, height: NY, pixels: float32Pixels(k), crs: { epsg: 4326, geographic: true } }),
    /geographic CRS/,
  );
  rasterCase(
    'raster-infinite-k',
    '+Infinity conductivity values',
    encodeFloat32GeoTiff(
      baseGrid,
      k.map((v, p) => (p === 13 ? Infinity : v)),
    ),
    /infinite|Infinity/,
  );
  rasterCase(
    'raster-all-inactive',
    'every conductivity cell is nodata or <= 0',
    encodeFloat32GeoTiff(
      baseGrid,
      k.map((_, p) => (p % 2 ? Number.NaN : -1)),
    ),
    /no active cell/,
  );

  // What GDAL applies when reading must be applied or refused, never ignored (scale and offset, masks, palettes).
  const kValues = float32Pixels(k.map((v) => (Number.isNaN(v) ? -9999 : v)));
  const metadata = (items: string) => `<GDALMetadata>\n${items}\n</GDALMetadata>`;
  rasterCase(
    'raster-metadata-role',
    'a band metadata item with a role we do not know how to apply',
    stripTiff({
      width: NX,
      height: NY,
      pixels: kValues,
      nodata: '-9999',
      gdalMetadata: metadata('<Item name="GAIN" sample="0" role="gain">1000</Item>'),
    }),
    /raster-metadata-role\.tif.*role "gain"/,
  );
  rasterCase(
    'raster-scale-zero',
    'a band scale of 0 (every value would become the offset)',
    stripTiff({
      width: NX,
      height: NY,
      pixels: kValues,
      nodata: '-9999',
      gdalMetadata: metadata('<Item name="SCALE" sample="0" role="scale">0</Item>'),
    }),
    /raster-scale-zero\.tif.*scale "0".*not a usable number/,
  );
  rasterCase(
    'raster-unit-mismatch',
    'conductivity declared in mm/d where the scenario takes m/d',
    stripTiff({
      width: NX,
      height: NY,
      pixels: kValues,
      nodata: '-9999',
      gdalMetadata: metadata('<Item name="UNITTYPE" sample="0" role="unittype">mm/d</Item>'),
    }),
    /declares its values in "mm\/d", but aquifer\.conductivity is taken in m\/d/,
  );
  rasterCase(
    'raster-palette',
    'a palette raster (colour-class codes)',
    stripTiff({ width: NX, height: NY, pixels: new Uint8Array(NX * NY).fill(3), bitsPerSample: 8, sampleFormat: 1, photometric: 3 }),
    /raster-palette\.tif.*colour table/,
  );
  file('k-side-mask.tif', kStrip);
  file(
    'k-side-mask.tif.msk',
    stripTiff({ width: NX, height: NY, pixels: new Uint8Array(NX * NY).fill(255), bitsPerSample: 8, sampleFormat: 1 }),
  );
  solveCase(
    'raster-external-mask',
    'an external mask file (.msk) beside the raster, which GDAL would apply',
    aquifer('k-side-mask.tif'),
    2,
    /k-side-mask\.tif\.msk/,
  );
  file('k-side-scale.tif', kStrip);
  file(
    'k-side-scale.tif.aux.xml',
    '<PAMDataset>\n  <PAMRasterBand band="1">\n    <Scale>0.001</Scale>\n  </PAMRasterBand>\n</PAMDataset>\n',
  );
  solveCase(
    'raster-side-scale',
    'a scale in a .aux.xml side file, which GDAL would apply',
    aquifer('k-side-scale.tif'),
    2,
    /k-side-scale\.tif\.aux\.xml sets Scale/,
  );

  // Damaged block offsets that a lenient reader decodes: into the IFD, into the header, into another block.
  const ifdOfStrip = new DataView(kStrip.buffer).getUint32(4, true);
  rasterCase(
    'raster-strip-into-ifd',
    'a strip offset pointing into the image file directory',
    withBlockOffset(kStrip, 273, 0, () => ifdOfStrip),
    /raster-strip-into-ifd\.tif"?: the file is damaged: strip 0 .*overlaps the image file directory 0/,
  );
  rasterCase(
    'raster-strips-overlap',
    'two strips sharing bytes',
    withBlockOffset(kStrip, 273, 2, (offsets) => offsets[1]! + 8),
    /raster-strips-overlap\.tif"?: the file is damaged: strip 2 .*overlaps strip 1/,
  );
  rasterCase(
    'raster-tile-into-header',
    'a tile offset pointing at the TIFF header',
    withBlockOffset(kBytes, 324, 0, () => 0),
    /raster-tile-into-header\.tif"?: the file is damaged: tile 0 .*overlaps the TIFF header/,
  );

  // --- rasters given together ------------------------------------------------------------------------------
  file('thick-other-size.tif', encodeFloat32GeoTiff({ ...baseGrid, nx: NX + 1 }, new Float64Array((NX + 1) * NY).fill(20)));
  solveCase(
    'grid-size-differs',
    'thickness raster one column wider',
    aquifer('k.tif', { thickness: 'thick-other-size.tif' }),
    2,
    /not on the grid.*size 12x8 vs 13x8/,
  );
  file(
    'thick-other-crs.tif',
    encodeFloat32GeoTiff(
      {
        ...baseGrid,
        crs: { epsg: 32634, geographic: false, geoKeys: { GTModelTypeGeoKey: 1, GTRasterTypeGeoKey: 1, ProjectedCSTypeGeoKey: 32634 } },
      },
      new Float64Array(NX * NY).fill(20),
    ),
  );
  solveCase(
    'grid-crs-differs',
    'thickness raster in another CRS',
    aquifer('k.tif', { thickness: 'thick-other-crs.tif' }),
    2,
    /CRS EPSG:32633 vs EPSG:32634/,
  );
  file(
    'recharge-shifted.tif',
    encodeFloat32GeoTiff({ ...baseGrid, transform: [X0 + 50, CELL, 0, Y0, 0, -CELL] }, new Float64Array(NX * NY).fill(1e-4)),
  );
  solveCase(
    'grid-shifted',
    'recharge raster shifted by half a cell',
    { recharge: 'recharge-shifted.tif' },
    2,
    /recharge.*not on the grid.*geotransform/,
  );
  file(
    'recharge-infinite.tif',
    encodeFloat32GeoTiff(
      baseGrid,
      new Float64Array(NX * NY).fill(1e-4).map((v, p) => (p === 30 ? -Infinity : v)),
    ),
  );
  solveCase('recharge-infinite', 'a -Infinity recharge cell', { recharge: 'recharge-infinite.tif' }, 2, /recharge.*infinite/);
  file(
    'stage-infinite.tif',
    encodeFloat32GeoTiff(
      baseGrid,
      new Float64Array(NX * NY).fill(Number.NaN).map((v, p) => (p % NX === 0 ? (p === 24 ? Infinity : 50) : v)),
    ),
  );
  solveCase(
    'fixed-head-infinite',
    'a fixed-head raster with +Infinity in one cell',
    { fixedHeads: [{ raster: 'stage-infinite.tif' }, { edge: 'east', head: 45 }] },
    2,
    /fixedHeads\[0\].*infinite/,
  );

  // --- singular systems --------------------------------------------------------------------------------------
  solveCase('no-fixed-head', 'no fixed-head entry at all', { fixedHeads: [] }, 2, /without a fixed head/);
  file(
    'k-wall.tif',
    encodeFloat32GeoTiff(
      baseGrid,
      k.map((v, p) => (p % NX === 8 ? Number.NaN : v)),
    ),
  );
  solveCase(
    'isolated-region',
    'an inactive wall cuts off the east; only the west is fixed',
    { ...aquifer('k-wall.tif'), fixedHeads: [{ edge: 'west', head: 50 }], wells: [], observations: [] },
    2,
    /no fixed head/,
  );
  file(
    'stage-on-inactive.tif',
    encodeFloat32GeoTiff(
      baseGrid,
      k.map((v) => (Number.isNaN(v) ? 48 : Number.NaN)),
    ),
  );
  solveCase(
    'fixed-head-only-inactive',
    'the only fixed heads fall on inactive cells',
    { fixedHeads: [{ raster: 'stage-on-inactive.tif' }] },
    2,
    /no fixed head/,
  );

  // --- points ------------------------------------------------------------------------------------------------
  const inside = centre(1, 1);
  const hole = centre(3, 5);
  solveCase(
    'well-outside',
    'a well 10 km east of the grid',
    { wells: [{ id: 'FAR-1', x: X0 + 10000, y: inside.y, rate: -10 }] },
    2,
    /well "FAR-1".*outside the grid/,
  );
  solveCase(
    'well-inactive',
    'a well in the inactive block',
    { wells: [{ id: 'DRY-1', ...hole, rate: -10 }] },
    2,
    /well "DRY-1".*inactive cell/,
  );
  solveCase(
    'well-fixed-cell',
    'a well in a fixed-head cell',
    { wells: [{ id: 'EDGE-1', ...centre(4, 0), rate: -10 }] },
    2,
    /well "EDGE-1".*fixed-head cell/,
  );
  solveCase(
    'observation-outside',
    'an observation south of the grid',
    { observations: [{ id: 'OB-S', x: inside.x, y: Y0 - 5000, head: 40 }] },
    2,
    /observation "OB-S".*outside the grid/,
  );
  solveCase(
    'observation-inactive',
    'an observation in the inactive block',
    { observations: [{ id: 'OB-H', ...hole, head: 40 }] },
    2,
    /observation "OB-H".*inactive cell/,
  );
  solveCase(
    'duplicate-well-ids',
    'two wells with id W1',
    {
      wells: [
        { id: 'W1', ...inside, rate: -1 },
        { id: 'W1', ...centre(6, 2), rate: -1 },
      ],
    },
    2,
    /duplicate well id "W1"/,
  );
  file('wells-dup.csv', `id,x,y,rate\nP1,${inside.x},${inside.y},-5\nP1,${centre(6, 2).x},${centre(6, 2).y},-5\n`);
  solveCase('csv-duplicate-ids', 'a CSV with one id twice', { wells: 'wells-dup.csv' }, 2, /wells-dup\.csv line 3: duplicate id "P1"/);
  file('wells-badnum.csv', `id,x,y,rate\nP1,${inside.x},${inside.y},-5\nP2,${inside.x},${inside.y},lots\n`);
  solveCase(
    'csv-bad-number',
    'a CSV rate that is not a number',
    { wells: 'wells-badnum.csv' },
    2,
    /wells-badnum\.csv line 3: rate "lots" is not a number/,
  );
  file('wells-fields.csv', `id,x,y,rate\nP1,${inside.x},${inside.y}\n`);
  solveCase(
    'csv-missing-field',
    'a CSV row with three fields under a four-column header',
    { wells: 'wells-fields.csv' },
    2,
    /wells-fields\.csv line 2: 3 field\(s\) where the header has 4/,
  );
  file('obs-header.csv', `name;x;y;level\nA;1;2;3\n`);
  solveCase(
    'csv-bad-header',
    'a semicolon-separated CSV header',
    { observations: 'obs-header.csv' },
    2,
    /obs-header\.csv line 1: the header .* not separated by commas/,
  );
  file('obs-comma-decimal.csv', `id,x,y,head\nA,${inside.x},${inside.y},"47,5"\n`);
  solveCase(
    'csv-decimal-comma',
    'a decimal comma in a quoted field',
    { observations: 'obs-comma-decimal.csv' },
    2,
    /head "47,5" is not a number/,
  );

  solveCase(
    'receptor-outside',
    'a receptor 10 km north of the grid',
    { receptors: [{ id: 'FARM-9', x: inside.x, y: Y0 + 10000 }] },
    2,
    /receptor "FARM-9".*outside the grid/,
  );
  solveCase(
    'receptor-inactive',
    'a receptor in the inactive block',
    { receptors: [{ id: 'SPRING-2', ...hole }] },
    2,
    /receptor "SPRING-2".*inactive/,
  );

  // --- particle tracking --------------------------------------------------------------------------------------
  const tracking = { captureTimes: [365, 3650], particlesPerWell: 8 };
  solveCase('tracking-no-porosity', 'tracking without aquifer.porosity', { tracking }, 2, /tracking needs aquifer\.porosity/);
  solveCase(
    'tracking-porosity-zero',
    'tracking with porosity 0',
    { ...aquifer('k.tif', { porosity: 0 }), tracking },
    2,
    /aquifer\.porosity/,
  );
  solveCase(
    'tracking-porosity-percent',
    'porosity 25 (a percentage, not a fraction)',
    { ...aquifer('k.tif', { porosity: 25 }), tracking },
    2,
    /aquifer\.porosity/,
  );
  solveCase(
    'tracking-capture-time-zero',
    'a capture time of 0',
    { ...aquifer('k.tif', { porosity: 0.2 }), tracking: { captureTimes: [365, 0] } },
    2,
    /tracking\.captureTimes(\[1\]|\.1).*capture time > 0/,
  );
  solveCase(
    'tracking-capture-time-negative',
    'a negative capture time',
    { ...aquifer('k.tif', { porosity: 0.2 }), tracking: { captureTimes: [-10] } },
    2,
    /tracking\.captureTimes(\[0\]|\.0).*capture time > 0/,
  );
  solveCase(
    'tracking-point-outside',
    'a tracking point 10 km north of the grid',
    { ...aquifer('k.tif', { porosity: 0.2 }), tracking: { points: [{ id: 'SPILL-1', x: inside.x, y: Y0 + 10000 }] } },
    2,
    /tracking\.points\[0\].*"SPILL-1".*outside the grid/,
  );
  solveCase(
    'tracking-point-inactive',
    'a tracking point in the inactive block',
    { ...aquifer('k.tif', { porosity: 0.2 }), tracking: { points: [{ id: 'SPILL-2', ...hole }] } },
    2,
    /tracking\.points\[0\].*"SPILL-2".*inactive/,
  );
  solveCase(
    'tracking-unknown-key',
    'a misspelt tracking key',
    { ...aquifer('k.tif', { porosity: 0.2 }), tracking: { captureTime: [365] } },
    2,
    /tracking.*captureTime.*did you mean "captureTimes"/,
  );
  solveCase(
    'tracking-max-time-zero',
    'a time limit of 0',
    { ...aquifer('k.tif', { porosity: 0.2 }), tracking: { maxTime: 0 } },
    2,
    /tracking\.maxTime.*> 0/,
  );

  // --- GeoJSON shapes ----------------------------------------------------------------------------------------
  // Coordinates in the raster CRS, declared by the older GeoJSON crs member (as GDAL writes it).
  const crsMember = { type: 'name', properties: { name: 'urn:ogc:def:crs:EPSG::32633' } };
  file('lake-broken.geojson', '{"type": "FeatureCollection", "features": [ {"type": "Feature", ');
  solveCase(
    'shape-json-syntax',
    'a GeoJSON file cut short',
    {
      fixedHeads: [
        { edge: 'west', head: 50 },
        { shape: 'lake-broken.geojson', head: 46 },
      ],
    },
    2,
    /lake-broken\.geojson.*(JSON|line)/,
  );
  file(
    'lake-point.geojson',
    JSON.stringify({
      type: 'FeatureCollection',
      crs: crsMember,
      features: [{ type: 'Feature', properties: {}, geometry: { type: 'Point', coordinates: [inside.x, inside.y] } }],
    }),
  );
  solveCase(
    'shape-wrong-geometry',
    'a Point where a lake polygon or river line is needed',
    {
      fixedHeads: [
        { edge: 'west', head: 50 },
        { shape: 'lake-point.geojson', head: 46 },
      ],
    },
    2,
    /lake-point\.geojson.*Point/,
  );
  const ring = (x0: number, y0: number, size: number) => [
    [x0, y0],
    [x0 + size, y0],
    [x0 + size, y0 + size],
    [x0, y0 + size],
    [x0, y0],
  ];
  file(
    'lake-nohead.geojson',
    JSON.stringify({
      type: 'FeatureCollection',
      crs: crsMember,
      features: [
        { type: 'Feature', properties: { level: 'high' }, geometry: { type: 'Polygon', coordinates: [ring(X0 + 300, Y0 - 500, 200)] } },
      ],
    }),
  );
  solveCase(
    'shape-bad-head-property',
    'headProperty "level" holds text',
    {
      fixedHeads: [
        { edge: 'west', head: 50 },
        { shape: 'lake-nohead.geojson', headProperty: 'level' },
      ],
    },
    2,
    /lake-nohead\.geojson.*level/,
  );

  // --- head-dependent boundaries and leakage -----------------------------------------------------------------
  const fixedWest = { edge: 'west', head: 50 };
  solveCase(
    'hd-fixed-overlap',
    'a linear boundary on the west edge, which is also a fixed head',
    { headDependent: [{ name: 'bank', kind: 'linear', edge: 'west', head: 49, conductance: 10 }] },
    2,
    /headDependent\[0\] \("bank"\) and the fixed-head entry "west" both hold the cell at row 0, col 0/,
  );
  solveCase(
    'hd-negative-conductance',
    'a river with conductance -5',
    { headDependent: [{ name: 'river', kind: 'river', edge: 'north', head: 48, conductance: -5 }] },
    2,
    /headDependent\[0\]\.conductance: a conductance cannot be negative/,
  );
  file(
    'cond-negative-row2.tif',
    encodeFloat32GeoTiff(
      baseGrid,
      k.map((_, p) => (p === 4 ? -3 : 10)),
    ),
  );
  solveCase(
    'hd-negative-conductance-cell',
    'a conductance raster with -3 on a cell of the north edge',
    { headDependent: [{ name: 'ditch', kind: 'drain', edge: 'north', head: 48, conductance: 'cond-negative-row2.tif' }] },
    2,
    /headDependent\[0\]\.conductance "cond-negative-row2\.tif": negative conductance -3 at row 0, col 4, a cell of "ditch"/,
  );
  solveCase(
    'leakage-negative',
    'a leakance of -1e-4',
    { leakage: { sourceHead: 52, leakance: -1e-4 } },
    2,
    /leakage\.leakance: a leakance cannot be negative/,
  );
  file(
    'leakance-negative.tif',
    encodeFloat32GeoTiff(
      baseGrid,
      k.map((_, p) => (p === 5 * NX + 2 ? -2e-4 : 1e-4)),
    ),
  );
  solveCase(
    'leakage-negative-raster',
    'a leakance raster with one negative cell',
    { leakage: { sourceHead: 52, leakance: 'leakance-negative.tif' } },
    2,
    /leakage\.leakance "leakance-negative\.tif": negative leakance -0\.0002\d* at row 5, col 2/,
  );
  solveCase(
    'hd-bottom-on-drain',
    'a bed bottom given for a drain',
    { headDependent: [{ name: 'ditch', kind: 'drain', edge: 'north', head: 48, conductance: 10, bottom: 40 }] },
    2,
    /headDependent\[0\]\.bottom: only a river has a bed bottom/,
  );
  solveCase(
    'hd-no-conductance',
    'a river without conductance or leakance',
    { headDependent: [{ name: 'river', kind: 'river', edge: 'north', head: 48 }] },
    2,
    /headDependent\[0\]\.conductance: needs "conductance"/,
  );
  solveCase(
    'hd-duplicate-name',
    'a drain named like a fixed-head group',
    { headDependent: [{ name: 'west', kind: 'drain', edge: 'north', head: 48, conductance: 10 }] },
    2,
    /headDependent\[0\]\.name: "west" is already the name of fixedHeads\[0\]/,
  );
  file(
    'ditch-line.geojson',
    JSON.stringify({
      type: 'FeatureCollection',
      crs: crsMember,
      features: [
        {
          type: 'Feature',
          properties: {},
          geometry: {
            type: 'LineString',
            coordinates: [
              [X0 + 250, Y0 - 150],
              [X0 + 950, Y0 - 150],
            ],
          },
        },
      ],
    }),
  );
  solveCase(
    'hd-line-without-width',
    'a ditch line with a leakance but no width',
    { headDependent: [{ name: 'ditch', kind: 'drain', shape: 'ditch-line.geojson', head: 48, leakance: 1 }] },
    2,
    /headDependent\[0\]: "ditch-line\.geojson" has lines, so "leakance" needs "width"/,
  );
  solveCase(
    'hd-magnitude-conductance',
    'a river conductance of 1e200',
    { headDependent: [{ name: 'river', kind: 'river', edge: 'north', head: 48, conductance: 1e200 }] },
    2,
    /headDependent\[0\]: conductance 1\.000e\+200 at row 0, col 0 lies outside 1e-100 to 1e100/,
  );
  solveCase(
    'leakage-magnitude-head',
    'a leakage source head of 1e20',
    { leakage: { sourceHead: 1e20, leakance: 1e-4 } },
    2,
    /leakage\.sourceHead: source head 1\.000e\+20 at row 0, col 0 exceeds 1e15/,
  );
  // East of the wall (column 8) only a drain holds the level; a well there lowers the head below the drain level.
  solveCase(
    'hd-drains-run-dry',
    'a region held only by a drain, with a well that draws its head below the drain level',
    {
      ...aquifer('k-wall.tif'),
      fixedHeads: [fixedWest],
      headDependent: [{ name: 'ditch', kind: 'drain', edge: 'east', head: 45, conductance: 10 }],
      wells: [{ id: 'E1', ...centre(4, 10), rate: -300 }],
      observations: [],
    },
    2,
    /no fixed head[^]*drains .* switched off/,
  );

  // --- compare -----------------------------------------------------------------------------------------------
  {
    const path = file(
      'compare-bad-variant.json',
      JSON.stringify({ ...baseScenario(), variants: [{ name: 'deeper', wells: [{ id: 'NEW-1', ...hole, rate: -50 }] }] }, null, 2),
    );
    const out = outFor('compare-bad-variant');
    cases.push({
      name: 'compare-bad-variant',
      what: 'compare: a variant adds a well in the inactive block',
      args: ['compare', path, '-o', out],
      out,
      code: 2,
      message: /deeper[^]*well "NEW-1".*inactive cell|well "NEW-1"[^]*deeper/,
      allowedFiles: [],
    });
  }
  {
    const path = file(
      'compare-variant-baseline.json',
      JSON.stringify({ ...baseScenario(), variants: [{ name: 'Baseline', recharge: 0 }] }, null, 2),
    );
    const out = outFor('compare-variant-baseline');
    cases.push({
      name: 'compare-variant-baseline',
      what: 'compare: a variant named "Baseline"',
      args: ['compare', path, '-o', out],
      out,
      code: 2,
      message: /variants\[0\]\.name.*reserved/,
      allowedFiles: [],
    });
  }
  // ensemble: the key's values, the conditioning points, the command's options.
  const ensembleKey = { realisations: 4, seed: 1, logConductivity: { sd: 0.5, correlationLength: 300 } };
  const ensembleCase = (name: string, what: string, ensemble: Record<string, unknown>, message: RegExp, args: string[] = []) => {
    const path = file(`${name}.json`, JSON.stringify({ ...baseScenario(), ensemble: { ...ensembleKey, ...ensemble } }, null, 2));
    const out = outFor(name);
    cases.push({ name, what, args: ['ensemble', path, '-o', out, ...args], out, code: 2, message, allowedFiles: [] });
  };
  ensembleCase(
    'ensemble-negative-sd',
    'ensemble: a negative sd of ln K',
    { logConductivity: { sd: -1, correlationLength: 300 } },
    /ensemble\.logConductivity\.sd/,
  );
  ensembleCase(
    'ensemble-unknown-model',
    'ensemble: a covariance model we do not have',
    { logConductivity: { sd: 1, correlationLength: 300, model: 'spherical' } },
    /ensemble\.logConductivity\.model/,
  );
  file('k-measured-hole.csv', `id,x,y,k\nPT-7,${hole.x},${hole.y},3.5\n`);
  ensembleCase(
    'ensemble-conditioning-inactive',
    'ensemble: a measured K in the inactive block',
    { conditioning: 'k-measured-hole.csv' },
    /"PT-7".*inactive cell/,
  );
  ensembleCase('ensemble-bad-shard', 'ensemble: --shard 4/3', {}, /--shard "4\/3"/, ['--shard', '4/3']);
  ensembleCase(
    'ensemble-capture-probability-text',
    'ensemble: captureProbability given as text',
    { captureProbability: 'yes' },
    /ensemble\.captureProbability/,
  );

  // --- scenario JSON -----------------------------------------------------------------------------------------
  const rawCase = (name: string, what: string, text: string, message: RegExp) => {
    const path = file(`${name}.json`, text);
    const out = outFor(name);
    cases.push({ name, what, args: ['solve', path, '-o', out], out, code: 2, message, allowedFiles: [] });
  };
  const valid = JSON.stringify(baseScenario(), null, 2);
  rawCase(
    'json-syntax',
    'a missing comma',
    valid.replace('"units"', '"units" "x"'),
    /json-syntax\.json line \d+, column \d+: invalid JSON/,
  );
  rawCase('json-trailing-comma', 'a trailing comma', valid.replace(/\n}$/, ',\n}'), /invalid JSON/);
  rawCase('json-empty', 'an empty scenario file', '', /invalid JSON/);
  rawCase('json-array', 'a list instead of an object', '[1, 2, 3]', /expected object|object/);
  rawCase(
    'json-duplicate-key',
    'the key "recharge" twice',
    valid.replace('"recharge": 0.0001', '"recharge": 0.0001, "recharge": 0.5'),
    /"recharge".*(twice|repeated|again|duplicate)/i,
  );
  {
    // 200 000 nested lists: JSON.parse accepts them; the recursive walks after it overflowed the stack.
    const deep = '['.repeat(200_000) + ']'.repeat(200_000);
    rawCase(
      'json-deep-nesting',
      'a scenario with lists nested 200 000 deep',
      valid.replace('"title": ', `"nested": ${deep}, "title": `),
      /json-deep-nesting\.json line \d+, column \d+: .*nested more than 100 levels/,
    );
    file(
      'lake-deep.geojson',
      `{"type": "FeatureCollection", "features": [{"type": "Feature", "properties": {}, "geometry": {"type": "Polygon", "coordinates": ${deep}}}]}`,
    );
    solveCase(
      'geojson-deep-nesting',
      'a GeoJSON shape whose coordinates nest 200 000 deep',
      {
        fixedHeads: [
          { edge: 'west', head: 50 },
          { shape: 'lake-deep.geojson', head: 46 },
        ],
      },
      2,
      /lake-deep\.geojson.*nested more than 100 levels/,
    );
  }
  solveCase('json-type-error', 'thickness as true', aquifer('k.tif', { thickness: true }), 2, /aquifer\.thickness/);
  solveCase('json-negative-thickness', 'a negative thickness', aquifer('k.tif', { thickness: -5 }), 2, /aquifer\.thickness/);
  // Water-table aquifers (aquifer.type): thickness comes from the heads, top and bottom.
  solveCase(
    'unconfined-with-thickness',
    'an unconfined aquifer given a thickness',
    { aquifer: { type: 'unconfined', conductivity: 'k.tif', thickness: 20, bottom: 50 } },
    2,
    /aquifer\.thickness.*must not be given for an unconfined aquifer/,
  );
  solveCase(
    'unconfined-without-bottom',
    'an unconfined aquifer without a bottom',
    { aquifer: { type: 'unconfined', conductivity: 'k.tif' } },
    2,
    /aquifer\.bottom.*required for an unconfined aquifer/,
  );
  solveCase(
    'convertible-without-top',
    'a convertible aquifer without a top',
    { aquifer: { type: 'convertible', conductivity: 'k.tif', bottom: 50 } },
    2,
    /aquifer\.top.*required for a convertible aquifer/,
  );
  solveCase(
    'top-below-bottom',
    'an aquifer top below its bottom',
    { aquifer: { type: 'convertible', conductivity: 'k.tif', top: 40, bottom: 50 } },
    2,
    /aquifer\.top 40 is not above aquifer\.bottom 50 at row 0, col 0/,
  );
  solveCase('json-unknown-key', 'a misspelt key', { recharj: 0.1 }, 2, /recharj.*did you mean "recharge"/);
  solveCase(
    'json-null-number',
    'a head that a script computed as Infinity (JSON.stringify writes null)',
    {
      fixedHeads: [
        // biome-ignore lint/correctness/noPrecisionLoss: the point of the case: a script computed Infinity, which JSON.stringify writes as null
        { edge: 'west', head: 1e400 },
        { edge: 'east', head: 45 },
      ],
    },
    2,
    /fixedHeads\[0\]\.head/,
  );
  rawCase('json-huge-number-text', 'a head written as 1e999', valid.replace('"head": 50', '"head": 1e999'), /fixedHeads\[0\]\.head/);
  solveCase('json-bad-tolerance', 'a tolerance of 5', { solver: { tolerance: 5 } }, 2, /solver\.tolerance/);
  solveCase('json-unknown-method', 'an unknown solver method', { solver: { method: 'magic' } }, 2, /unknown solver method "magic"/);
  solveCase('json-threads-zero', 'solver.threads 0', { solver: { threads: 0 } }, 2, /solver\.threads/);
  solveCase('json-threads-fraction', 'solver.threads 1.5', { solver: { threads: 1.5 } }, 2, /solver\.threads/);
  solveCase('json-threads-word', 'solver.threads "many"', { solver: { threads: 'many' } }, 2, /solver\.threads/);

  // --- magnitudes the arithmetic cannot carry (src/scenario/magnitudes.ts) ------------------------------------
  solveCase(
    'magnitude-fixed-head',
    'fixed heads of +-1e300 (head.tif was written with infinities)',
    {
      fixedHeads: [
        { edge: 'west', head: 1e300 },
        { edge: 'east', head: -1e300 },
      ],
    },
    2,
    /fixedHeads\[0\] \("west"\): head 1\.000e\+300 at row 0, col 0 exceeds 1e15/,
  );
  solveCase(
    'magnitude-thickness-tiny',
    'a thickness of 1e-300 (conductances underflowed to zero)',
    aquifer('k.tif', { thickness: 1e-300 }),
    2,
    /aquifer\.thickness 1\.000e-300 lies outside 1e-100 to 1e100/,
  );
  solveCase(
    'magnitude-transmissivity',
    'K 3e38 (a Float32 raster) times a thickness of 1e70',
    { aquifer: { conductivity: 'k-3e38.tif', thickness: 1e70 } },
    2,
    /aquifer\.conductivity "k-3e38\.tif": transmissivity K·b = .* at row 0, col 0 \(and 91 more/,
  );
  file(
    'k-3e38.tif',
    encodeFloat32GeoTiff(
      baseGrid,
      k.map((v) => (Number.isNaN(v) ? v : 3e38)),
    ),
  );
  {
    // K = 1e200 needs a Float64 raster (BitsPerSample 64, SampleFormat 3).
    const k64 = new Float64Array(k.map((v, p) => (p === 2 * NX + 3 ? 1e200 : Number.isNaN(v) ? -9999 : v)));
    file('k-1e200.tif', stripTiff({ width: NX, height: NY, pixels: new Uint8Array(k64.buffer), bitsPerSample: 64, nodata: '-9999' }));
    solveCase(
      'magnitude-conductivity',
      'a Float64 conductivity raster with 1e200 in one cell (pivot NaN before)',
      aquifer('k-1e200.tif'),
      2,
      /aquifer\.conductivity "k-1e200\.tif": conductivity 1\.000e\+200 at row 2, col 3 lies outside/,
    );
  }
  solveCase(
    'magnitude-anisotropy',
    'an anisotropy of 1e-200',
    aquifer('k.tif', { anisotropy: 1e-200 }),
    2,
    /aquifer\.anisotropy 1\.000e-200/,
  );
  solveCase(
    'magnitude-recharge',
    'a recharge of 1e99 per day (1e103 per 100 m cell)',
    { recharge: 1e99 },
    2,
    /recharge 1\.000e\+99 \(1\.000e\+103 per cell\) exceeds 1e100/,
  );
  solveCase(
    'magnitude-well-rate',
    'a well rate of -1e150',
    { wells: [{ id: 'BIG-1', ...centre(2, 3), rate: -1e150 }] },
    2,
    /well "BIG-1" \(wells\[0\]\): rate -1\.000e\+150 exceeds 1e100/,
  );
  solveCase(
    'magnitude-observation-head',
    'an observed head of 1e20',
    { observations: [{ id: 'OB-X', ...centre(6, 8), head: 1e20 }] },
    2,
    /observation "OB-X".*head 1\.000e\+20 exceeds 1e15/,
  );
  file('k-tiny-cells.tif', encodeFloat32GeoTiff({ ...baseGrid, transform: [X0, 1e-120, 0, Y0, 0, -1e-120] }, k));
  solveCase(
    'magnitude-cell-size',
    'cells 1e-120 m wide',
    { ...aquifer('k-tiny-cells.tif'), wells: [], observations: [] },
    2,
    /k-tiny-cells\.tif": cell width 1\.000e-120 lies outside/,
  );
  solveCase(
    'magnitude-head-overflows-float32',
    'a rate of -1e90 that draws heads beyond single precision (head.tif)',
    { wells: [{ id: 'DEEP-1', ...centre(2, 3), rate: -1e90 }] },
    2,
    /cannot write .*head.* as a Float32 GeoTIFF: the value -?\d\.\d+e\+\d+ at row \d+, col \d+ lies beyond single precision/,
  );

  // --- CRS codes ---------------------------------------------------------------------------------------------
  solveCase('epsg-unknown', 'pointCrs EPSG:99999 (no such code)', { pointCrs: 'EPSG:99999' }, 2, /pointCrs.*EPSG:99999/);
  solveCase('epsg-not-horizontal', 'pointCrs names a vertical CRS (EPSG:5703)', { pointCrs: 'EPSG:5703' }, 2, /pointCrs.*not a horizontal/);
  solveCase('epsg-malformed', 'pointCrs "WGS84"', { pointCrs: 'WGS84' }, 2, /pointCrs.*EPSG code/);
  file(
    'k-nocrs.tif',
    stripTiff({ width: NX, height: NY, pixels: float32Pixels(k.map((v) => (Number.isNaN(v) ? -9999 : v))), nodata: '-9999', crs: null }),
  );
  solveCase(
    'epsg-raster-without-code',
    'pointCrs given but the raster has no CRS',
    { ...aquifer('k-nocrs.tif'), pointCrs: 'EPSG:4326' },
    2,
    /pointCrs.*no EPSG code/,
  );

  // --- files and folders -------------------------------------------------------------------------------------
  {
    const out = outFor('missing-scenario');
    cases.push({
      name: 'missing-scenario',
      what: 'the scenario file does not exist',
      args: ['solve', join(dir, 'nowhere.json'), '-o', out],
      out,
      code: 2,
      message: /nowhere\.json/,
      allowedFiles: [],
    });
  }
  {
    mkdirSync(join(dir, 'a-folder.json'), { recursive: true });
    const out = outFor('scenario-is-folder');
    cases.push({
      name: 'scenario-is-folder',
      what: 'the scenario path is a folder',
      args: ['solve', join(dir, 'a-folder.json'), '-o', out],
      out,
      code: 2,
      message: /a-folder\.json.*folder/,
      allowedFiles: [],
    });
  }
  mkdirSync(join(dir, 'folder.tif'), { recursive: true });
  solveCase('raster-is-folder', 'the conductivity path is a folder', aquifer('folder.tif'), 2, /folder\.tif.*folder/);
  solveCase('raster-missing', 'the conductivity raster does not exist', aquifer('gone.tif'), 2, /not found: "gone\.tif"/);
  {
    const blocker = file('plain-file', 'not a folder\n');
    const path = file('out-under-file.json', JSON.stringify(baseScenario(), null, 2));
    const out = join(blocker, 'results');
    cases.push({
      name: 'out-under-file',
      what: 'output folder below a regular file (unwritable, even for root)',
      args: ['solve', path, '-o', out],
      out,
      code: 2,
      message: /cannot create output folder/,
      allowedFiles: [],
    });
  }
  {
    const path = file('out-proc.json', JSON.stringify(baseScenario(), null, 2));
    const out = '/proc/piezomap-results';
    cases.push({
      name: 'out-in-proc',
      what: 'output folder in /proc (not writable, even for root)',
      args: ['solve', path, '-o', out],
      out,
      code: 2,
      message: /output folder/,
      allowedFiles: [],
    });
  }
  {
    const path = file('out-is-file.json', JSON.stringify(baseScenario(), null, 2));
    const out = file('results-file', 'x\n');
    cases.push({
      name: 'out-is-file',
      what: 'the output path is a regular file',
      args: ['solve', path, '-o', out],
      out,
      code: 2,
      message: /exists and is not a folder/,
      allowedFiles: [],
    });
  }
  {
    const path = file('out-holds-results.json', JSON.stringify(baseScenario(), null, 2));
    const out = outFor('out-holds-results');
    mkdirSync(out, { recursive: true });
    writeFileSync(join(out, 'summary.json'), '{"files":["head.tif","summary.json"]}\n');
    writeFileSync(join(out, 'head.tif'), 'earlier result\n');
    cases.push({
      name: 'out-holds-results',
      what: 'the output folder holds earlier results (no --overwrite)',
      args: ['solve', path, '-o', out],
      out,
      code: 2,
      message: /already holds results/,
      allowedFiles: ['summary.json', 'head.tif'],
    });
  }
  {
    // The trial of issue 9: -o the scenario's own folder, where a fixed-head raster is named head.tif (a result's name).
    const own = join(dir, 'own-folder');
    mkdirSync(own, { recursive: true });
    writeFileSync(join(own, 'k.tif'), kBytes);
    writeFileSync(
      join(own, 'head.tif'),
      encodeFloat32GeoTiff(
        baseGrid,
        new Float64Array(NX * NY).map((_, p) => (p % NX === 0 ? 50 : Number.NaN)),
      ),
    );
    const path = join(own, 'own.json');
    writeFileSync(path, JSON.stringify({ ...baseScenario(), fixedHeads: [{ raster: 'head.tif' }, { edge: 'east', head: 45 }] }, null, 2));
    cases.push({
      name: 'out-holds-inputs',
      what: "the output folder is the scenario's own, holding its inputs (a fixed-head raster named head.tif)",
      args: ['solve', path, '-o', own],
      out: own,
      code: 2,
      message: /output folder .*own-folder holds 3 inputs of this run \(.*own\.json, .*k\.tif, .*head\.tif\)/,
      allowedFiles: ['head.tif', 'k.tif', 'own.json'],
    });
  }
  {
    // A lock of a run on another host (a shared drive): it cannot be checked from here, so it is never taken over.
    const path = file('out-locked.json', JSON.stringify(baseScenario(), null, 2));
    const out = join(dir, 'locked-out');
    mkdirSync(out, { recursive: true });
    const lock = {
      pid: 4242,
      host: 'field-laptop.invalid',
      started: '2026-03-01T08:00:00.000Z',
      acquired: '2026-03-01T08:00:05.000Z',
      command: 'piezomap solve other.json -o locked-out',
    };
    writeFileSync(join(out, '.piezomap-lock'), JSON.stringify(lock, null, 2) + '\n');
    cases.push({
      name: 'out-locked-elsewhere',
      what: 'the output folder is locked by a run on another host',
      args: ['solve', path, '-o', out],
      out,
      code: 2,
      message: /output folder .*locked-out is in use by another piezomap run \(PID 4242 on host field-laptop\.invalid/,
      allowedFiles: ['.piezomap-lock'],
    });
  }
  {
    // compare: only a variant reads a file inside the output folder.
    const out = join(dir, 'variant-out');
    mkdirSync(out, { recursive: true });
    writeFileSync(join(out, 'recharge-wet.tif'), encodeFloat32GeoTiff(baseGrid, new Float64Array(NX * NY).fill(2e-4)));
    const path = file(
      'out-holds-variant-input.json',
      JSON.stringify({ ...baseScenario(), variants: [{ name: 'wetter', recharge: 'variant-out/recharge-wet.tif' }] }, null, 2),
    );
    cases.push({
      name: 'out-holds-variant-input',
      what: 'compare: the output folder holds a raster that only a variant reads',
      args: ['compare', path, '-o', out],
      out,
      code: 2,
      message: /output folder .*variant-out holds an input of this run \(.*recharge-wet\.tif\)/,
      allowedFiles: ['recharge-wet.tif'],
    });
  }

  // --- resources and solver ----------------------------------------------------------------------------------
  // 200 x 200 cells: the raster reads within a 4 MiB limit, the run does not fit 100 MiB.
  const bigGrid: Grid = { ...baseGrid, nx: 200, ny: 200 };
  file('k-200.tif', encodeFloat32GeoTiff(bigGrid, new Float64Array(200 * 200).fill(5)));
  solveCase(
    'memory-limit',
    'a memory limit of 100 MiB for a 200 x 200 run (the raster alone reads within it)',
    { ...aquifer('k-200.tif'), wells: [], observations: [] },
    2,
    /run needs about .* memory limit is 100\.0 MiB[^]*coarsen the rasters about 2\.\dx per side/,
    { env: { PIEZOMAP_MEMORY_LIMIT_MB: '100' } },
  );
  {
    const path = file('inspect-memory-limit.json', JSON.stringify({ ...baseScenario('k-200.tif'), wells: [], observations: [] }, null, 2));
    const out = outFor('inspect-memory-limit');
    cases.push({
      name: 'inspect-memory-limit',
      what: 'inspect refuses, as solve would, a run that does not fit the memory limit',
      args: ['inspect', path],
      out,
      code: 2,
      message: /run needs about .* memory limit is 100\.0 MiB/,
      allowedFiles: [],
      env: { PIEZOMAP_MEMORY_LIMIT_MB: '100' },
    });
  }
  solveCase(
    'memory-limit-tiny',
    'a memory limit of 4 MiB, below what the program itself takes',
    { ...aquifer('k-200.tif'), wells: [], observations: [] },
    2,
    /memory limit is 4\.0 MiB[^]*raise it/,
    { env: { PIEZOMAP_MEMORY_LIMIT_MB: '4' } },
  );
  solveCase(
    'memory-limit-raster',
    'a memory limit of 1 MiB: the 200 x 200 raster is refused from its header, before it is decoded',
    { ...aquifer('k-200.tif'), wells: [], observations: [] },
    2,
    /k-200\.tif.*more than half of the memory/,
    { env: { PIEZOMAP_MEMORY_LIMIT_MB: '1' } },
  );
  {
    // A few hundred bytes claiming 3000 x 3000 Float32 cells, all in one missing ("sparse") strip, named by seven keys:
    // 72 MB each as doubles, 504 MB together; each alone would fit half of the 800 MiB limit, all together do not.
    const sparse = stripTiff({ width: 3000, height: 3000, pixels: new Uint8Array(16), rowsPerStrip: 3000, nodata: '-9999' });
    file('sparse-big.tif', withBlockCounts(sparse, 279, 0));
    const path = file(
      'memory-seven-keys.json',
      JSON.stringify(
        {
          ...baseScenario('sparse-big.tif'),
          aquifer: {
            conductivity: 'sparse-big.tif',
            thickness: 'sparse-big.tif',
            porosity: 'sparse-big.tif',
            top: 'sparse-big.tif',
            bottom: 'sparse-big.tif',
          },
          groundSurface: 'sparse-big.tif',
          recharge: 'sparse-big.tif',
          wells: [],
          observations: [],
        },
        null,
        2,
      ),
    );
    const out = outFor('memory-seven-keys');
    cases.push({
      name: 'memory-seven-keys',
      what: 'a tiny sparse raster claiming 3000 x 3000 cells, named by seven keys: refused from the headers, before decoding',
      args: ['solve', path, '-o', out],
      out,
      code: 2,
      message:
        /7 rasters need about 5\d\d\.\d MiB once read \(aquifer\.conductivity "sparse-big\.tif" 3000 x 3000 \(68\.7 MiB\)[^]*nothing was decoded/,
      allowedFiles: [],
      env: { PIEZOMAP_MEMORY_LIMIT_MB: '800' },
    });
  }
  solveCase('memory-limit-unusable', 'PIEZOMAP_MEMORY_LIMIT_MB=lots', {}, 2, /PIEZOMAP_MEMORY_LIMIT_MB="lots"/, {
    env: { PIEZOMAP_MEMORY_LIMIT_MB: 'lots' },
  });
  {
    const path = file('not-converged.json', JSON.stringify(baseScenario(), null, 2));
    const out = outFor('not-converged');
    cases.push({
      name: 'not-converged',
      what: 'Jacobi capped at 5 iterations',
      args: ['solve', path, '-o', out, '--method', 'jacobi', '--max-iterations', '5'],
      out,
      code: 3,
      message: /did not reach the tolerance.*relative residual .* convergence factor/s,
      allowedFiles: ['head-not-converged.tif', 'budget.csv', 'convergence.csv', 'summary.json'],
    });
  }
  {
    const path = file(
      'budget-open.json',
      JSON.stringify({ ...baseScenario(), solver: { method: 'cg', tolerance: 0.5, maxIterations: 100 } }, null, 2),
    );
    const out = outFor('budget-open');
    cases.push({
      name: 'budget-open',
      what: 'a loose tolerance met while the water budget does not close',
      args: ['solve', path, '-o', out],
      out,
      code: 3,
      message: /water budget does not close/,
      allowedFiles: ['head-not-converged.tif', 'budget.csv', 'convergence.csv', 'summary.json'],
    });
  }
  return cases;
}

/** Cut a strip file inside its pixel data (the IFD, at the end of our layout, is kept by moving it first). */
function cutStripFile(bytes: Uint8Array): Uint8Array {
  // Our strip writer puts pixels first and the IFD after them; drop the second half of the pixels by
  // rewriting the strip byte counts to claim more bytes than the file holds.
  const out = bytes.slice();
  const view = new DataView(out.buffer);
  const ifd = view.getUint32(4, true);
  const n = view.getUint16(ifd, true);
  for (let k = 0; k < n; k++) {
    const at = ifd + 2 + 12 * k;
    if (view.getUint16(at, true) !== 273) continue;
    const count = view.getUint32(at + 4, true);
    const offsets = count === 1 ? at + 8 : view.getUint32(at + 8, true);
    // move the last strip's offset near the end of the file so its bytes run past it
    view.setUint32(offsets + 4 * (count - 1), out.length - 10, true);
  }
  return out;
}

/** Overwrite the middle of every tile's DEFLATE stream with a fixed byte pattern. */
function corruptTiles(bytes: Uint8Array): Uint8Array {
  const out = bytes.slice();
  const view = new DataView(out.buffer);
  const ifd = view.getUint32(4, true);
  const n = view.getUint16(ifd, true);
  let offsets: number[] = [];
  let counts: number[] = [];
  const list = (at: number) => {
    const count = view.getUint32(at + 4, true);
    const type = view.getUint16(at + 2, true);
    const size = type === 3 ? 2 : 4;
    const base = count * size > 4 ? view.getUint32(at + 8, true) : at + 8;
    return Array.from({ length: count }, (_, i) => (size === 2 ? view.getUint16(base + 2 * i, true) : view.getUint32(base + 4 * i, true)));
  };
  for (let k = 0; k < n; k++) {
    const at = ifd + 2 + 12 * k;
    const tag = view.getUint16(at, true);
    if (tag === 324) offsets = list(at);
    if (tag === 325) counts = list(at);
  }
  offsets.forEach((offset, i) => {
    for (let b = 2; b < counts[i]! - 4; b++) out[offset + b] = (b * 37 + 11) & 0xff;
  });
  return out;
}

/** The values of a LONG (or SHORT) list tag of the first IFD, and where they are stored. */
function longList(bytes: Uint8Array, tag: number): { at: number; size: number; values: number[] } {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const ifd = view.getUint32(4, true);
  const n = view.getUint16(ifd, true);
  for (let k = 0; k < n; k++) {
    const entry = ifd + 2 + 12 * k;
    if (view.getUint16(entry, true) !== tag) continue;
    const size = view.getUint16(entry + 2, true) === 3 ? 2 : 4;
    const count = view.getUint32(entry + 4, true);
    const at = count * size > 4 ? view.getUint32(entry + 8, true) : entry + 8;
    const values = Array.from({ length: count }, (_, i) =>
      size === 2 ? view.getUint16(at + 2 * i, true) : view.getUint32(at + 4 * i, true),
    );
    return { at, size, values };
  }
  throw new Error(`tag ${tag} not found`);
}

function setListValue(bytes: Uint8Array, list: { at: number; size: number }, index: number, value: number): void {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  if (list.size === 2) view.setUint16(list.at + 2 * index, value, true);
  else view.setUint32(list.at + 4 * index, value, true);
}

/** A copy with block `index` of the offsets tag (273 strips, 324 tiles) moved to `offset(current offsets)`. */
function withBlockOffset(bytes: Uint8Array, tag: number, index: number, offset: (offsets: number[]) => number): Uint8Array {
  const out = bytes.slice();
  const list = longList(out, tag);
  setListValue(out, list, index, offset(list.values));
  return out;
}

/** A copy with every block byte count (279 strips, 325 tiles) set to `count` (0: missing, "sparse" blocks). */
function withBlockCounts(bytes: Uint8Array, tag: number, count: number): Uint8Array {
  const out = bytes.slice();
  const list = longList(out, tag);
  list.values.forEach((_, i) => setListValue(out, list, i, count));
  return out;
}

function withIfdOffset(bytes: Uint8Array, offset: number): Uint8Array {
  const out = bytes.slice();
  new DataView(out.buffer).setUint32(4, offset, true);
  return out;
}

/** Byte position of the inline value of a SHORT tag in the first IFD (for patching BitsPerSample). */
function findShortTag(bytes: Uint8Array, tag: number): number {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const ifd = view.getUint32(4, true);
  const n = view.getUint16(ifd, true);
  for (let k = 0; k < n; k++) {
    const at = ifd + 2 + 12 * k;
    if (view.getUint16(at, true) === tag) return at + 8;
  }
  return -1;
}

if (process.argv[1] && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  const here = fileURLToPath(new URL('.', import.meta.url));
  const dir = resolve(process.argv[2] ?? join(here, 'bad-inputs'));
  const cases = writeBadInputs(dir);
  for (const c of cases) process.stdout.write(`${c.name}\texit ${c.code}\t${c.what}\n`);
  process.stdout.write(`${cases.length} cases written to ${dir}\n`);
}
