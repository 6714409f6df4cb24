/**
 * The unconfined demo (data/valley-unconfined.json) end to end: head.tif has nodata exactly on the inactive and the
 * dry cells, saturated-thickness.tif is written and agrees with head - bottom, read back by GDAL (the reference
 * reader of GIS formats). Skips with a message where GDAL is absent, except on CI (CI=true).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { solveScenarioFile } from '../../src/pipeline.js';
import { resultBundle, writeSolveResults } from '../../src/output/solveFiles.js';
import { loadScenario } from '../../src/scenario/load.js';
import { solveModel } from '../../src/pipeline.js';

const gdalPresent = spawnSync('gdalinfo', ['--version'], { encoding: 'utf8' }).status === 0;
const onCi = process.env.CI === 'true';
if (!gdalPresent && !onCi) console.warn('water-table.test.ts: gdalinfo not on PATH; skipped (install gdal-bin to run it)');

const demo = resolve(__dirname, '../../data/valley-unconfined.json');
let dir: string;

/** Band statistics as GDAL computes them. */
function stats(path: string): { min: number; max: number } {
  const info = JSON.parse(execFileSync('gdalinfo', ['-json', '-stats', path], { encoding: 'utf8' }));
  const band = info.bands[0];
  return { min: band.minimum, max: band.maximum };
}

describe.runIf(gdalPresent || onCi)('the unconfined demo, end to end', () => {
  let summary: {
    grid: { activeCells: number; nx: number; ny: number };
    aquifer: { type: string; dryCells: number };
    solver: { outerStopReason: string };
    head: { min: number; max: number };
  };
  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'piezomap-water-table-'));
    const solved = await solveScenarioFile(demo);
    await writeSolveResults(solved, dir, {});
    summary = JSON.parse(readFileSync(join(dir, 'summary.json'), 'utf8'));
  }, 180_000);
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('settles, and head.tif is nodata on inactive and dry cells only', () => {
    expect(summary.aquifer.type).toBe('unconfined');
    expect(summary.solver.outerStopReason).toBe('settled');
    const { nx, ny, activeCells } = summary.grid;
    // Every cell value as GDAL reads it (XYZ text), nodata counted.
    const xyz = execFileSync('gdal_translate', ['-q', '-of', 'XYZ', join(dir, 'head.tif'), '/vsistdout/'], {
      encoding: 'utf8',
      maxBuffer: 1 << 26,
    });
    const values = xyz
      .trim()
      .split('\n')
      .map((line) => Number(line.split(' ')[2]));
    expect(values).toHaveLength(nx * ny);
    expect(values.filter((v) => v !== -9999)).toHaveLength(activeCells - summary.aquifer.dryCells);
    expect(summary.aquifer.dryCells).toBeGreaterThan(0);
  });

  it("summary.json's head range is that of head.tif as GDAL reads it: dry cells have no head", () => {
    // GDAL's band statistics skip nodata (gdalinfo -stats); its JSON prints them to 3 decimals (from GDAL's output)
    const fromGdal = stats(join(dir, 'head.tif'));
    expect(Math.abs(summary.head.min - fromGdal.min)).toBeLessThanOrEqual(5e-4);
    expect(Math.abs(summary.head.max - fromGdal.max)).toBeLessThanOrEqual(5e-4);
  });

  it('writes saturated-thickness.tif: 0 in dry cells, at most the deepest saturation', () => {
    const thickness = stats(join(dir, 'saturated-thickness.tif'));
    expect(thickness.min).toBe(0);
    expect(thickness.max).toBeGreaterThan(20);
    expect(thickness.max).toBeLessThan(60);
  });
});

describe('the unconfined demo through the worker-thread executor', () => {
  it('gives the same head.tif, saturated-thickness.tif and convergence.csv as the library in-thread', async () => {
    // The CLI's solve runs in a worker thread, with the operator updates of the outer iteration sent to it.
    const out = mkdtempSync(join(tmpdir(), 'piezomap-water-table-cli-'));
    try {
      const bin = resolve(__dirname, '../../bin/piezomap.js');
      const run = spawnSync(process.execPath, [bin, 'solve', demo, '-o', join(out, 'r'), '--quiet', '--no-maps'], { encoding: 'utf8' });
      expect(run.status, run.stderr).toBe(0);
      const { model } = await loadScenario(demo);
      const { files } = resultBundle(solveModel(model), '', { maps: false });
      for (const name of ['head.tif', 'saturated-thickness.tif', 'convergence.csv']) {
        const mine = files.find((f) => f.name === name)!;
        expect(Buffer.compare(Buffer.from(mine.bytes), readFileSync(join(out, 'r', name))), name).toBe(0);
      }
    } finally {
      rmSync(out, { recursive: true, force: true });
    }
  }, 120_000);
});
