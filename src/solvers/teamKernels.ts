/**
 * The work a thread team (./team.ts) shares: kernels that every thread of the team runs on its own block of rows,
 * the barrier they meet at, and the layout of the shared control block. Imported by thread 0 (the thread that runs
 * the solver) and by every helper thread (./teamWorker.ts), so both sides run the same code on the same arrays.
 *
 * Blocks: thread t owns the rows [start, end) of `rowBlock(ny, size, t)`, with even boundaries so that a 2x2
 * aggregate of the multigrid never straddles two blocks (each coarse row is written by one thread only).
 * Gauss–Seidel runs within a block; across a block boundary it reads values fixed before the sweep (hybrid block
 * Gauss–Seidel), so the result depends only on the team size, never on timing. Partial sums are combined by
 * thread 0 in thread order (deterministic).
 */

/** Typed arrays a kernel may name: every one lives in shared memory. */
export type TeamArray = Float64Array | Float32Array | Uint8Array;

/** Int32 slots of the control block. */
export const CONTROL = {
  /** Threads arrived at the current barrier. */
  count: 0,
  /** Barrier generation: bumped when the last thread arrives. */
  generation: 1,
  /** Kernel to run (an OP value). */
  op: 2,
  /** Set to 1 by a helper whose kernel threw. */
  failed: 3,
  /** Helpers that have started (start-up handshake). */
  started: 4,
  /** How long a thread waiting at a barrier spins before it sleeps, in microseconds (see SPIN_MICROS). */
  spinMicros: 5,
  /** First integer argument of the kernel. */
  args: 8,
  /** Slots in all. */
  length: 32,
} as const;

/** Float64 slots of the scalar block. */
export const SCALARS = {
  /** First floating-point argument of the kernel. */
  args: 0,
  /** Partial sums: thread t's k-th at partials + t * PARTIALS_PER_THREAD + k. */
  partials: 8,
} as const;
export const PARTIALS_PER_THREAD = 4;

/** Kernel codes. */
export const OP = {
  /** Receive new arrays from the port (appended to the table, or replacing it when the first int argument is 1). */
  table: 1,
  stop: 2,
  smoothRestrict: 3,
  prolongSmooth: 4,
  directionApply: 6,
  pcgStep: 7,
  dots: 8,
  combine: 10,
  residual: 11,
  fineLevel: 12,
  krylovFirst: 13,
  krylovSecond: 14,
} as const;

/**
 * How long a waiting thread spins at most before it sleeps in Atomics.wait, in microseconds (CONTROL.spinMicros, set by
 * thread 0 for the team). With no more threads than cores: long enough to cover the gaps in a solve where thread 0
 * works alone (a coarse level's cycle, the coarsest direct solve: up to a millisecond or two), since waking a sleeping
 * thread costs far more than spinning on a virtual machine whose idle core has halted (measured at 2048^2 with 2
 * threads: spinning about 75 µs, the helper slept through 600 ms of thread 0's serial work and the solve took
 * 2.7-2.9 s; spinning up to 2.7 ms, 2.2-2.3 s). With more threads than cores a spinning thread would keep a late one
 * from running at every barrier: then SPIN_MICROS_MIN.
 */
export const SPIN_MICROS = 2000;
/** The shortest spin (about the earlier fixed 4 000 loads). */
export const SPIN_MICROS_MIN = 75;
/** Loads between two looks at the clock while spinning (about 5 µs). */
const SPINS_PER_CHECK = 256;
/**
 * This thread's current spin, adapted between SPIN_MICROS_MIN and the team's most: halved when a spin ran out (the
 * others were later than it: a long serial stretch, or a thread that waits for a core on a busy machine, where
 * spinning on would only take a core from it), doubled when a wait ended in the second half of the spin.
 */
let spinBudget = SPIN_MICROS;

