import { existsSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { endRasters } from '../../../src/analysis/tracking/rasters.js';
import { fixedColumn, makeModel, seededRandom, testGrid, well } from '../../helpers/model.js';
import { solveForTracking } from './solved.js';

// The worker script exists only compiled (npm test builds first); from sources the call runs in one thread.
const compiled = new URL('../../../dist/src/analysis/tracking/workers.js', import.meta.url);

describe('endRastersInWorkers', () => {
  it.skipIf(!existsSync(compiled))('gives the same rasters, value for value, as one thread, for any number of workers', async () => {
    const { endRastersInWorkers, trackingWorkersAvailable } = (await import(
      compiled.href
    )) as typeof import('../../../src/analysis/tracking/workers.js');
    expect(trackingWorkersAvailable()).toBe(true);
    const N = 48;
    const grid = testGrid(N, N, 10);
    const rnd = seededRandom(5);
    const conductivity = new Float64Array(N * N);
    for (let p = 0; p < N * N; p++) conductivity[p] = Math.exp(2 * (rnd() - 0.5));
    const model = makeModel(grid, {
      conductivity,
      thickness: 10,
      fixedHeads: [fixedColumn(grid, 0, 20, 'west'), fixedColumn(grid, N - 1, 18, 'east')],
      wells: [well(grid, 'P1', 10, 30, -3), well(grid, 'P2', 35, 20, -2)],
    });
    const solved = solveForTracking(model, 0.3);
    const options = { potential: solved.head, exactCrossings: 4 };
    const one = endRasters(solved.field, options);
    for (const workers of [2, 3]) {
      const many = await endRastersInWorkers(solved.input, options, workers);
      expect(Array.from(many.label)).toEqual(Array.from(one.label));
      expect(Array.from(many.time)).toEqual(Array.from(one.time));
    }
    expect(new Set(one.label).size).toBeGreaterThanOrEqual(3); // both wells and the east boundary capture water
  });
});
