/**
 * Stationary Gaussian random fields of ln K on the raster grid, generated exactly by circulant embedding
 * (Dietrich & Newsam 1997, "Fast and exact simulation of stationary Gaussian processes through circulant embedding
 * of the covariance matrix", SIAM J. Sci. Comput. 18(4)): the grid's covariance matrix is embedded in a block
 * circulant one on a periodic grid of mx × my cells (mx ≥ 2(nx − 1), my ≥ 2(ny − 1), powers of two for the FFT);
 * its eigenvalues are the 2-D DFT of its first row; when one is negative the embedding is doubled until none is
 * (reported when a size cap is reached). A field is then the real part of FFT(√(λ/M)·(Z₁ + iZ₂)), with Z₁, Z₂
 * independent standard normal vectors: its covariance on the grid is the model's exactly (not an approximation).
 *
 * Covariance: C(Δx, Δy) = sd²·exp(−r) (exponential) or sd²·exp(−r²) (gaussian), r = √((Δx/λx)² + (Δy/λy)²).
 *
 * Realisation i of master seed s uses its own generator (xoroshiro128+ from pure-rand, state built from (s, i)), so
 * its field depends only on (s, i): never on the order, the worker or the shard that computes it.
 */
import FFT from 'fft.js';
import { xoroshiro128plusFromState } from 'pure-rand/generator/xoroshiro128plus';
import { uniformFloat64 } from 'pure-rand/distribution/uniformFloat64';
import { inputError } from '../errors.js';

export type CovarianceModel = 'exponential' | 'gaussian';

export interface FieldSpec {
  nx: number;
  ny: number;
  /** Cell sizes (length units). */
  dx: number;
  dy: number;
  sd: number;
  /** Correlation lengths along x (columns) and y (rows), length units. */
  lx: number;
  ly: number;
  model: CovarianceModel;
}

/** The covariance of ln K at a separation (Δx, Δy). */
export function covariance(spec: Pick<FieldSpec, 'sd' | 'lx' | 'ly' | 'model'>, hx: number, hy: number): number {
  const u = hx / spec.lx;
  const v = hy / spec.ly;
  const r2 = u * u + v * v;
  return spec.sd * spec.sd * (spec.model === 'exponential' ? Math.exp(-Math.sqrt(r2)) : Math.exp(-r2));
}

/** Largest embedding (cells of the periodic grid) tried before giving up. */
export const MAX_EMBEDDING_CELLS = 1 << 24;

function nextPowerOfTwo(n: number): number {
  let m = 2;
  while (m < n) m *= 2;
  return m;
}