/** What a thread needs to run kernels: the team's shared blocks and its table of shared arrays. */
export interface TeamContext {
  readonly size: number;
  readonly control: Int32Array;
  readonly scalars: Float64Array;
  readonly arrays: TeamArray[];
}

/** Central barrier on the control block: returns when all `size` threads have called it. */
export function barrier(control: Int32Array, size: number): void {
  const generation = Atomics.load(control, CONTROL.generation);
  if (Atomics.add(control, CONTROL.count, 1) === size - 1) {
    Atomics.store(control, CONTROL.count, 0);
    Atomics.add(control, CONTROL.generation, 1);
    Atomics.notify(control, CONTROL.generation);
    return;
  }
  for (let i = 0; i < SPINS_PER_CHECK; i++) if (Atomics.load(control, CONTROL.generation) !== generation) return;
  const most = control[CONTROL.spinMicros]!;
  const budget = Math.min(spinBudget, most);
  const start = performance.now();
  const until = start + budget / 1000;
  let now = start;
  do {
    for (let i = 0; i < SPINS_PER_CHECK; i++) {
      if (Atomics.load(control, CONTROL.generation) !== generation) {
        if ((now - start) * 2000 > budget) spinBudget = Math.min(most, 2 * budget);
        return;
      }
    }
    now = performance.now();
  } while (now < until);
  spinBudget = Math.max(SPIN_MICROS_MIN, budget / 2);
  while (Atomics.load(control, CONTROL.generation) === generation) Atomics.wait(control, CONTROL.generation, generation);
}

/** Rows [start, end) of thread t's block on a grid of `ny` rows: whole row pairs, as even a share as can be. */
export function rowBlock(ny: number, size: number, t: number): [number, number] {
  const pairs = (ny + 1) >> 1;
  const start = Math.min(ny, 2 * Math.floor((t * pairs) / size));
  const end = Math.min(ny, 2 * Math.floor(((t + 1) * pairs) / size));
  return [start, end];
}

