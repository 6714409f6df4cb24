/**
 * checkMagnitudes (src/scenario/magnitudes.ts): every input and every product the discretisation forms stays within
 * 1e-100..1e100, so a product of three stays inside double precision (about 2.2e-308 to 1.8e308; IEEE 754
 * binary64); heads within 1e15, where doubles are still 0.125 apart. Errors name the key and the cell.
 */
import { describe, expect, it } from 'vitest';
import type { PiezomapError } from '../../src/errors.js';
import { checkMagnitudes } from '../../src/scenario/magnitudes.js';
import type { ModelInput } from '../../src/scenario/types.js';
import { fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';

function model(parts: Partial<ModelInput> = {}, k = 5): ModelInput {
  const grid = testGrid(6, 4, 10);
  return makeModel(grid, {
    conductivity: new Float64Array(24).fill(k),
    thickness: 20,
    fixedHeads: [fixedColumn(grid, 0, 50, 'west')],
    ...parts,
  });
}

function caught(m: ModelInput): PiezomapError | null {
  try {
    checkMagnitudes(m, 'test.json', { conductivity: 'k.tif' });
    return null;
  } catch (thrown) {
    return thrown as PiezomapError;
  }
}

describe('checkMagnitudes', () => {
  it('accepts ordinary and extreme but carried values, up to the bounds', () => {
    expect(caught(model())).toBeNull();
    // K*b = 5e99 and the head 1e15 sit just inside; 3.4e38 (single-precision maximum) is carried in double.
    expect(caught(model({ thickness: 1e99 }))).toBeNull();
    expect(caught(model({}, 3.4e38))).toBeNull();
    expect(caught(model({ fixedHeads: [fixedColumn(testGrid(6, 4, 10), 0, 1e15, 'west')] }))).toBeNull();
  });

  it('refuses K*b beyond 1e100 naming the first cell and counting the others', () => {
    const k = new Float64Array(24).fill(5);
    k[9] = 1e99; // row 1, col 3: K*b = 2e100
    k[20] = 1e99;
    const error = caught(model({ conductivity: k }));
    expect(error?.code).toBe('input');
    expect(error?.message).toMatch(
      /aquifer\.conductivity "k\.tif": transmissivity K·b = 1\.000e\+99 × 2\.000e\+1 = 2\.000e\+100 at row 1, col 3 \(and 1 more/,
    );
    expect(error?.detail.cell).toEqual({ row: 1, col: 3 });
  });

  it('refuses a thickness of 1e-300, a well rate of 1e101 and a head of 2e15, naming each', () => {
    expect(caught(model({ thickness: 1e-300 }))?.message).toMatch(/aquifer\.thickness 1\.000e-300/);
    const grid = testGrid(6, 4, 10);
    expect(caught(model({ wells: [well(grid, 'P-1', 1, 2, -1e101)] }))?.message).toMatch(/well "P-1" .*rate -1\.000e\+101 exceeds 1e100/);
    expect(caught(model({ fixedHeads: [fixedColumn(grid, 0, 2e15, 'west')] }))?.message).toMatch(
      /"west"\): head 2\.000e\+15 at row 0, col 0 exceeds 1e15/,
    );
  });
});
