/**
 * The memory budget (src/memory.ts): the estimate grows with the grid and the solver's workspace, a run that does not
 * fit is refused before assembly with a hint, and PIEZOMAP_MEMORY_LIMIT_MB sets the limit.
 */
import { describe, expect, it } from 'vitest';
import { BASE_BYTES_PER_CELL, FIXED_OVERHEAD_BYTES, checkMemoryBudget, estimateRunBytes, memoryLimit } from '../src/memory.js';
import { leanestMethod, solverBytesPerCell, solverRegistry } from '../src/solvers/registry.js';
import { PiezomapError } from '../src/errors.js';
import { testGrid } from './helpers/model.js';

const MiB = 2 ** 20;

describe('memory budget', () => {
  it('estimateRunBytes = overhead + cells x (base + solver bytes per cell)', () => {
    expect(estimateRunBytes(1000, 100)).toBe(FIXED_OVERHEAD_BYTES + 1000 * (BASE_BYTES_PER_CELL + 100));
    expect(estimateRunBytes(2_000_000, 128)).toBeGreaterThan(estimateRunBytes(1_000_000, 128));
  });

  it('every registry method gives a per-cell estimate; auto counts as the largest; cg is the leanest', () => {
    for (const [name, entry] of Object.entries(solverRegistry)) expect(entry.bytesPerCell, name).toBeGreaterThan(0);
    const largest = Math.max(...Object.values(solverRegistry).map((e) => e.bytesPerCell!));
    expect(solverBytesPerCell('auto')).toBe(largest);
    expect(leanestMethod().method).toBe('cg');
  });

  it('PIEZOMAP_MEMORY_LIMIT_MB sets the limit; a bad value is an input error naming the variable', () => {
    expect(memoryLimit({ PIEZOMAP_MEMORY_LIMIT_MB: '512' }).bytes).toBe(512 * MiB);
    expect(memoryLimit({}).bytes).toBeGreaterThan(0);
    expect(() => memoryLimit({ PIEZOMAP_MEMORY_LIMIT_MB: '-3' })).toThrow(/PIEZOMAP_MEMORY_LIMIT_MB="-3"/);
  });

  it('refuses a grid that does not fit, with the sizes and a coarsening factor; accepts one that does', () => {
    const grid = testGrid(2000, 2000, 10); // 4e6 cells: about 1.9 GiB with pcg-multigrid
    const limit = { bytes: 1024 * MiB, source: 'test' };
    let caught: unknown;
    try {
      checkMemoryBudget(grid, { method: 'pcg-multigrid', bytesPerCell: 128 }, { method: 'cg', bytesPerCell: 32 }, limit);
    } catch (thrown) {
      caught = thrown;
    }
    expect(caught).toBeInstanceOf(PiezomapError);
    const error = caught as PiezomapError;
    expect(error.code).toBe('input');
    expect(error.message).toMatch(/2000 x 2000 cells, solver pcg-multigrid.*memory limit is 1\.0 GiB \(test\)/);
    // cells that fit: (1024 - 96) MiB / 488 B = 1.99e6 of 4e6, so about 1.42x per side
    expect(error.detail.hint).toMatch(/coarsen the rasters about 1\.5x per side/);
    expect(() => checkMemoryBudget(testGrid(500, 500, 10), { method: 'pcg-multigrid', bytesPerCell: 128 }, null, limit)).not.toThrow();
  });
});
