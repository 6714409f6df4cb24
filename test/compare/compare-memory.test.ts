/**
 * compare holds every variant's results until its files are written, so its memory check counts all of them at
 * once, before anything is assembled or solved (issue 9, item 10: 30 variants at 1500² peaked at 3.6 GB under a
 * 1,500 MB limit). The per-variant figure is our own measurement (src/memory.ts).
 */
import { afterEach, describe, expect, it } from 'vitest';
import { compareModels, prepareComparison } from '../../src/compare/run.js';
import { COMPARE_VARIANT_BYTES_PER_CELL, estimateRunBytes, MEMORY_LIMIT_ENV } from '../../src/memory.js';
import { PiezomapError } from '../../src/errors.js';
import { solverBytesPerCell } from '../../src/solvers/registry.js';
import { fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';

const MiB = 2 ** 20;
const saved = process.env[MEMORY_LIMIT_ENV];
afterEach(() => {
  if (saved === undefined) delete process.env[MEMORY_LIMIT_ENV];
  else process.env[MEMORY_LIMIT_ENV] = saved;
});

describe('memory of a comparison', () => {
  const n = 300;
  const grid = testGrid(n, n, 10);
  const base = makeModel(grid, { conductivity: new Float64Array(n * n).fill(1), fixedHeads: [fixedColumn(grid, 0, 10, 'west')] });
  const variants = (count: number) =>
    Array.from({ length: count }, (_, k) => ({ name: `v${k}`, model: { ...base, wells: [well(grid, `W${k}`, 100, 100 + k, -10)] } }));
  // A limit that holds the baseline's run and five variants' results, not thirty.
  const limitMiB = (estimateRunBytes(n * n, solverBytesPerCell('auto')) + 5 * COMPARE_VARIANT_BYTES_PER_CELL * n * n) / MiB;

  it('refuses thirty variants that do not fit together, before assembling or solving any, naming the count', () => {
    process.env[MEMORY_LIMIT_ENV] = String(limitMiB);
    let thrown: unknown;
    try {
      compareModels(base, variants(30));
    } catch (error) {
      thrown = error;
    }
    expect(thrown).toBeInstanceOf(PiezomapError);
    const error = thrown as PiezomapError;
    expect(error.code).toBe('input');
    expect(error.message).toMatch(/30 variant\(s\) held at once/);
    expect(error.detail.hint).toMatch(/compare fewer variants per run/);
  });

  it('accepts a few variants under the same limit', () => {
    process.env[MEMORY_LIMIT_ENV] = String(limitMiB);
    const prepared = prepareComparison(base, variants(3));
    expect(prepared.variants.map((v) => v.shared)).toEqual([true, true, true]);
  });
});
