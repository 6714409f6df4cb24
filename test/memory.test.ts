/**
 * The memory budget (src/memory.ts): the estimate grows with the grid and the solver's workspace, a run that does not
 * fit is refused before assembly with a hint, and PIEZOMAP_MEMORY_LIMIT_MB sets the limit.
 */
import { describe, expect, it } from 'vitest';
import {
  BASE_BYTES_PER_CELL,
  FIXED_OVERHEAD_BYTES,
  checkMemoryBudget,
  checkRasterMemory,
  estimateRunBytes,
  memoryLimit,
  rasterBudget,
} from '../src/memory.js';
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

  it("checkRasterMemory counts every key's raster together, plus the peak of reading one, against half the limit", () => {
    const limit = { bytes: 800 * MiB, source: 'test' };
    // 3000 x 3000 cells: 72,000,000 bytes (68.7 MiB) as doubles; reading one adds its decoded strip and file
    const raster = (key: string) => ({
      key,
      given: 'sparse.tif',
      width: 3000,
      height: 3000,
      valueBytes: 72e6,
      readBytes: 72e6 + 36e6 + 400,
    });
    // one, or four (288 MB + 36 MB < 400 MiB), fit; seven (504 MB + 36 MB) do not, though each alone would
    expect(() => checkRasterMemory([raster('aquifer.conductivity')], limit)).not.toThrow();
    expect(() => checkRasterMemory(['a', 'b', 'c', 'd'].map(raster), limit)).not.toThrow();
    let caught: unknown;
    try {
      checkRasterMemory(
        ['aquifer.conductivity', 'aquifer.thickness', 'aquifer.porosity', 'aquifer.top', 'aquifer.bottom', 'groundSurface', 'recharge'].map(
          raster,
        ),
        limit,
      );
    } catch (thrown) {
      caught = thrown;
    }
    expect(caught).toBeInstanceOf(PiezomapError);
    const error = caught as PiezomapError;
    expect(error.code).toBe('input');
    expect(error.message).toMatch(
      /^the scenario's 7 rasters need about 515\.0 MiB once read \(aquifer\.conductivity "sparse\.tif" 3000 x 3000 \(68\.7 MiB\), .*, 3 more\), more than half of the memory a run may use \(limit 800\.0 MiB, test\)/,
    );
    expect(error.detail.hint).toMatch(/read once for each/);
    expect(rasterBudget(limit)).toBe(400 * MiB);
  });
});
