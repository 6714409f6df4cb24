/**
 * Conditional simulation by kriging the residuals (Journel & Huijbregts 1978, Mining Geostatistics, ch. VII;
 * Deutsch & Journel 1998, GSLIB, 2nd ed., section V.2.4): an unconditional field Yu is corrected by the simple
 * kriging estimate of its misfit at the data,
 *   Yc(x) = Yu(x) + Σ_j w_j C(x, x_j),   w = C_dd⁻¹ (y − Yu(x_d)),
 * where C_dd is the covariance between the data cells and y the measured ln K deviations (mean 0, so simple
 * kriging). At a data cell the correction gives y exactly (up to rounding); the measured value itself is then
 * written there, so realisations honour it exactly. The conditional variance is the simple kriging variance,
 * smallest near the data.
 */
import { inputError } from '../errors.js';
import { covariance, type FieldSpec } from './field.js';

export interface ConditioningDatum {
  id: string;
  row: number;
  col: number;
  /** The measured ln K deviation from the raster's: ln(k_measured / K_raster) at the cell. */
  y: number;
}

/** Precomputed covariance columns up to this many numbers; beyond, computed per realisation. */
const MAX_STORED = 1 << 24;

export class Conditioner {
  private readonly n: number;
  /** Cholesky factor of C_dd (lower, row-major n × n). */
  private readonly factor: Float64Array;
  /** C(x, x_j) for every cell x, column j at j·cells, when it fits. */
  private readonly columns: Float64Array | null;
  private readonly work: Float64Array;

  constructor(
    private readonly spec: FieldSpec,
    private readonly data: readonly ConditioningDatum[],
  ) {
    const n = data.length;
    this.n = n;
    const seen = new Map<number, string>();
    for (const d of data) {
      const cell = d.row * spec.nx + d.col;
      const other = seen.get(cell);
      if (other !== undefined) {
        throw inputError(
          `ensemble.conditioning: measurements "${other}" and "${d.id}" fall in the same cell (row ${d.row}, col ${d.col})`,
          {
            key: 'ensemble.conditioning',
            hint: 'give one value per cell (e.g. the geometric mean of the measurements there)',
          },
        );
      }
      seen.set(cell, d.id);
    }
    const c = new Float64Array(n * n);
    for (let i = 0; i < n; i++) {
      for (let j = 0; j < n; j++) c[i * n + j] = this.cov(data[i]!.row, data[i]!.col, data[j]!.row, data[j]!.col);
    }
    // Cholesky–Banachiewicz; a pivot that is not clearly positive means C_dd is (numerically) singular.
    const L = new Float64Array(n * n);
    for (let i = 0; i < n; i++) {
      for (let j = 0; j <= i; j++) {
        let s = c[i * n + j]!;
        for (let k = 0; k < j; k++) s -= L[i * n + k]! * L[j * n + k]!;
        if (i === j) {
          if (!(s > 1e-10 * c[i * n + i]!)) {
            throw inputError(
              `ensemble.conditioning: measurement "${data[i]!.id}" is (numerically) determined by the others: the kriging system is singular`,
              {
                key: 'ensemble.conditioning',
                hint: 'measurements much closer together than the correlation length carry the same information (the gaussian model especially): merge or drop them',
              },
            );
          }
          L[i * n + i] = Math.sqrt(s);
        } else {
          L[i * n + j] = s / L[j * n + j]!;
        }
      }
    }
    this.factor = L;
    this.work = new Float64Array(n);
    const cells = spec.nx * spec.ny;
    if (n * cells <= MAX_STORED) {
      const columns = new Float64Array(n * cells);
      for (let j = 0; j < n; j++) {
        for (let row = 0; row < spec.ny; row++) {
          for (let col = 0; col < spec.nx; col++) columns[j * cells + row * spec.nx + col] = this.cov(row, col, data[j]!.row, data[j]!.col);
        }
      }
      this.columns = columns;
    } else {
      this.columns = null;
    }
  }

  private cov(r1: number, c1: number, r2: number, c2: number): number {
    return covariance(this.spec, (c1 - c2) * this.spec.dx, (r1 - r2) * this.spec.dy);
  }

  /** Condition an unconditional field in place; the data cells get the measured values. */
  apply(field: Float64Array): void {
    const { n, factor: L, work: w, data, spec } = this;
    if (n === 0) return;
    const cells = spec.nx * spec.ny;
    for (let i = 0; i < n; i++) w[i] = data[i]!.y - field[data[i]!.row * spec.nx + data[i]!.col]!;
    // w := C_dd⁻¹ w by the two triangular solves.
    for (let i = 0; i < n; i++) {
      let s = w[i]!;
      for (let k = 0; k < i; k++) s -= L[i * n + k]! * w[k]!;
      w[i] = s / L[i * n + i]!;
    }
    for (let i = n - 1; i >= 0; i--) {
      let s = w[i]!;
      for (let k = i + 1; k < n; k++) s -= L[k * n + i]! * w[k]!;
      w[i] = s / L[i * n + i]!;
    }
    const columns = this.columns;
    for (let j = 0; j < n; j++) {
      const wj = w[j]!;
      if (columns) {
        const base = j * cells;
        for (let p = 0; p < cells; p++) field[p] = field[p]! + wj * columns[base + p]!;
      } else {
        const dj = data[j]!;
        for (let row = 0; row < spec.ny; row++) {
          for (let col = 0; col < spec.nx; col++)
            field[row * spec.nx + col] = field[row * spec.nx + col]! + wj * this.cov(row, col, dj.row, dj.col);
        }
      }
    }
    for (const d of data) field[d.row * spec.nx + d.col] = d.y;
  }
}