/** Runs kernel `op` as thread t. Every thread of the team calls it with the same op and arguments. */
export function runKernel(ctx: TeamContext, op: number, t: number): void {
  const a = ctx.control;
  const k = CONTROL.args;
  const arr = ctx.arrays;
  const f = ctx.scalars;
  const out = SCALARS.partials + t * PARTIALS_PER_THREAD;
  const nx = a[k]!;
  const ny = a[k + 1]!;
  const [start, end] = rowBlock(ny, ctx.size, t);
  switch (op) {
    case OP.smoothRestrict:
      smoothRestrict(
        ctx,
        t,
        nx,
        ny,
        start,
        end,
        arr[a[k + 2]!]!,
        arr[a[k + 3]!]!,
        arr[a[k + 4]!]!,
        arr[a[k + 5]!]!,
        f64(arr, a[k + 6]!),
        f64(arr, a[k + 7]!),
        f64(arr, a[k + 8]!),
      );
      return;
    case OP.prolongSmooth:
      prolongSmooth(
        ctx,
        t,
        nx,
        ny,
        start,
        end,
        arr[a[k + 2]!]!,
        arr[a[k + 3]!]!,
        arr[a[k + 4]!]!,
        arr[a[k + 5]!]!,
        f64(arr, a[k + 6]!),
        f64(arr, a[k + 7]!),
        f64(arr, a[k + 8]!),
        f64(arr, a[k + 9]!),
        f[SCALARS.args]!,
      );
      // optionally, on the finest level, the flexible CG's dots x·b and x·q over the block (z·r and z·q): one
      // fork–join and one pass less per iteration
      if (a[k + 10]! >= 0) {
        const x = f64(arr, a[k + 8]!);
        f[out] = dotRange(x, f64(arr, a[k + 7]!), start * nx, end * nx);
        f[out + 1] = dotRange(x, f64(arr, a[k + 10]!), start * nx, end * nx);
      }
      return;
    case OP.directionApply: {
      // p = z (copy) or p = z + beta p on the block; then, once every block is done, q = A p and p·q
      const z = f64(arr, a[k + 5]!);
      const p = f64(arr, a[k + 6]!);
      const q = f64(arr, a[k + 7]!);
      const lo = start * nx;
      const hi = end * nx;
      if (a[k + 8] === 1) for (let i = lo; i < hi; i++) p[i] = z[i]!;
      else {
        const beta = f[SCALARS.args]!;
        for (let i = lo; i < hi; i++) p[i] = z[i]! + beta * p[i]!;
      }
      barrier(ctx.control, ctx.size);
      f[out] = applyDotRows(nx, ny, start, end, arr[a[k + 2]!]!, arr[a[k + 3]!]!, arr[a[k + 4]!]!, p, q);
      return;
    }
    case OP.pcgStep: {
      // x += alpha p, r -= alpha q; r·r
      const x = f64(arr, a[k + 2]!);
      const p = f64(arr, a[k + 3]!);
      const r = f64(arr, a[k + 4]!);
      const q = f64(arr, a[k + 5]!);
      const alpha = f[SCALARS.args]!;
      let rr = 0;
      for (let i = start * nx, hi = end * nx; i < hi; i++) {
        x[i]! += alpha * p[i]!;
        const ri = r[i]! - alpha * q[i]!;
        r[i] = ri;
        rr += ri * ri;
      }
      f[out] = rr;
      return;
    }
    case OP.dots: {
      const lo = start * nx;
      const hi = end * nx;
      f[out] = dotRange(f64(arr, a[k + 2]!), f64(arr, a[k + 3]!), lo, hi);
      if (a[k + 4]! >= 0) f[out + 1] = dotRange(f64(arr, a[k + 4]!), f64(arr, a[k + 5]!), lo, hi);
      return;
    }
    case OP.combine: {
      // v1 = a1 v1 + a2 v2 (v2 id < 0: v1 = a1 v1)
      const v1 = f64(arr, a[k + 2]!);
      const a1 = f[SCALARS.args]!;
      const lo = start * nx;
      const hi = end * nx;
      if (a[k + 3]! < 0) for (let i = lo; i < hi; i++) v1[i] = a1 * v1[i]!;
      else {
        const v2 = f64(arr, a[k + 3]!);
        const a2 = f[SCALARS.args + 1]!;
        for (let i = lo; i < hi; i++) v1[i] = a1 * v1[i]! + a2 * v2[i]!;
      }
      return;
    }
    case OP.residual: {
      f[out] = residualRows(
        nx,
        ny,
        start,
        end,
        arr[a[k + 2]!]!,
        arr[a[k + 3]!]!,
        arr[a[k + 4]!]!,
        f64(arr, a[k + 5]!),
        f64(arr, a[k + 6]!),
        f64(arr, a[k + 7]!),
      );
      return;
    }
    case OP.krylovFirst: {
      // the K-cycle's first step (see krylovCorrection in ./multigrid.ts): w1 = A v1, v1·w1 and v1·rhs; then, from
      // the sums every thread adds up alike, r2 = rhs - (v1·rhs / v1·w1) w1 with r2·r2 and rhs·rhs (partials 2, 3)
      const [diag, east, south] = [arr[a[k + 2]!]!, arr[a[k + 3]!]!, arr[a[k + 4]!]!];
      const v1 = f64(arr, a[k + 5]!);
      const w1 = f64(arr, a[k + 6]!);
      const rhs = f64(arr, a[k + 7]!);
      const r2 = f64(arr, a[k + 8]!);
      const lo = start * nx;
      const hi = end * nx;
      f[out] = applyDotRows(nx, ny, start, end, diag, east, south, v1, w1);
      f[out + 1] = dotRange(v1, rhs, lo, hi);
      barrier(ctx.control, ctx.size);
      const rho1 = allSum(ctx, 0);
      const step1 = allSum(ctx, 1) / rho1;
      let rr2 = 0;
      let rr = 0;
      for (let i = lo; i < hi; i++) {
        const v = rhs[i]! - step1 * w1[i]!;
        r2[i] = v;
        rr2 += v * v;
        rr += rhs[i]! * rhs[i]!;
      }
      f[out + 2] = rr2;
      f[out + 3] = rr;
      return;
    }
    case OP.krylovSecond: {
      // the K-cycle's second step: w2 = A v2 with v2·w2, v2·w1, v2·r2; then, from the sums every thread adds up
      // alike, v1 = a1 v1 + a2 v2 (or step1 v1 when the second direction brings no curvature)
      const [diag, east, south] = [arr[a[k + 2]!]!, arr[a[k + 3]!]!, arr[a[k + 4]!]!];
      const v2 = f64(arr, a[k + 5]!);
      const w2 = f64(arr, a[k + 6]!);
      const w1 = f64(arr, a[k + 7]!);
      const r2 = f64(arr, a[k + 8]!);
      const v1 = f64(arr, a[k + 9]!);
      const rho1 = f[SCALARS.args]!;
      const step1 = f[SCALARS.args + 1]!;
      const lo = start * nx;
      const hi = end * nx;
      f[out] = applyDotRows(nx, ny, start, end, diag, east, south, v2, w2);
      f[out + 1] = dotRange(v2, w1, lo, hi);
      f[out + 2] = dotRange(v2, r2, lo, hi);
      barrier(ctx.control, ctx.size);
      const gamma = allSum(ctx, 1);
      const alpha2 = allSum(ctx, 2);
      const rho2 = allSum(ctx, 0) - (gamma * gamma) / rho1;
      if (!(rho2 > 0)) {
        for (let i = lo; i < hi; i++) v1[i] = step1 * v1[i]!;
        return;
      }
      const a1 = step1 - (gamma * alpha2) / (rho1 * rho2);
      const a2 = alpha2 / rho2;
      for (let i = lo; i < hi; i++) v1[i] = a1 * v1[i]! + a2 * v2[i]!;
      return;
    }
    case OP.fineLevel: {
      const build = a[k + 10]! >= 0;
      const none = new Float64Array(0);
      const rows: FineRows = {
        nx,
        ny,
        diag: f64(arr, a[k + 2]!),
        east: f64(arr, a[k + 3]!),
        south: f64(arr, a[k + 4]!),
        unknown: arr[a[k + 5]!] as Uint8Array,
        d32: arr[a[k + 6]!]!,
        e32: arr[a[k + 7]!]!,
        s32: arr[a[k + 8]!]!,
        inv: arr[a[k + 9]!]!,
        ce: build ? f64(arr, a[k + 10]!) : none,
        cs: build ? f64(arr, a[k + 11]!) : none,
        cExcess: build ? f64(arr, a[k + 12]!) : none,
        cu: build ? (arr[a[k + 13]!] as Uint8Array) : new Uint8Array(0),
      };
      fineLevelRows(rows, f[SCALARS.args]!, build, start, end);
      return;
    }
    default:
      throw new Error(`thread team: unknown kernel ${op}`);
  }
}

