/**
 * The reference solver of the benchmark: BoomerAMG-preconditioned CG from hypre (C, one thread), built outside the
 * project (`../shared/bench-reference/`: `make` builds `hypre_pcg`). The benchmark finds it through the environment
 * variable PIEZOMAP_REFERENCE_DIR (the folder holding the built `hypre_pcg`) and says so when it is absent.
 *
 * The system handed to it is the one piezomap assembles for the case (same cells, same conductances), written in the
 * reference's documented input format (GWCSR01: magic, int64 n, nnz, ny, nx, int64 indptr[n+1], int32
 * indices[nnz], float64 data[nnz], float64 rhs[n], int64 cell[n]; unknowns only, in heads h rather than
 * h - datum), so both solve the same equations. No code of the reference is used here: only its file format and
 * its command line.
 */
import { spawnSync } from 'node:child_process';
import { accessSync, constants, openSync, closeSync, writeSync, readFileSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import type { FlowSystem } from '../src/discretisation/assemble.js';

export const REFERENCE_ENV = 'PIEZOMAP_REFERENCE_DIR';

/** The reference's `hypre_pcg` executable, or why there is none. */
export function referenceSolver(): { path: string } | { missing: string } {
  const dir = process.env[REFERENCE_ENV];
  if (!dir) return { missing: `${REFERENCE_ENV} is not set (the folder holding the built hypre_pcg, e.g. /tmp/bref)` };
  const path = join(dir, 'hypre_pcg');
  try {
    accessSync(path, constants.X_OK);
  } catch {
    return { missing: `${path} is not there or not executable (run make in ${dir})` };
  }
  return { path };
}

/** Writes the unknowns of `system` as a GWCSR01 file (rows in row-major cell order, equations in heads h). */
export function writeSystemFile(system: FlowSystem, file: string): { unknowns: number; nonzeros: number } {
  const { nx, ny, diag, east, south, unknown } = system.operator;
  const n = nx * ny;
  const index = new Int32Array(n).fill(-1);
  let m = 0;
  for (let p = 0; p < n; p++) if (unknown[p]) index[p] = m++;
  let nnz = 0;
  for (let p = 0; p < n; p++) {
    if (!unknown[p]) continue;
    nnz++;
    if (p % nx > 0 && unknown[p - 1]) nnz++;
    if (p % nx < nx - 1 && unknown[p + 1]) nnz++;
    if (p >= nx && unknown[p - nx]) nnz++;
    if (p + nx < n && unknown[p + nx]) nnz++;
  }
  const indptr = new BigInt64Array(m + 1);
  const indices = new Int32Array(nnz);
  const data = new Float64Array(nnz);
  const rhs = new Float64Array(m);
  const cell = new BigInt64Array(m);
  let k = 0;
  const datum = system.datum;
  for (let p = 0; p < n; p++) {
    const row = index[p]!;
    if (row < 0) continue;
    indptr[row] = BigInt(k);
    let coupled = 0;
    const add = (q: number, c: number) => {
      indices[k] = index[q]!;
      data[k++] = -c;
      coupled += c;
    };
    // columns in increasing order: north, west, self, east, south
    if (p >= nx && unknown[p - nx]) add(p - nx, south[p - nx]!);
    if (p % nx > 0 && unknown[p - 1]) add(p - 1, east[p - 1]!);
    indices[k] = row;
    data[k++] = diag[p]!;
    if (p % nx < nx - 1 && unknown[p + 1]) add(p + 1, east[p]!);
    if (p + nx < n && unknown[p + nx]) add(p + nx, south[p]!);
    // A (h - datum) = rhs  <=>  A h = rhs + datum * (row sum of A)
    rhs[row] = system.rhs[p]! + datum * (diag[p]! - coupled);
    cell[row] = BigInt(p);
  }
  indptr[m] = BigInt(k);
  const fd = openSync(file, 'w');
  try {
    writeSync(fd, new TextEncoder().encode('GWCSR01\n'));
    writeSync(fd, new Uint8Array(new BigInt64Array([BigInt(m), BigInt(nnz), BigInt(ny), BigInt(nx)]).buffer));
    for (const a of [indptr, indices, data, rhs, cell]) writeSync(fd, new Uint8Array(a.buffer, a.byteOffset, a.byteLength));
  } finally {
    closeSync(fd);
  }
  return { unknowns: m, nonzeros: nnz };
}

export interface ReferenceResult {
  setupSeconds: number;
  solveSeconds: number;
  totalSeconds: number;
  /** CPU seconds of set-up + solve (the reference's CPU share times its total). */
  cpuSeconds: number;
  iterations: number;
  trueRelativeResidual: number;
  converged: boolean;
  peakRssMiB: number;
  repeat: number;
}

/** Runs the reference on a GWCSR01 file (best of `repeat` fresh set-up + solve runs, as it reports). */
export function runReference(
  exe: string,
  systemFile: string,
  tolerance: number,
  repeat: number,
  solutionFile?: string,
): ReferenceResult | { error: string } {
  const args = [systemFile, '-tol', String(tolerance), '-repeat', String(repeat)];
  if (solutionFile) args.push('-o', solutionFile);
  const run = spawnSync(exe, args, {
    encoding: 'utf8',
    maxBuffer: 1 << 24,
    env: { ...process.env, OMP_NUM_THREADS: '1' },
  });
  const line = run.stdout?.split('\n').find((l) => l.startsWith('RESULT '));
  if (run.status !== 0 || !line) return { error: `reference failed (status ${run.status}): ${run.stderr?.slice(-500) ?? ''}` };
  const r = JSON.parse(line.slice(7)) as Record<string, number | boolean>;
  return {
    setupSeconds: r.setup_s as number,
    solveSeconds: r.solve_s as number,
    totalSeconds: r.total_s as number,
    cpuSeconds: (r.total_s as number) * (r.cpu_share as number),
    iterations: r.iterations as number,
    trueRelativeResidual: r.true_rel_residual as number,
    converged: r.converged as boolean,
    peakRssMiB: r.peak_rss_mib as number,
    repeat: r.repeat as number,
  };
}

/** The reference's solution (GWVEC01: magic, int64 n, float64 x[n]) as heads on the cells of `cellsFile`'s order. */
export function readSolution(file: string): Float64Array | null {
  if (!existsSync(file)) return null;
  const buf = readFileSync(file);
  if (buf.subarray(0, 8).toString('latin1') !== 'GWVEC01\n') return null;
  const n = Number(buf.readBigInt64LE(8));
  return new Float64Array(buf.buffer.slice(buf.byteOffset + 16, buf.byteOffset + 16 + 8 * n));
}
