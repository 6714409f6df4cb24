/**
 * The raster reader takes its size limit from the caller (the scenario loader passes half the run's memory limit,
 * src/memory.ts) instead of reading the run's memory policy itself.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { readRaster } from '../../src/raster/read.js';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { memoryLimit, rasterBudget } from '../../src/memory.js';
import { PiezomapError } from '../../src/errors.js';
import { testGrid } from '../helpers/model.js';

let dir: string;
let path: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-size-limit-'));
  path = join(dir, 'k.tif');
  writeFileSync(path, encodeFloat32GeoTiff(testGrid(40, 30, 10), new Float64Array(1200).fill(2)));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('raster size limit', () => {
  it('reads within the limit and refuses beyond it, as the caller sets it', async () => {
    // 1200 cells need 9600 bytes as doubles, plus the file and one block.
    expect((await readRaster(path, { maxBytes: 1e6 })).values.length).toBe(1200);
    let thrown: unknown;
    try {
      await readRaster(path, { label: 'k.tif', maxBytes: 9000 });
    } catch (error) {
      thrown = error;
    }
    expect(thrown).toBeInstanceOf(PiezomapError);
    expect((thrown as PiezomapError).code).toBe('input');
    expect((thrown as PiezomapError).message).toMatch(/^k\.tif: .*more than the 9 kB of memory a raster may take/);
  });

  it("the loader's limit is half the run's memory limit", () => {
    const limit = memoryLimit({ PIEZOMAP_MEMORY_LIMIT_MB: '512' });
    expect(rasterBudget(limit)).toBe(256 * 2 ** 20);
  });
});
