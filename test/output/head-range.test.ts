/**
 * The head range summary.json and the report show: over cells that have a head. A cell of a water-table aquifer
 * whose head is at or below its bottom is dry and has no head (../shared/spec/physics.md: "it carries no flow, gets
 * nodata in head.tif"); its number in the solution is only the iterate's leftover and must not enter the range.
 * Before: the range ran over every active cell, dry ones included, so a dry cell's value below the bottom could be
 * reported as the lowest head of the run although head.tif showed nodata there.
 */
import { describe, expect, it } from 'vitest';
import { headRange } from '../../src/output/summary.js';
import type { WaterTable } from '../../src/discretisation/aquifer.js';

describe('head range', () => {
  it('skips inactive cells (NaN) and, in a water-table aquifer, dry cells (head at or below the bottom)', () => {
    const head = new Float64Array([105, 31.5, NaN, 112, 40]);
    // cell 1: 31.5 below its bottom of 35 (dry); cell 4: 40 exactly at its bottom (dry); cell 3 wet above 60
    const table = { bottom: new Float64Array([50, 35, 50, 60, 40]) } as unknown as WaterTable;
    expect(headRange(head, table)).toEqual({ min: 105, max: 112, mean: 108.5 });
    // a confined model (no water table): every active cell has a head
    expect(headRange(head)).toEqual({ min: 31.5, max: 112, mean: 72.125 });
  });

  it('has no range when every cell is dry', () => {
    const r = headRange(new Float64Array([1, 2]), { bottom: new Float64Array([5, 5]) } as unknown as WaterTable);
    expect(r.min).toBe(Infinity);
    expect(Number.isNaN(r.mean)).toBe(true);
  });
});