/** The arrays of the finest level's pass (see finestLevels in ./multigrid.ts): the operator in, the level 0 and the sums of level 1 out. */
export interface FineRows {
  nx: number;
  ny: number;
  diag: Float64Array;
  east: Float64Array;
  south: Float64Array;
  unknown: Uint8Array;
  d32: TeamArray;
  e32: TeamArray;
  s32: TeamArray;
  inv: TeamArray;
  ce: Float64Array;
  cs: Float64Array;
  cExcess: Float64Array;
  cu: Uint8Array;
}

/**
 * Rows [start, end) of the finest level's pass: the bands times `scale` and the inverse diagonal in the levels'
 * precision, and (with `build`) the first coarse level's couplings and excess summed per 2x2 aggregate.
 * `start` is even, so the aggregates of these rows get all their sums here.
 */
export function fineLevelRows(a: FineRows, scale: number, build: boolean, start: number, end: number): void {
  const { nx, diag, east, south, unknown, d32, e32, s32, inv, ce, cs, cExcess, cu } = a;
  const cx = (nx + 1) >> 1;
  for (let i = start; i < end; i++) {
    const row = i * nx;
    const crow = (i >> 1) * cx;
    for (let j = 0; j < nx; j++) {
      const p = row + j;
      // couplings are zero on identity rows, so only an unknown row's diagonal is scaled
      const d = unknown[p] ? diag[p]! * scale : diag[p]!;
      const e = east[p]! * scale;
      const s = south[p]! * scale;
      d32[p] = d;
      e32[p] = e;
      s32[p] = s;
      inv[p] = 1 / d;
      if (!build) continue;
      const c = crow + (j >> 1);
      if (unknown[p]) {
        let coupled = e + s;
        if (j > 0) coupled += east[p - 1]! * scale;
        if (i > 0) coupled += south[p - nx]! * scale;
        cExcess[c]! += Math.max(0, d - coupled);
        cu[c] = 1;
      }
      if (j & 1) ce[c]! += e;
      if (i & 1) cs[c]! += s;
    }
  }
}

