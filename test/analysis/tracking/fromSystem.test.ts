import { describe, expect, it } from 'vitest';
import { assembleSystem } from '../../../src/discretisation/assemble.js';
import { trackingInputFromSystem } from '../../../src/analysis/tracking/fromSystem.js';
import { fixedColumn, makeModel, testGrid, well } from '../../helpers/model.js';

describe('trackingInputFromSystem', () => {
  const grid = testGrid(6, 4, 10);
  const model = makeModel(grid, {
    conductivity: new Float64Array(24).fill(1),
    fixedHeads: [fixedColumn(grid, 0, 10, 'west'), fixedColumn(grid, 5, 9, 'east')],
    wells: [well(grid, 'A', 1, 2, -1), well(grid, 'B', 1, 2, -2), well(grid, 'C', 2, 3, 1)],
  });
  const system = assembleSystem(model);
  const head = new Float64Array(24).fill(9.5);

  it('labels fixed-head groups as boundaries and well cells as wells (wells in one cell share a label)', () => {
    const input = trackingInputFromSystem(system, head, { wells: model.wells, thickness: 1, porosity: 0.2 });
    expect(input.labels).toEqual([
      { kind: 'boundary', name: 'west' },
      { kind: 'boundary', name: 'east' },
      { kind: 'well', name: 'A+B' },
      { kind: 'well', name: 'C' },
    ]);
    expect(input.stopLabel[0]).toBe(0);
    expect(input.stopLabel[5]).toBe(1);
    expect(input.stopLabel[1 * 6 + 2]).toBe(2);
    expect(input.stopLabel[2 * 6 + 3]).toBe(3);
    expect(input.stopLabel[1]).toBe(-1);
  });

  it('refuses a grid that is not north-up rather than mirror the tracks', () => {
    const flipped = { ...system, grid: { ...grid, transform: [500000, 10, 0, 4100000, 0, 10] as const } };
    expect(() => trackingInputFromSystem(flipped, head, { wells: model.wells, thickness: 1, porosity: 0.2 })).toThrow(/north-up/);
  });
});
