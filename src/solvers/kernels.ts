/**
 * Vector and five-point stencil kernels on Float64Array, shared by every solver.
 *
 * The stencil kernels rely on the band layout of StencilOperator: `east[p]` is zero on the last column,
 * so in the interior rows the whole range [nx, n - nx) can run as one loop with no branches — the west
 * neighbour of a first-column cell and the east neighbour of a last-column cell are read with a zero
 * coupling. Only the first and the last row need guards (their north/south neighbours do not exist).
 */

/** Band arrays of a five-point operator; read-only views into an operator. */
export interface Bands {
  readonly nx: number;
  readonly ny: number;
  readonly diag: ArrayLike<number>;
  readonly east: ArrayLike<number>;
  readonly south: ArrayLike<number>;
}

export function dot(a: Float64Array, b: Float64Array): number {
  const n = a.length;
  let s0 = 0;
  let s1 = 0;
  let i = 0;
  for (; i + 1 < n; i += 2) {
    s0 += a[i]! * b[i]!;
    s1 += a[i + 1]! * b[i + 1]!;
  }
  if (i < n) s0 += a[i]! * b[i]!;
  return s0 + s1;
}

/** Value of (A x)_p at cell p with full guards; used on the first and last row only. */
function stencilAtEdge(nx: number, n: number, a: Bands, x: Float64Array, p: number): number {
  const { diag, east, south } = a;
  let v = diag[p]! * x[p]!;
  if (p > 0) v -= east[p - 1]! * x[p - 1]!;
  if (p + 1 < n) v -= east[p]! * x[p + 1]!;
  if (p >= nx) v -= south[p - nx]! * x[p - nx]!;
  if (p + nx < n) v -= south[p]! * x[p + nx]!;
  return v;
}

/** out = A x; returns x·out (the CG curvature p·Ap comes for free). */
export function applyDot(a: Bands, x: Float64Array, out: Float64Array): number {
  const { nx, ny, diag, east, south } = a;
  const n = nx * ny;
  let s = 0;
  const firstEnd = Math.min(nx, n);
  for (let p = 0; p < firstEnd; p++) {
    const v = stencilAtEdge(nx, n, a, x, p);
    out[p] = v;
    s += v * x[p]!;
  }
  const interiorEnd = n - nx;
  for (let p = nx; p < interiorEnd; p++) {
    const v = diag[p]! * x[p]! - east[p - 1]! * x[p - 1]! - east[p]! * x[p + 1]! - south[p - nx]! * x[p - nx]! - south[p]! * x[p + nx]!;
    out[p] = v;
    s += v * x[p]!;
  }
  for (let p = Math.max(interiorEnd, nx); p < n; p++) {
    const v = stencilAtEdge(nx, n, a, x, p);
    out[p] = v;
    s += v * x[p]!;
  }
  return s;
}

/** r = b - A x; returns ||r||_2. */
export function residual(a: Bands, b: Float64Array, x: Float64Array, r: Float64Array): number {
  const { nx, ny, diag, east, south } = a;
  const n = nx * ny;
  let s = 0;
  const firstEnd = Math.min(nx, n);
  for (let p = 0; p < firstEnd; p++) {
    const v = b[p]! - stencilAtEdge(nx, n, a, x, p);
    r[p] = v;
    s += v * v;
  }
  const interiorEnd = n - nx;
  for (let p = nx; p < interiorEnd; p++) {
    const v =
      b[p]! - diag[p]! * x[p]! + east[p - 1]! * x[p - 1]! + east[p]! * x[p + 1]! + south[p - nx]! * x[p - nx]! + south[p]! * x[p + nx]!;
    r[p] = v;
    s += v * v;
  }
  for (let p = Math.max(interiorEnd, nx); p < n; p++) {
    const v = b[p]! - stencilAtEdge(nx, n, a, x, p);
    r[p] = v;
    s += v * v;
  }
  return Math.sqrt(s);
}

/** Sum of the off-diagonal neighbour terms (east, west, north, south couplings times x) at p, guarded. */
function neighbourSumAtEdge(nx: number, n: number, a: Bands, x: Float64Array, p: number): number {
  const { east, south } = a;
  let v = 0;
  if (p > 0) v += east[p - 1]! * x[p - 1]!;
  if (p + 1 < n) v += east[p]! * x[p + 1]!;
  if (p >= nx) v += south[p - nx]! * x[p - nx]!;
  if (p + nx < n) v += south[p]! * x[p + nx]!;
  return v;
}

/**
 * One Gauss–Seidel sweep in place on A x = b, lexicographic order (forward) or reversed (backward),
 * x_p <- x_p + omega * ((b_p + sum_q c_pq x_q) / d_p - x_p). `invDiag` holds 1/d_p.
 */