/** Partial sum k of every thread added up in thread order: the same number in every thread (and in Team.sum). */
function allSum(ctx: TeamContext, k: number): number {
  let s = 0;
  for (let t = 0; t < ctx.size; t++) s += ctx.scalars[SCALARS.partials + t * PARTIALS_PER_THREAD + k]!;
  return s;
}

function f64(arrays: TeamArray[], id: number): Float64Array {
  return arrays[id] as Float64Array;
}

function dotRange(a: Float64Array, b: Float64Array, lo: number, hi: number): number {
  let s = 0;
  for (let i = lo; i < hi; i++) s += a[i]! * b[i]!;
  return s;
}

/** out = A x on rows [start, end); returns x·out over them. The first and last grid rows are guarded. */
function applyDotRows(
  nx: number,
  ny: number,
  start: number,
  end: number,
  diag: TeamArray,
  east: TeamArray,
  south: TeamArray,
  x: Float64Array,
  out: Float64Array,
): number {
  const n = nx * ny;
  let s = 0;
  const lo = start * nx;
  const hi = end * nx;
  const interiorLo = Math.max(lo, nx);
  const interiorHi = Math.min(hi, n - nx);
  for (let p = lo; p < Math.min(hi, interiorLo); p++) {
    const v = diag[p]! * x[p]! - neighbours(nx, n, east, south, x, p);
    out[p] = v;
    s += v * x[p]!;
  }
  for (let p = interiorLo; p < interiorHi; p++) {
    const v = diag[p]! * x[p]! - east[p - 1]! * x[p - 1]! - east[p]! * x[p + 1]! - south[p - nx]! * x[p - nx]! - south[p]! * x[p + nx]!;
    out[p] = v;
    s += v * x[p]!;
  }
  for (let p = Math.max(interiorHi, interiorLo, lo); p < hi; p++) {
    const v = diag[p]! * x[p]! - neighbours(nx, n, east, south, x, p);
    out[p] = v;
    s += v * x[p]!;
  }
  return s;
}

