/**
 * compare on an unconfined aquifer: drawdown, sources of the added pumping and dry cells per variant. The sources
 * must account for the whole added withdrawal the wells actually delivered (mass conservation: in steady state
 * every added withdrawal is met by less outflow or more inflow at the boundaries; common practice).
 */
import { describe, expect, it } from 'vitest';
import { compareModels } from '../../src/compare/run.js';
import { comparisonCsv } from '../../src/output/comparison.js';
import { dryCells } from '../../src/discretisation/aquifer.js';
import { fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';

describe('compare on an unconfined aquifer', () => {
  it('reports drawdown, where the added pumping comes from and the dry cells of each variant', () => {
    const [nx, ny, dx] = [25, 25, 20];
    const grid = testGrid(nx, ny, dx);
    const base = makeModel(grid, {
      conductivity: new Float64Array(nx * ny).fill(3),
      aquiferType: 'unconfined',
      aquiferBottom: 10,
      fixedHeads: [fixedColumn(grid, 0, 14, 'west'), fixedColumn(grid, nx - 1, 13, 'east')],
      recharge: 0.0005,
      wells: [well(grid, 'W1', 12, 8, -20)],
      solver: { method: 'auto', tolerance: 1e-11, maxIterations: 10000 },
    });
    const variant = { ...base, wells: [well(grid, 'W1', 12, 8, -20), well(grid, 'W2', 12, 16, -400)] };
    const c = compareModels(base, [{ name: 'heavy', model: variant }]);
    expect(c.baselineProblem).toBeNull();
    const v = c.variants[0]!;
    expect(v.problem).toBeNull();
    // The operator depends on the heads: never shared with the baseline.
    expect(v.sharedOperator).toBe(false);
    expect(v.maxDrawdown!.value).toBeGreaterThan(0.5);
    // W2 asks more than a 4 m saturated band of K = 3 m/d can give: part of it is not delivered, and reported.
    const w2 = v.result.wellbore.find((w) => w.id === 'W2')!;
    expect(w2.undeliveredRate).toBeGreaterThan(0);
    // Sources account for the added withdrawal actually delivered.
    expect(v.sources.totalPercent).toBeCloseTo(100, 3);
    const delivered = 400 - w2.undeliveredRate;
    expect(v.sources.addedPumping).toBeCloseTo(delivered, 3);
    // Dry cells per variant in comparison.csv.
    const csv = comparisonCsv(c).trim().split('\n');
    const header = csv[0]!.split(',');
    const row = csv[1]!.split(',');
    const table = v.result.system.waterTable!;
    expect(Number(row[header.indexOf('dry_cells')])).toBe(dryCells(table, v.result.head).count);
    // The well's cell is drained to within 1 % of its 4 m starting saturation (it settles in the smoothed zone,
    // where it delivers only what flows to it).
    const p = 12 * nx + 16;
    expect(v.result.head[p]! - 10).toBeLessThan(0.04);
    expect(Number(row[header.indexOf('undelivered_pumping')])).toBeCloseTo(w2.undeliveredRate, 3);
  });
});
