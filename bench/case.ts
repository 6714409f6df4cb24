/**
 * The benchmark case, built in memory: an invented confined aquifer on an N x N raster of 10 m cells with
 * spatially correlated log-normal conductivity, ln K = ln 10 + 2 z, z Gaussian-filtered white noise
 * (sigma 8 cells) normalised to unit variance; thickness 20 m; irregular inactive holes and a ragged
 * north/south border; fixed heads 100 m on the west column and 90 m on the east column; 10 wells at -500 m3/d.
 * Everything comes from a fixed seed, so a size always gives the same case.
 *
 * The rough variant (`field: 'rough'`) keeps everything but the conductivity: ln K = ln 10 + 3 z with z unfiltered
 * white noise (unit variance, no spatial correlation), so neighbouring conductivities differ by up to about 10^6
 * (the case a 2 x 2 geometric aggregation handles worst).
 */
import type { Grid } from '../src/grid.js';
import { geoKeysForEpsg } from '../src/raster/geokeys.js';
import type { FixedHeadInput, ModelInput, WellInput } from '../src/scenario/types.js';
import { seededUniform } from '../src/random.js';

export const CELL_SIZE = 10;
export const THICKNESS = 20;
export const WELL_RATE = -500;
const ORIGIN_X = 400000;
const ORIGIN_Y = 5200000;
/** WGS 84 / UTM zone 33N: an open-standard projected CRS in metres for the written GeoTIFF. */
const EPSG = 32633;

const uniform = seededUniform;

/** Gaussian white noise (Box–Muller), filtered separably with a Gaussian of `sigma` cells, normalised to mean 0, variance 1. */
export function correlatedField(nx: number, ny: number, sigma: number, seed: number): Float64Array {
  const rnd = uniform(seed);
  const n = nx * ny;
  const a = new Float64Array(n);
  for (let p = 0; p < n; p += 2) {
    const u = 1 - rnd();
    const v = rnd();
    const r = Math.sqrt(-2 * Math.log(u));
    a[p] = r * Math.cos(2 * Math.PI * v);
    if (p + 1 < n) a[p + 1] = r * Math.sin(2 * Math.PI * v);
  }
  const radius = Math.ceil(3 * sigma);
  const kernel = new Float64Array(2 * radius + 1);
  for (let k = -radius; k <= radius; k++) kernel[k + radius] = Math.exp((-k * k) / (2 * sigma * sigma));
  const tmp = new Float64Array(n);
  // rows (edges reflect)
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    for (let j = 0; j < nx; j++) {
      let s = 0;
      for (let k = -radius; k <= radius; k++) {
        let jj = j + k;
        if (jj < 0) jj = -jj - 1;
        else if (jj >= nx) jj = 2 * nx - jj - 1;
        jj = Math.min(Math.max(jj, 0), nx - 1);
        s += kernel[k + radius]! * a[row + jj]!;
      }
      tmp[row + j] = s;
    }
  }
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      let s = 0;
      for (let k = -radius; k <= radius; k++) {
        let ii = i + k;
        if (ii < 0) ii = -ii - 1;
        else if (ii >= ny) ii = 2 * ny - ii - 1;
        ii = Math.min(Math.max(ii, 0), ny - 1);
        s += kernel[k + radius]! * tmp[ii * nx + j]!;
      }
      a[i * nx + j] = s;
    }
  }
  let mean = 0;
  for (let p = 0; p < n; p++) mean += a[p]!;
  mean /= n;
  let variance = 0;
  for (let p = 0; p < n; p++) variance += (a[p]! - mean) ** 2;
  const sd = Math.sqrt(variance / n);
  for (let p = 0; p < n; p++) a[p] = (a[p]! - mean) / sd;
  return a;
}

/**
 * Makes inactive every active cell not connected to the west or east column (where the fixed heads are):
 * such islands would have no fixed head and leave the head undetermined.
 */
function removeIslands(conductivity: Float64Array, nx: number, ny: number): void {
  const n = nx * ny;
  const seen = new Uint8Array(n);
  const queue = new Int32Array(n);
  let head = 0;
  let tail = 0;
  for (let i = 0; i < ny; i++) {
    for (const p of [i * nx, i * nx + nx - 1]) {
      if (conductivity[p]! > 0 && !seen[p]) {
        seen[p] = 1;
        queue[tail++] = p;
      }
    }
  }
  while (head < tail) {
    const p = queue[head++]!;
    const col = p % nx;
    const visit = (q: number) => {
      if (!seen[q] && conductivity[q]! > 0) {
        seen[q] = 1;
        queue[tail++] = q;
      }
    };
    if (col > 0) visit(p - 1);
    if (col < nx - 1) visit(p + 1);
    if (p >= nx) visit(p - nx);
    if (p + nx < n) visit(p + nx);
  }
  for (let p = 0; p < n; p++) if (!seen[p]) conductivity[p] = NaN;
}

export type CaseField = 'smooth' | 'rough';
export const CASE_FIELDS: readonly CaseField[] = ['smooth', 'rough'];

export interface BenchCase {
  model: ModelInput;
  size: number;
  field: CaseField;
}