/** r = b - A x on rows [start, end); returns r·r over them. */
function residualRows(
  nx: number,
  ny: number,
  start: number,
  end: number,
  diag: TeamArray,
  east: TeamArray,
  south: TeamArray,
  b: Float64Array,
  x: Float64Array,
  r: Float64Array,
): number {
  const n = nx * ny;
  let s = 0;
  const lo = start * nx;
  const hi = end * nx;
  const interiorLo = Math.max(lo, nx);
  const interiorHi = Math.min(hi, n - nx);
  for (let p = lo; p < Math.min(hi, interiorLo); p++) {
    const v = b[p]! - diag[p]! * x[p]! + neighbours(nx, n, east, south, x, p);
    r[p] = v;
    s += v * v;
  }
  for (let p = interiorLo; p < interiorHi; p++) {
    const v =
      b[p]! - diag[p]! * x[p]! + east[p - 1]! * x[p - 1]! + east[p]! * x[p + 1]! + south[p - nx]! * x[p - nx]! + south[p]! * x[p + nx]!;
    r[p] = v;
    s += v * v;
  }
  for (let p = Math.max(interiorHi, interiorLo, lo); p < hi; p++) {
    const v = b[p]! - diag[p]! * x[p]! + neighbours(nx, n, east, south, x, p);
    r[p] = v;
    s += v * v;
  }
  return s;
}

/** Sum of the couplings times x at p, guarded at the grid's edges. */
function neighbours(nx: number, n: number, east: TeamArray, south: TeamArray, x: Float64Array, p: number): number {
  let v = 0;
  if (p > 0) v += east[p - 1]! * x[p - 1]!;
  if (p + 1 < n) v += east[p]! * x[p + 1]!;
  if (p >= nx) v += south[p - nx]! * x[p - nx]!;
  if (p + nx < n) v += south[p]! * x[p + nx]!;
  return v;
}

/**
 * The multigrid's pre-smoothing fused with the restriction (see smoothAndRestrict in ./multigrid.ts), on one
 * block: forward Gauss–Seidel from a zero start, (D + L_block) x = b, where the block's first row sees its north
 * neighbour at its value before the sweep, zero. The residual b - A x of a finished row (-U x within the block)
 * goes into the coarse right-hand side one row behind; after a barrier (every block final) the block's last row
 * adds its couplings to the next block and the first row its coupling to the previous one.
 */
function smoothRestrict(
  ctx: TeamContext,
  _t: number,
  nx: number,
  ny: number,
  start: number,
  end: number,
  _diag: TeamArray,
  east: TeamArray,
  south: TeamArray,
  invDiag: TeamArray,
  b: Float64Array,
  x: Float64Array,
  coarseRhs: Float64Array,
): void {
  const inv = invDiag;
  const cx = (nx + 1) >> 1;
  if (start < end) {
    coarseRhs.fill(0, (start >> 1) * cx, ((end + 1) >> 1) * cx);
    const first = start * nx;
    x[first] = b[first]! * inv[first]!;
    for (let p = first + 1; p < first + nx; p++) x[p] = (b[p]! + east[p - 1]! * x[p - 1]!) * inv[p]!;
    for (let i = start + 1; i < end; i++) {
      const row = i * nx;
      const rowEnd = row + nx;
      for (let p = row; p < rowEnd; p++) {
        x[p] = (b[p]! + east[p - 1]! * x[p - 1]! + south[p - nx]! * x[p - nx]!) * inv[p]!;
      }
      const prev = row - nx;
      const crow = ((i - 1) >> 1) * cx;
      for (let j = 0; j < nx; j++) {
        const p = prev + j;
        coarseRhs[crow + (j >> 1)]! += east[p]! * x[p + 1]! + south[p]! * x[p + nx]!;
      }
    }
  }
  barrier(ctx.control, ctx.size);
  if (start >= end) return;
  // the block's last row: east neighbours, and south neighbours in the next block (final now)
  const last = (end - 1) * nx;
  const crow = ((end - 1) >> 1) * cx;
  if (end < ny) {
    for (let j = 0; j < nx; j++) {
      const p = last + j;
      coarseRhs[crow + (j >> 1)]! += east[p]! * x[p + 1]! + south[p]! * x[p + nx]!;
    }
  } else {
    for (let j = 0; j < nx - 1; j++) {
      const p = last + j;
      coarseRhs[crow + (j >> 1)]! += east[p]! * x[p + 1]!;
    }
  }
  // the block's first row was swept with its north neighbour at zero: that coupling is part of its residual
  if (start > 0) {
    const first = start * nx;
    const c0 = (start >> 1) * cx;
    for (let j = 0; j < nx; j++) {
      const p = first + j;
      coarseRhs[c0 + (j >> 1)]! += south[p - nx]! * x[p - nx]!;
    }
  }
}

