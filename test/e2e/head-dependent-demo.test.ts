/**
 * The demo with head-dependent boundaries, through the command line: `compare` reports a river depletion below
 * 100 % with one row per reach, the rest from the field drains and other boundaries, the sources summing to 100 %
 * (Theis 1940's steady budget view: every unit of added withdrawal is balanced by the other terms); `solve` writes
 * exchange rasters that an outside reader (geotiff.js) reads back summing to the budget rows; `inspect` counts the
 * boundaries; the printout names the outer iterations.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { fromArrayBuffer } from 'geotiff';
import { main } from '../../src/cli/main.js';

const demo = resolve(__dirname, '../../data/valley.json');
let dir: string;

async function runHere(args: string[]) {
  let stdout = '';
  let stderr = '';
  const code = await main(args, { stdout: (t) => (stdout += t), stderr: (t) => (stderr += t) });
  return { code, stdout, stderr };
}

async function rasterValues(path: string): Promise<{ values: Float32Array; nodata: number }> {
  const bytes = readFileSync(path);
  const tiff = await fromArrayBuffer(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength));
  const image = await tiff.getImage();
  const [values] = (await image.readRasters()) as unknown as [Float32Array];
  return { values, nodata: Number(image.getGDALNoData()) };
}

type Source = { term: string; netChange: number; percentOfAddedPumping: number | null; partOf?: string };

describe('the demo with a river bed, reaches and a field drain', () => {
  let compare: { code: number; stdout: string; stderr: string };
  let solve: { code: number; stdout: string; stderr: string };
  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'piezomap-hd-demo-'));
    compare = await runHere(['compare', demo, '-o', join(dir, 'compare')]);
    solve = await runHere(['solve', demo, '-o', join(dir, 'solve')]);
  }, 180_000);
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('compare: the river supplies less than 100 % of the added pumping, reach by reach, the field drains part of the rest', () => {
    expect(compare.code, compare.stderr).toBe(0);
    const summary = JSON.parse(readFileSync(join(dir, 'compare', 'summary.json'), 'utf8'));
    const sources = summary.variants[0].sourcesOfWater as { addedPumping: number; terms: Source[]; totalPercent: number };
    const river = sources.terms.find((t) => t.term === 'river')!;
    const drains = sources.terms.find((t) => t.term === 'field-drains')!;
    expect(river.percentOfAddedPumping!).toBeGreaterThan(50);
    expect(river.percentOfAddedPumping!).toBeLessThan(99.9);
    expect(drains.percentOfAddedPumping!).toBeGreaterThan(0.5);
    const reaches = sources.terms.filter((t) => t.partOf === 'river');
    expect(reaches.map((t) => t.term)).toEqual(['river: upper reach', 'river: impounded reach', 'river: lower reach']);
    // Reaches split the river's row (they sum to it) and are not counted again in the total (Theis 1940: 100 %).
    expect(reaches.reduce((s, t) => s + t.netChange, 0)).toBeCloseTo(river.netChange, 6);
    expect(sources.totalPercent).toBeCloseTo(100, 3);
    expect(compare.stdout).toMatch(/river: impounded reach %/);
    expect(compare.stdout).toMatch(/outer iteration/);
    const csv = readFileSync(join(dir, 'compare', 'comparison.csv'), 'utf8');
    expect(csv.split('\n')[0]).toMatch(/source_river: upper reach_percent/);
  });

  it('solve: the impounded reach loses water to the aquifer in the baseline; the budget has reach sub-rows and outer iterations', () => {
    expect(solve.code, solve.stderr).toBe(0);
    const summary = JSON.parse(readFileSync(join(dir, 'solve', 'summary.json'), 'utf8'));
    const river = summary.budget.terms.find((t: { term: string }) => t.term === 'river');
    const impounded = river.parts.find((p: { part: string }) => p.part === 'impounded reach');
    expect(impounded.inflow).toBeGreaterThan(impounded.outflow);
    expect(summary.solver.outerIterations).toBeGreaterThanOrEqual(2);
    expect(summary.solver.outerStopReason).toBe('settled');
    expect(solve.stdout).toMatch(/Outer +\d+ outer iteration\(s\), settled/);
    expect(solve.stdout).toMatch(/\n {4}impounded reach /);
    // budget.csv keeps one row per term (the contract): no reach rows there.
    const csv = readFileSync(join(dir, 'solve', 'budget.csv'), 'utf8');
    expect(csv).toMatch(/^river,/m);
    expect(csv).not.toMatch(/reach/);
  });

  it('solve: exchange-NAME.tif per boundary, read by geotiff.js, sums to the budget row, nodata off the boundary', async () => {
    const summary = JSON.parse(readFileSync(join(dir, 'solve', 'summary.json'), 'utf8'));
    for (const name of ['river', 'field-drains']) {
      const { values, nodata } = await rasterValues(join(dir, 'solve', `exchange-${name}.tif`));
      expect(nodata).toBe(-9999);
      let inflow = 0;
      let outflow = 0;
      let cells = 0;
      for (const v of values) {
        if (v === nodata) continue;
        cells++;
        if (v > 0) inflow += v;
        else outflow -= v;
      }
      const row = summary.budget.terms.find((t: { term: string }) => t.term === name);
      expect(cells).toBeGreaterThan(10);
      expect(cells).toBeLessThan(values.length / 10);
      // Float32 cells: a relative 1e-6 of each cell's value.
      expect(Math.abs(inflow - row.inflow)).toBeLessThanOrEqual(1e-5 * (row.inflow + row.outflow) + 1e-6);
      expect(Math.abs(outflow - row.outflow)).toBeLessThanOrEqual(1e-5 * (row.inflow + row.outflow) + 1e-6);
    }
  });

  it('inspect counts the head-dependent boundaries and their reaches', async () => {
    const r = await runHere(['inspect', demo]);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/Boundary {5}river: \d+ cells \(switching, 3 reaches\)/);
    expect(r.stdout).toMatch(/Boundary {5}field-drains: \d+ cells \(switching\)/);
  });
});
