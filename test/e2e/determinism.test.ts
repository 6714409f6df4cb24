/**
 * Determinism: the same inputs give byte-identical result files run after run, and the solve in a worker thread
 * (the CLI) gives the same bytes as the solve in the calling thread (the library). summary.json and report.html
 * differ only in wall-clock timings and peak memory: solver.setupSeconds, solver.seconds, solver.peakMemoryMiB and
 * timings.* in summary.json, and the "… s" cells of the report's timing table.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { loadScenario } from '../../src/scenario/load.js';
import { solveModel } from '../../src/pipeline.js';
import { resultBundle } from '../../src/output/solveFiles.js';
import { comparisonFiles } from '../../src/output/comparisonFiles.js';
import { compareScenario } from '../../src/compare/run.js';
import { baseScenario, centre } from '../../scripts/make-bad-inputs.js';
import { seededRandom, testGrid } from '../helpers/model.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
let dir: string;
let scenario: string;

/** Fields of summary.json that hold wall-clock measurements. */
const TIMING_FIELDS = ['solver.setupSeconds', 'solver.seconds', 'solver.peakMemoryMiB', 'timings'];

function withoutTimings(summary: Record<string, unknown>): Record<string, unknown> {
  const copy = structuredClone(summary);
  for (const field of TIMING_FIELDS) {
    const [a, b] = field.split('.') as [string, string | undefined];
    if (b === undefined) delete copy[a];
    else delete (copy[a] as Record<string, unknown> | undefined)?.[b];
  }
  return copy;
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-determinism-'));
  // 12 x 8 base grid with a patchy conductivity field (fixed seed) so the solve takes some iterations.
  const grid = testGrid(12, 8, 100);
  const random = seededRandom(99);
  const k = new Float64Array(96).map(() => 10 ** (random() * 2 - 0.5));
  k[3 * 12 + 5] = Number.NaN;
  writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(grid, k));
  scenario = join(dir, 'scenario.json');
  writeFileSync(scenario, JSON.stringify({ ...baseScenario(), observations: [{ id: 'OB1', ...centre(6, 8), head: 47 }] }));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function solveCli(out: string, method: string): void {
  const r = spawnSync(process.execPath, [BIN, 'solve', scenario, '-o', out, '--method', method, '--quiet'], { encoding: 'utf8' });
  expect(r.status, r.stderr).toBe(0);
}

describe('determinism', () => {
  for (const method of ['auto', 'sor']) {
    it(`two runs with ${method} give byte-identical files (summary and report apart from timings)`, () => {
      const a = join(dir, `a-${method}`);
      const b = join(dir, `b-${method}`);
      solveCli(a, method);
      solveCli(b, method);
      const files = readdirSync(a).sort();
      expect(readdirSync(b).sort()).toEqual(files);
      expect(files).toEqual(expect.arrayContaining(['head.tif', 'budget.csv', 'convergence.csv', 'summary.json']));
      for (const name of files) {
        const x = readFileSync(join(a, name));
        const y = readFileSync(join(b, name));
        if (name === 'summary.json') {
          expect(withoutTimings(JSON.parse(y.toString()))).toEqual(withoutTimings(JSON.parse(x.toString())));
        } else if (name === 'report.html') {
          const strip = (t: string) => t.replace(/<td>[0-9.e+-]+ s<\/td>/g, '<td>T</td>');
          expect(strip(y.toString())).toBe(strip(x.toString()));
        } else {
          expect(Buffer.compare(x, y), name).toBe(0);
        }
      }
    }, 60_000);
  }

  it('the worker-thread solve of the CLI gives the same head.tif, budget.csv and convergence.csv as the library in-thread', async () => {
    const out = join(dir, 'cli-auto');
    solveCli(out, 'auto');
    const { model } = await loadScenario(scenario);
    const result = solveModel(model);
    const { files } = resultBundle(result, '', { maps: false });
    for (const name of ['head.tif', 'budget.csv', 'convergence.csv']) {
      const mine = files.find((f) => f.name === name)!;
      expect(Buffer.compare(Buffer.from(mine.bytes), readFileSync(join(out, name))), name).toBe(0);
    }
  }, 60_000);

  it('compare through the worker-thread executor gives the same files as the library comparison in-thread', async () => {
    const withVariant = join(dir, 'compare.json');
    writeFileSync(
      withVariant,
      JSON.stringify({
        ...baseScenario(),
        variants: [
          { name: 'more', wells: [{ id: 'W9', ...centre(3, 2), rate: -40 }] },
          { name: 'wetter', recharge: 0.0005 },
        ],
      }),
    );
    const out = join(dir, 'cli-compare');
    const r = spawnSync(process.execPath, [BIN, 'compare', withVariant, '-o', out, '--quiet', '--no-maps'], { encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    const { files } = comparisonFiles(await compareScenario(withVariant), { maps: false });
    for (const name of [
      'baseline/head.tif',
      'baseline/budget.csv',
      'more/head.tif',
      'more/drawdown.tif',
      'more/budget.csv',
      'wetter/head.tif',
      'wetter/drawdown.tif',
      'comparison.csv',
    ]) {
      const mine = files.find((f) => f.name === name);
      expect(mine, name).toBeDefined();
      expect(Buffer.compare(Buffer.from(mine!.bytes), readFileSync(join(out, name))), name).toBe(0);
    }
  }, 60_000);
});
