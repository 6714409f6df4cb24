import type { Grid } from '../../src/grid.js';
import type { FixedHeadInput, ModelInput, WellInput } from '../../src/scenario/types.js';
import { seededUniform } from '../../src/random.js';

/** A north-up test grid in an invented projected CRS frame (EPSG:32633 label only). */
export function testGrid(nx: number, ny: number, dx: number, dy = dx, x0 = 500000, y0 = 4100000): Grid {
  return {
    nx,
    ny,
    transform: [x0, dx, 0, y0, 0, -dy],
    crs: { epsg: 32633, geographic: false, geoKeys: { GTModelTypeGeoKey: 1, GTRasterTypeGeoKey: 1, ProjectedCSTypeGeoKey: 32633 } },
  };
}

/** Fixed heads on one whole column (col) or row, built as a scenario loader would. */
export function fixedColumn(grid: Grid, col: number, head: number | ((row: number) => number), name: string): FixedHeadInput {
  const cells = new Int32Array(grid.ny);
  const heads = new Float64Array(grid.ny);
  for (let i = 0; i < grid.ny; i++) {
    cells[i] = i * grid.nx + col;
    heads[i] = typeof head === 'number' ? head : head(i);
  }
  return { name, source: `fixedHeads(${name})`, cells, heads };
}

export function fixedCells(name: string, list: Array<[number, number]>): FixedHeadInput {
  return {
    name,
    source: `fixedHeads(${name})`,
    cells: Int32Array.from(list.map((c) => c[0])),
    heads: Float64Array.from(list.map((c) => c[1])),
  };
}

export function well(grid: Grid, id: string, row: number, col: number, rate: number): WellInput {
  const t = grid.transform;
  return { id, x: t[0] + (col + 0.5) * t[1], y: t[3] + (row + 0.5) * t[5], rate, source: `wells(${id})` };
}

export function makeModel(grid: Grid, parts: Partial<ModelInput> & { conductivity: Float64Array }): ModelInput {
  return {
    title: 'test',
    units: { length: 'm', time: 'd' },
    scenarioPath: '<inline>',
    grid,
    thickness: 1,
    anisotropy: 1,
    fixedHeads: [],
    recharge: 0,
    wells: [],
    observations: [],
    solver: { method: 'auto', tolerance: 1e-12, maxIterations: 50000 },
    inputFiles: [],
    warnings: [],
    ...parts,
  };
}

/** Deterministic pseudo-random numbers, so test fields are the same on every run. */
export const seededRandom = seededUniform;