/**
 * The multigrid's prolongation fused with post-smoothing (see prolongAndSmooth in ./multigrid.ts), on one block:
 * x += P e row by row just ahead of a backward Gauss–Seidel sweep (D + U_block) over the block. The rows next to
 * the block (owned by the neighbours) are read at their values before the sweep: each thread copies them, prolonged,
 * into its halo rows before a barrier, and only then does any thread change x. With `scale` != 1 the block is
 * multiplied by it after the sweep (the finest level's scaling, see AggregationMultigrid.apply).
 */
function prolongSmooth(
  ctx: TeamContext,
  t: number,
  nx: number,
  ny: number,
  start: number,
  end: number,
  _diag: TeamArray,
  east: TeamArray,
  south: TeamArray,
  invDiag: TeamArray,
  e: Float64Array,
  b: Float64Array,
  x: Float64Array,
  halo: Float64Array,
  scale: number,
): void {
  const inv = invDiag;
  const cx = (nx + 1) >> 1;
  const northHalo = 2 * t * nx;
  const southHalo = (2 * t + 1) * nx;
  if (start < end) {
    if (start > 0) prolongedRow(nx, cx, start - 1, e, x, halo, northHalo);
    if (end < ny) prolongedRow(nx, cx, end, e, x, halo, southHalo);
  }
  barrier(ctx.control, ctx.size);
  if (start >= end) return;
  prolongRow(nx, cx, end - 1, e, x);
  for (let i = end - 1; i >= start; i--) {
    if (i > start) prolongRow(nx, cx, i - 1, e, x);
    const row = i * nx;
    if (i > start && i < end - 1) {
      for (let p = row + nx - 1; p >= row; p--) {
        x[p] = (b[p]! + east[p - 1]! * x[p - 1]! + east[p]! * x[p + 1]! + south[p - nx]! * x[p - nx]! + south[p]! * x[p + nx]!) * inv[p]!;
      }
      continue;
    }
    // a row at the block's edge: its outside neighbour row from the halo (or none at the grid's edge)
    const north = i > start ? x : start > 0 ? halo : null;
    const northAt = i > start ? row - nx : northHalo;
    const southRow = i < end - 1 ? x : end < ny ? halo : null;
    const southAt = i < end - 1 ? row + nx : southHalo;
    for (let j = nx - 1; j >= 0; j--) {
      const p = row + j;
      let s = b[p]!;
      if (j > 0) s += east[p - 1]! * x[p - 1]!;
      if (j < nx - 1) s += east[p]! * x[p + 1]!;
      if (north) s += south[p - nx]! * north[northAt + j]!;
      if (southRow) s += south[p]! * southRow[southAt + j]!;
      x[p] = s * inv[p]!;
    }
  }
  if (scale !== 1) for (let p = start * nx, hi = end * nx; p < hi; p++) x[p]! *= scale;
}

/** x += P e on row i: every cell gets its aggregate's correction. */
function prolongRow(nx: number, cx: number, i: number, e: Float64Array, x: Float64Array): void {
  const row = i * nx;
  const crow = (i >> 1) * cx;
  for (let j = 0; j < nx; j++) x[row + j]! += e[crow + (j >> 1)]!;
}

/** halo[at..] = row i of x + P e, x unchanged. */
function prolongedRow(nx: number, cx: number, i: number, e: Float64Array, x: Float64Array, halo: Float64Array, at: number): void {
  const row = i * nx;
  const crow = (i >> 1) * cx;
  for (let j = 0; j < nx; j++) halo[at + j] = x[row + j]! + e[crow + (j >> 1)]!;
}