export function gaussSeidelSweep(
  a: Bands,
  invDiag: ArrayLike<number>,
  b: Float64Array,
  x: Float64Array,
  backward: boolean,
  omega = 1,
): void {
  const { nx, ny, east, south } = a;
  const n = nx * ny;
  const interiorEnd = n - nx;
  const keep = 1 - omega;
  if (!backward) {
    for (let p = 0; p < Math.min(nx, n); p++) {
      x[p] = keep * x[p]! + omega * (b[p]! + neighbourSumAtEdge(nx, n, a, x, p)) * invDiag[p]!;
    }
    for (let p = nx; p < interiorEnd; p++) {
      const gs =
        (b[p]! + east[p - 1]! * x[p - 1]! + east[p]! * x[p + 1]! + south[p - nx]! * x[p - nx]! + south[p]! * x[p + nx]!) * invDiag[p]!;
      x[p] = keep * x[p]! + omega * gs;
    }
    for (let p = Math.max(interiorEnd, nx); p < n; p++) {
      x[p] = keep * x[p]! + omega * (b[p]! + neighbourSumAtEdge(nx, n, a, x, p)) * invDiag[p]!;
    }
  } else {
    for (let p = n - 1; p >= Math.max(interiorEnd, nx); p--) {
      x[p] = keep * x[p]! + omega * (b[p]! + neighbourSumAtEdge(nx, n, a, x, p)) * invDiag[p]!;
    }
    for (let p = interiorEnd - 1; p >= nx; p--) {
      const gs =
        (b[p]! + east[p - 1]! * x[p - 1]! + east[p]! * x[p + 1]! + south[p - nx]! * x[p - nx]! + south[p]! * x[p + nx]!) * invDiag[p]!;
      x[p] = keep * x[p]! + omega * gs;
    }
    for (let p = Math.min(nx, n) - 1; p >= 0; p--) {
      x[p] = keep * x[p]! + omega * (b[p]! + neighbourSumAtEdge(nx, n, a, x, p)) * invDiag[p]!;
    }
  }
}

/**
 * One red–black SOR half-sweep in place: updates the cells with (row + col) % 2 === colour.
 * For the five-point stencil the two colours decouple, so the order within a colour does not matter.
 */
export function redBlackSweep(a: Bands, invDiag: ArrayLike<number>, b: Float64Array, x: Float64Array, colour: 0 | 1, omega: number): void {
  const { nx, ny, east, south } = a;
  const n = nx * ny;
  const keep = 1 - omega;
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    const start = row + ((i + colour) & 1);
    const end = row + nx;
    if (i === 0 || i === ny - 1) {
      for (let p = start; p < end; p += 2) {
        x[p] = keep * x[p]! + omega * (b[p]! + neighbourSumAtEdge(nx, n, a, x, p)) * invDiag[p]!;
      }
    } else {
      for (let p = start; p < end; p += 2) {
        const gs =
          (b[p]! + east[p - 1]! * x[p - 1]! + east[p]! * x[p + 1]! + south[p - nx]! * x[p - nx]! + south[p]! * x[p + nx]!) * invDiag[p]!;
        x[p] = keep * x[p]! + omega * gs;
      }
    }
  }
}

/**
 * Applies z = M^{-1} r for M = (P + L) P^{-1} (P + U), where L/U are the strictly lower/upper parts of the
 * five-point operator and P a diagonal: P = D/omega gives symmetric SOR, P = the IC(0) pivots gives
 * incomplete Cholesky (Meijerink & van der Vorst 1977). `invPivot` holds 1/P. z may not alias r.
 */
export function triangularPairSolve(a: Bands, invPivot: ArrayLike<number>, r: Float64Array, z: Float64Array): void {
  const { nx, ny, east, south } = a;
  const n = nx * ny;
  // forward: (P + L) y = r, y stored in z
  const firstEnd = Math.min(nx, n);
  z[0] = r[0]! * invPivot[0]!;
  for (let p = 1; p < firstEnd; p++) z[p] = (r[p]! + east[p - 1]! * z[p - 1]!) * invPivot[p]!;
  for (let p = nx; p < n; p++) {
    z[p] = (r[p]! + east[p - 1]! * z[p - 1]! + south[p - nx]! * z[p - nx]!) * invPivot[p]!;
  }
  // backward: (P + U) z = P y
  const lastStart = Math.max(n - nx, 0);
  for (let p = n - 2; p >= lastStart; p--) z[p] = z[p]! + east[p]! * z[p + 1]! * invPivot[p]!;
  for (let p = lastStart - 1; p >= 0; p--) {
    z[p] = z[p]! + (east[p]! * z[p + 1]! + south[p]! * z[p + nx]!) * invPivot[p]!;
  }
}
