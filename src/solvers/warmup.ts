import { GridOperator } from './operator.js';
import type { Solver, StencilOperator } from './types.js';

let warmedUp = false;

/**
 * Runs a solver once on a small synthetic system so that the JavaScript engine compiles the hot kernels
 * before the first large solve. Without it, the first pass of each kernel over a multi-million-cell grid runs
 * largely unoptimised (measured ~150 ms extra per kernel at 2048^2). Once per process; costs a few ms.
 */
export function warmUpKernels(build: (op: StencilOperator) => Solver): void {
  if (warmedUp) return;
  warmedUp = true;
  const nx = 160;
  const ny = 112;
  const n = nx * ny;
  const diag = new Float64Array(n);
  const east = new Float64Array(n);
  const south = new Float64Array(n);
  const unknown = new Uint8Array(n);
  const b = new Float64Array(n);
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      // fixed-head columns at both ends, everything else unknown with varying conductance
      unknown[p] = j === 0 || j === nx - 1 ? 0 : 1;
    }
  }
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      if (!unknown[p]) continue;
      const c = 1 + ((i * 7 + j * 13) % 10);
      if (j + 1 < nx) {
        if (unknown[p + 1]) east[p] = c;
        diag[p]! += c;
        if (unknown[p + 1]) diag[p + 1]! += c;
      }
      if (i + 1 < ny) {
        south[p] = c;
        diag[p]! += c;
        diag[p + nx]! += c;
      }
      b[p] = ((i + j) % 5) - 2;
    }
  }
  for (let p = 0; p < n; p++) if (!unknown[p]) diag[p] = 1;
  // the west/east couplings to fixed cells stay in the diagonal (Dirichlet), as in the real operator
  for (let i = 0; i < ny; i++) diag[i * nx + 1]! += 1;
  const op = new GridOperator(nx, ny, diag, east, south, unknown);
  const solver = build(op);
  const x = new Float64Array(n);
  for (let round = 0; round < 3; round++) {
    x.fill(0);
    solver.solve(b, x, { tolerance: 1e-12, maxIterations: 60 });
  }
}
