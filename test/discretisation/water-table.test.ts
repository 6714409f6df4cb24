/**
 * Unconfined and convertible aquifers (src/discretisation/aquifer.ts, the outer iteration of outerLoop.ts) against
 * published solutions of the Dupuit-Forchheimer equations.
 */
import { describe, expect, it } from 'vitest';
import { solveModel } from '../../src/pipeline.js';
import { resultProblem } from '../../src/analysis/result.js';
import { fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';
import type { ModelInput } from '../../src/scenario/types.js';

const solver = { method: 'auto', tolerance: 1e-12, maxIterations: 50000 };

/**
 * One row band (ny rows) between fixed heads h1 (first column) and h2 (last column), flat bottom at z, uniform K and
 * recharge W: Dupuit-Forchheimer flow with recharge.
 */
function dupuitStrip(nx: number, dx: number, h1: number, h2: number, z: number, k: number, w: number, extra: Partial<ModelInput> = {}): ModelInput {
  const grid = testGrid(nx, 3, dx);
  return makeModel(grid, {
    conductivity: new Float64Array(nx * 3).fill(k),
    aquiferType: 'unconfined',
    aquiferBottom: z,
    fixedHeads: [fixedColumn(grid, 0, h1, 'west'), fixedColumn(grid, nx - 1, h2, 'east')],
    recharge: w,
    solver,
    ...extra,
  });
}

describe('unconfined aquifer: Dupuit-Forchheimer flow with recharge', () => {
  it('matches the h^2 parabola at cell centres to the solver tolerance', () => {
    const nx = 41;
    const dx = 25;
    const [h1, h2, z, k, w] = [20, 12, 2, 8, 0.002];
    const result = solveModel(dupuitStrip(nx, dx, h1, h2, z, k, w));
    expect(resultProblem(result)).toBeNull();
    expect(result.outer.stopReason).toBe('settled');
    const length = (nx - 1) * dx;
    let worst = 0;
    for (let j = 0; j < nx; j++) {
      const x = j * dx;
      // Dupuit-Forchheimer with uniform recharge on a flat bottom (Fetter, Applied Hydrogeology, 4th ed., eq. for
      // an unconfined aquifer with recharge between two water bodies; Bear 1972, Dynamics of Fluids in Porous
      // Media, section 8.2): (h - z)^2 = b1^2 - (b1^2 - b2^2) x / L + (W / K) x (L - x).
      const b1 = h1 - z;
      const b2 = h2 - z;
      const expected = z + Math.sqrt(b1 * b1 - ((b1 * b1 - b2 * b2) * x) / length + (w / k) * x * (length - x));
      for (let i = 0; i < 3; i++) worst = Math.max(worst, Math.abs(result.head[i * nx + j]! - expected));
    }
    // With the contract's conductance the discrete equations are exact for this parabola (physics.md), so the only
    // error left is the outer iteration's (head change 1e-6 m, flow residual 1e-7) and the linear solver's (1e-12).
    expect(worst).toBeLessThan(1e-5);
    expect(Math.abs(result.budget.discrepancyPercent)).toBeLessThan(1e-4);
  });

  it('reaches the same heads from two different starting heads', () => {
    const low = solveModel(dupuitStrip(31, 20, 15, 10, 0, 5, 0.001, { initialHead: 10.5 }));
    const high = solveModel(dupuitStrip(31, 20, 15, 10, 0, 5, 0.001, { initialHead: 40 }));
    expect(resultProblem(low)).toBeNull();
    expect(resultProblem(high)).toBeNull();
    let worst = 0;
    for (let p = 0; p < low.head.length; p++) worst = Math.max(worst, Math.abs(low.head[p]! - high.head[p]!));
    // The fixed point is unique (Dupuit's equation is linear in h^2); both runs stop within the outer tolerance of it.
    expect(worst).toBeLessThan(1e-5);
    // And the starts really differed: both runs iterated.
    expect(low.outer.iterations).toBeGreaterThan(2);
    expect(high.outer.iterations).toBeGreaterThan(2);
  });
});