/**
 * Runs every kernel on a small grid (64 x 64) in the calling thread alone, a few dozen times, so that the engine has
 * compiled them — with the array types of a real solve: double-precision operator bands, single-precision levels —
 * before the first pass over a multi-million-cell level (which would otherwise run largely unoptimised). Each thread of
 * a team does this once as it starts, all at the same time and without a barrier.
 */
export function warmUpAlone(): void {
  const nx = 64;
  const ny = 64;
  const n = nx * ny;
  const cn = (nx / 2) * (ny / 2);
  const diag = new Float64Array(n);
  const east = new Float64Array(n);
  const south = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    east[p] = p % nx === nx - 1 ? 0 : 1 + (p % 3);
    south[p] = p >= n - nx ? 0 : 1 + (p % 5);
    diag[p] = 2 * (east[p]! + south[p]!) + 1;
  }
  const unknown = new Uint8Array(n).fill(1);
  const d32 = Float32Array.from(diag);
  const e32 = Float32Array.from(east);
  const s32 = Float32Array.from(south);
  const inv32 = Float32Array.from(diag, (d) => 1 / d);
  const v = () => new Float64Array(n);
  const [b, x, y, z, w, u] = [v(), v(), v(), v(), v(), v()];
  const coarse = new Float64Array(cn);
  const halo = new Float64Array(2 * nx);
  const [ce, cs, cExcess] = [new Float64Array(cn), new Float64Array(cn), new Float64Array(cn)];
  const cu = new Uint8Array(cn);
  const arrays: TeamArray[] = [diag, east, south, unknown, d32, e32, s32, inv32, b, x, y, z, w, u, coarse, halo, ce, cs, cExcess, cu];
  const id = (a: TeamArray) => arrays.indexOf(a);
  const [D, E, S, U, D32, E32, S32, I32] = [id(diag), id(east), id(south), id(unknown), id(d32), id(e32), id(s32), id(inv32)];
  const [B, X, Y, Z, W, V] = [id(b), id(x), id(y), id(z), id(w), id(u)];
  const [C, H, CE, CS, CX, CU] = [id(coarse), id(halo), id(ce), id(cs), id(cExcess), id(cu)];
  const ctx: TeamContext = {
    size: 1,
    control: new Int32Array(CONTROL.length),
    scalars: new Float64Array(SCALARS.partials + PARTIALS_PER_THREAD),
    arrays,
  };
  const run = (op: number, ints: number[], floats: number[] = []) => {
    ctx.control.set(ints, CONTROL.args);
    ctx.scalars.set(floats, SCALARS.args);
    runKernel(ctx, op, 0);
  };
  for (let round = 0; round < 40; round++) {
    b.fill(1);
    x.fill(0);
    run(OP.fineLevel, [nx, ny, D, E, S, U, D32, E32, S32, I32, CE, CS, CX, CU], [1]);
    run(OP.smoothRestrict, [nx, ny, D32, E32, S32, I32, B, X, C]);
    run(OP.prolongSmooth, [nx, ny, D32, E32, S32, I32, C, B, X, H, round & 1 ? Y : -1], [round & 1 ? 0.5 : 1]);
    run(OP.krylovFirst, [nx, ny, D32, E32, S32, X, W, B, Z]);
    run(OP.krylovSecond, [nx, ny, D32, E32, S32, Z, V, W, Z, X], [1, 0.5]);
    run(OP.combine, [nx, ny, X, round & 1 ? Z : -1], [0.5, 0.5]);
    run(OP.directionApply, [nx, ny, D, E, S, Z, X, Y, round & 1], [0.5]);
    run(OP.pcgStep, [nx, ny, V, X, B, Y], [1e-3]);
    run(OP.dots, [nx, ny, B, Z, round & 1 ? B : -1, Y]);
    run(OP.residual, [nx, ny, D, E, S, B, X, W]);
  }
}