/** Unit Gaussian white noise (Box–Muller) from a fixed seed, normalised to mean 0, variance 1. */
function whiteNoise(n: number, seed: number): Float64Array {
  const rnd = uniform(seed);
  const a = new Float64Array(n);
  for (let p = 0; p < n; p += 2) {
    const r = Math.sqrt(-2 * Math.log(1 - rnd()));
    const v = rnd();
    a[p] = r * Math.cos(2 * Math.PI * v);
    if (p + 1 < n) a[p + 1] = r * Math.sin(2 * Math.PI * v);
  }
  let mean = 0;
  for (let p = 0; p < n; p++) mean += a[p]!;
  mean /= n;
  let variance = 0;
  for (let p = 0; p < n; p++) variance += (a[p]! - mean) ** 2;
  const sd = Math.sqrt(variance / n);
  for (let p = 0; p < n; p++) a[p] = (a[p]! - mean) / sd;
  return a;
}

export function benchCase(size: number, seed = 20240601, field: CaseField = 'smooth'): BenchCase {
  const nx = size;
  const ny = size;
  const n = nx * ny;
  const z = field === 'rough' ? whiteNoise(n, seed + 4) : correlatedField(nx, ny, 8, seed);
  const sigma = field === 'rough' ? 3 : 2;
  const conductivity = new Float64Array(n);
  for (let p = 0; p < n; p++) conductivity[p] = Math.exp(Math.log(10) + sigma * z[p]!);
  // irregular inactive holes: where a second, smoother field is high (about 2 % of the area)
  const holes = correlatedField(nx, ny, 16, seed + 1);
  for (let p = 0; p < n; p++) if (holes[p]! > 2.05) conductivity[p] = NaN;
  // ragged north and south borders: a smooth random depth of inactive rows per column
  const rnd = uniform(seed + 2);
  const maxDepth = Math.max(2, Math.round(size / 25));
  let north = maxDepth / 2;
  let south = maxDepth / 2;
  for (let j = 0; j < nx; j++) {
    north = Math.min(maxDepth, Math.max(0, north + (rnd() - 0.5) * 3));
    south = Math.min(maxDepth, Math.max(0, south + (rnd() - 0.5) * 3));
    for (let i = 0; i < Math.floor(north); i++) conductivity[i * nx + j] = NaN;
    for (let i = ny - Math.floor(south); i < ny; i++) conductivity[i * nx + j] = NaN;
  }
  // GDAL geotransform order: [originX, pixelWidth, rowRotation, originY, columnRotation, pixelHeight]
  removeIslands(conductivity, nx, ny);
  const transform = [ORIGIN_X, CELL_SIZE, 0, ORIGIN_Y, 0, -CELL_SIZE] as const;
  const grid: Grid = {
    nx,
    ny,
    transform,
    crs: {
      epsg: EPSG,
      geographic: false,
      geoKeys: geoKeysForEpsg(EPSG, false),
      linearUnit: 'metre',
    },
  };
  const west: FixedHeadInput = { name: 'west', source: 'fixedHeads[0]', cells: new Int32Array(ny), heads: new Float64Array(ny).fill(100) };
  const east: FixedHeadInput = { name: 'east', source: 'fixedHeads[1]', cells: new Int32Array(ny), heads: new Float64Array(ny).fill(90) };
  for (let i = 0; i < ny; i++) {
    west.cells[i] = i * nx;
    east.cells[i] = i * nx + nx - 1;
  }
  const wells: WellInput[] = [];
  const wellRnd = uniform(seed + 3);
  while (wells.length < 10) {
    const col = Math.floor((0.15 + 0.7 * wellRnd()) * nx);
    const row = Math.floor((0.15 + 0.7 * wellRnd()) * ny);
    if (!(conductivity[row * nx + col]! > 0)) continue;
    wells.push({
      id: `W${wells.length + 1}`,
      x: ORIGIN_X + (col + 0.5) * CELL_SIZE,
      y: ORIGIN_Y - (row + 0.5) * CELL_SIZE,
      rate: WELL_RATE,
      source: `wells[${wells.length}]`,
    });
  }
  const model: ModelInput = {
    title: field === 'rough' ? `benchmark ${size}x${size}, rough conductivity` : `benchmark ${size}x${size}`,
    units: { length: 'm', time: 'd' },
    scenarioPath: '<bench>',
    grid,
    conductivity,
    thickness: THICKNESS,
    anisotropy: 1,
    fixedHeads: [west, east],
    recharge: 0,
    wells,
    observations: [],
    solver: { method: 'auto', tolerance: 1e-10, maxIterations: 100000 },
    inputFiles: [],
    warnings: [],
  };
  return { model, size, field };
}

/** Bottom of the unconfined benchmark case: 55 m +- 8 m (correlated, sigma 24 cells), kept in [38, 70] m. */
export const UNCONFINED_BOTTOM = { mean: 55, sd: 8, min: 38, max: 70 } as const;

/**
 * The benchmark case as an unconfined aquifer (issue 13): the same conductivity, fixed heads and wells, the aquifer
 * resting on a smooth invented bottom raster, so the saturated thickness between the 90-100 m heads is about 20-60 m.
 */
export function unconfinedBenchCase(size: number, seed = 20240601): BenchCase {
  const base = benchCase(size, seed);
  const { nx, ny } = base.model.grid;
  const z = correlatedField(nx, ny, 24, seed + 4);
  const bottom = new Float64Array(nx * ny);
  const b = UNCONFINED_BOTTOM;
  for (let p = 0; p < bottom.length; p++) bottom[p] = Math.min(b.max, Math.max(b.min, b.mean + b.sd * z[p]!));
  return {
    size,
    field: base.field,
    model: { ...base.model, title: `unconfined benchmark ${size}x${size}`, aquiferType: 'unconfined', aquiferBottom: bottom },
  };
}
