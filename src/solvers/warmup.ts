import { GridOperator } from './operator.js';
import { sharedAlloc, type Team } from './team.js';
import type { Solver, StencilOperator } from './types.js';

let warmedUp = false;
const ordinary = { f64: (n: number) => new Float64Array(n), u8: (n: number) => new Uint8Array(n) };

/**
 * Runs a solver once on a small synthetic system so that the JavaScript engine compiles the hot kernels
 * before the first large solve. Without it, the first pass of each kernel over a multi-million-cell grid runs
 * largely unoptimised (measured ~150 ms extra per kernel at 2048^2). Once per process; costs a few ms.
 */
export function warmUpKernels(build: (op: StencilOperator) => Solver): void {
  if (warmedUp) return;
  warmedUp = true;
  warmUpOn(ordinary, build, 3);
}

/**
 * The same for a thread team's kernels, once per team (each helper thread compiles its own code): `build` gets an
 * operator in shared memory and should set the solver up with the team on every level.
 */
export function warmUpTeam(team: Team, build: (op: StencilOperator) => Solver): void {
  if (team.warmedUp) return;
  team.warmedUp = true;
  warmUpOn(sharedAlloc, build, 1);
}

function warmUpOn(
  alloc: { f64(n: number): Float64Array; u8(n: number): Uint8Array },
  build: (op: StencilOperator) => Solver,
  rounds: number,
): void {
  const nx = 160;
  const ny = 112;
  const n = nx * ny;
  const diag = alloc.f64(n);
  const east = alloc.f64(n);
  const south = alloc.f64(n);
  const unknown = alloc.u8(n);
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
  for (let round = 0; round < rounds; round++) {
    x.fill(0);
    solver.solve(b, x, { tolerance: 1e-12, maxIterations: 60 });
  }
}