/** MurmurHash3's 32-bit finaliser (Appleby, public domain; from memory): mixes the bits of a word. */
function mix32(h: number): number {
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

/**
 * The generator of realisation `index` under master seed `seed`: xoroshiro128+ (pure-rand) started from a 128-bit
 * state holding the seed and the index themselves (so distinct pairs start from distinct states) and two mixed
 * words, with the first outputs discarded so that nearby states have drifted apart.
 */
export function realisationRandom(seed: number, index: number): () => number {
  const state = [seed >>> 0, index >>> 0, mix32((seed ^ 0x9e3779b9) >>> 0), mix32((index + 0x7f4a7c15) >>> 0) | 1];
  const rng = xoroshiro128plusFromState(state);
  for (let k = 0; k < 64; k++) rng.next();
  return () => uniformFloat64(rng);
}

export interface EmbeddingReport {
  mx: number;
  my: number;
  /** Smallest and largest eigenvalue of the embedding (the smallest is ≥ 0 unless `clipped`). */
  minEigenvalue: number;
  maxEigenvalue: number;
  /** Eigenvalues below zero set to zero (only rounding-sized ones, |λ| ≤ 1e-10·max). */
  clipped: number;
}

/** Generates realisations of one field model on one grid; set up once (eigenvalues), then one FFT per field. */
export class GaussianFieldGenerator {
  readonly report: EmbeddingReport;
  private readonly mx: number;
  private readonly my: number;
  /** √(λ/M) per embedding cell. */
  private readonly scale: Float64Array;
  private readonly fftX: FFT;
  private readonly fftY: FFT;
  private readonly data: Float64Array;
  private readonly rowIn: Float64Array;
  private readonly rowOut: Float64Array;
  private readonly colIn: Float64Array;
  private readonly colOut: Float64Array;

  constructor(readonly spec: FieldSpec) {
    const { nx, ny } = spec;
    let mx = nextPowerOfTwo(2 * (nx - 1));
    let my = nextPowerOfTwo(2 * (ny - 1));
    for (;;) {
      this.mx = mx;
      this.my = my;
      this.fftX = new FFT(mx);
      this.fftY = new FFT(my);
      this.data = new Float64Array(2 * mx * my);
      this.rowIn = new Float64Array(2 * mx);
      this.rowOut = new Float64Array(2 * mx);
      this.colIn = new Float64Array(2 * my);
      this.colOut = new Float64Array(2 * my);
      if (spec.sd === 0) {
        this.scale = new Float64Array(mx * my);
        this.report = { mx, my, minEigenvalue: 0, maxEigenvalue: 0, clipped: 0 };
        return;
      }
      const lambda = this.eigenvalues();
      let min = Infinity;
      let max = -Infinity;
      for (const v of lambda) {
        if (v < min) min = v;
        if (v > max) max = v;
      }
      if (min >= -1e-10 * max) {
        let clipped = 0;
        const m = mx * my;
        const scale = new Float64Array(m);
        for (let k = 0; k < m; k++) {
          const v = lambda[k]!;
          if (v < 0) clipped++;
          scale[k] = v > 0 ? Math.sqrt(v / m) : 0;
        }
        this.scale = scale;
        this.report = { mx, my, minEigenvalue: min, maxEigenvalue: max, clipped };
        return;
      }
      // Grow the embedding along the direction whose correlation reaches furthest relative to its extent.
      const growX = spec.lx / (mx * spec.dx) >= spec.ly / (my * spec.dy);
      if (growX) mx *= 2;
      else my *= 2;
      if (mx * my > MAX_EMBEDDING_CELLS) {
        throw inputError(
          `ensemble.logConductivity: circulant embedding of the ${spec.model} covariance found no non-negative embedding up to ${MAX_EMBEDDING_CELLS} cells (smallest eigenvalue ${min.toExponential(3)} of ${max.toExponential(3)})`,
          {
            key: 'ensemble.logConductivity',
            hint: 'shorter correlation lengths (relative to the grid) or the exponential model embed in fewer cells',
          },
        );
      }
    }
  }

  /** The eigenvalues of the circulant embedding: the 2-D DFT of its first row (real: the row is even). */
  private eigenvalues(): Float64Array {
    const { mx, my, spec } = this;
    const d = this.data;
    for (let l = 0; l < my; l++) {
      const hy = Math.min(l, my - l) * spec.dy;
      for (let k = 0; k < mx; k++) {
        const hx = Math.min(k, mx - k) * spec.dx;
        const i = 2 * (l * mx + k);
        d[i] = covariance(spec, hx, hy);
        d[i + 1] = 0;
      }
    }
    this.fft2();
    const lambda = new Float64Array(mx * my);
    for (let k = 0; k < lambda.length; k++) lambda[k] = d[2 * k]!;
    return lambda;
  }

  /** In-place 2-D DFT of `data` (interleaved complex, row-major mx × my): rows, then columns. */
  private fft2(): void {
    const { mx, my, data: d, rowIn, rowOut, colIn, colOut } = this;
    for (let l = 0; l < my; l++) {
      const base = 2 * l * mx;
      for (let k = 0; k < 2 * mx; k++) rowIn[k] = d[base + k]!;
      this.fftX.transform(rowOut, rowIn);
      for (let k = 0; k < 2 * mx; k++) d[base + k] = rowOut[k]!;
    }
    for (let k = 0; k < mx; k++) {
      for (let l = 0; l < my; l++) {
        colIn[2 * l] = d[2 * (l * mx + k)]!;
        colIn[2 * l + 1] = d[2 * (l * mx + k) + 1]!;
      }
      this.fftY.transform(colOut, colIn);
      for (let l = 0; l < my; l++) {
        d[2 * (l * mx + k)] = colOut[2 * l]!;
        d[2 * (l * mx + k) + 1] = colOut[2 * l + 1]!;
      }
    }
  }

  /** Realisation `index` of master seed `seed`: ln K deviations (mean 0) on the grid, row-major, into `out`. */
  generate(seed: number, index: number, out: Float64Array = new Float64Array(this.spec.nx * this.spec.ny)): Float64Array {
    const { mx, my, scale, data: d, spec } = this;
    if (spec.sd === 0) return out.fill(0);
    const uniform = realisationRandom(seed, index);
    // Box-Muller: two independent standard normals per pair of uniforms (1 - u keeps the logarithm finite).
    for (let k = 0; k < mx * my; k++) {
      const radius = Math.sqrt(-2 * Math.log(1 - uniform()));
      const angle = 2 * Math.PI * uniform();
      d[2 * k] = scale[k]! * radius * Math.cos(angle);
      d[2 * k + 1] = scale[k]! * radius * Math.sin(angle);
    }
    this.fft2();
    for (let row = 0; row < spec.ny; row++) {
      for (let col = 0; col < spec.nx; col++) out[row * spec.nx + col] = d[2 * (row * mx + col)]!;
    }
    return out;
  }
}
