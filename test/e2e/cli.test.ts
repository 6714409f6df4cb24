/**
 * The command-line contract (../shared/spec/interface.md): exit codes, result files, messages without stack
 * traces, no partial results. Runs the built program (`npm test` builds first) in a child process.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { fromArrayBuffer } from 'geotiff';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { CAUTION } from '../../src/caution.js';
import { testGrid } from '../helpers/model.js';
import { solverSchema } from '../../src/scenario/schema.js';
import { variantTitle } from '../../src/compare/run.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');

function run(args: string[], cwd?: string) {
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', cwd, env: { ...process.env, FORCE_COLOR: '0' } });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

let dir: string;

/** A 30 x 20 aquifer, 100 m cells: west edge fixed at 50 m, east edge at 45 m, one well, two observations. */
function writeScenario(name: string, overrides: Record<string, unknown> = {}, editK?: (k: Float64Array) => void): string {
  const grid = testGrid(30, 20, 100);
  const k = new Float64Array(600).fill(8);
  for (let i = 8; i < 12; i++) for (let j = 14; j < 17; j++) k[i * 30 + j] = NaN; // an inactive outcrop
  editK?.(k);
  writeFileSync(join(dir, `${name}.k.tif`), encodeFloat32GeoTiff(grid, k));
  const scenario = {
    title: 'CLI test aquifer',
    units: { length: 'm', time: 'd' },
    aquifer: { conductivity: `${name}.k.tif`, thickness: 25 },
    fixedHeads: [
      { edge: 'west', head: 50 },
      { edge: 'east', head: 45, name: 'outlet' },
    ],
    recharge: 0.0002,
    wells: [{ id: 'PW-1', x: 501050, y: 4098950, rate: -400 }],
    observations: [{ id: 'OB-1', x: 502050, y: 4099050, head: 48.1 }],
    solver: { method: 'auto', tolerance: 1e-10, maxIterations: 5000 },
    ...overrides,
  };
  const path = join(dir, name);
  writeFileSync(path, JSON.stringify(scenario, null, 2));
  return path;
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-cli-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('piezomap CLI', () => {
  it('prints the version and help with exit 0', () => {
    const pkg = JSON.parse(readFileSync(resolve(__dirname, '../../package.json'), 'utf8'));
    expect(run(['--version'])).toMatchObject({ code: 0, stdout: `${pkg.version}\n` });
    const help = run(['solve', '--help']);
    expect(help.code).toBe(0);
    expect(help.stdout).toMatch(/--method/);
    expect(help.stdout).toMatch(/pcg-ic0/);
  });

  it('exits 2 on usage errors', () => {
    expect(run(['frobnicate']).code).toBe(2);
    expect(run(['solve', 'x.json']).code).toBe(2); // -o missing
    expect(run(['solve', 'x.json', '-o', join(dir, 'o'), '--tolerance', 'abc']).code).toBe(2);
    const bad = run(['solve', writeScenario('m.json'), '-o', join(dir, 'o-method'), '--method', 'magic']);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toMatch(/unknown solver method "magic"/);
  });

  it('refuses a solver option outside its range with exit 2, as the same value in the scenario (issue 9, item 9)', () => {
    // --tolerance 5 used to "converge" in 0 iterations and stop only at the budget check (exit 3).
    const option = run(['solve', writeScenario('tol-option.json'), '-o', join(dir, 'o-tol'), '--tolerance', '5']);
    expect(option.code).toBe(2);
    expect(option.stderr).toMatch(/--tolerance: must be < 1 \(got 5\)/);
    const json = run(['solve', writeScenario('tol-json.json', { solver: { tolerance: 5 } }), '-o', join(dir, 'o-tol-json')]);
    expect(json.code).toBe(2);
    expect(json.stderr).toMatch(/solver\.tolerance: must be < 1 \(got 5\)/);
    expect(existsSync(join(dir, 'o-tol'))).toBe(false);
    const compare = run(['compare', writeScenario('tol-compare.json'), '-o', join(dir, 'o-tol-compare'), '--max-iterations', '0']);
    expect(compare.code).toBe(2);
    expect(compare.stderr).toMatch(/--max-iterations: must be > 0 \(got 0\)/);
  });

  it('solves a scenario: result files, summary fields, budget closure and the caution', () => {
    const out = join(dir, 'result');
    const r = run(['solve', writeScenario('ok.json'), '-o', out]);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    expect(readdirSync(out).sort()).toEqual([
      'budget.csv',
      'convergence.csv',
      'darcy-flux-x.tif',
      'darcy-flux-y.tif',
      'darcy-flux.tif',
      'head-contours.geojson',
      'head-map.png',
      'head.tif',
      'report.html',
      'summary.json',
    ]);
    expect(r.stdout.trimEnd().endsWith(CAUTION)).toBe(true);
    const summary = JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8'));
    expect(summary.grid).toMatchObject({ nx: 30, ny: 20, dx: 100, dy: 100, crs: 'EPSG:32633', activeCells: 588, fixedHeadCells: 40 });
    expect(summary.solver.converged).toBe(true);
    expect(summary.solver.requested).toBe('auto');
    expect(summary.solver.relativeResidual).toBeLessThanOrEqual(1e-10);
    expect(Math.abs(summary.budget.discrepancyPercent)).toBeLessThan(0.01);
    expect(summary.wells[0]).toMatchObject({ id: 'PW-1', row: 10, col: 10 });
    expect(summary.observations[0].id).toBe('OB-1');
    expect(summary.caution).toBe(CAUTION);
    expect([...summary.files].sort()).toEqual(readdirSync(out).sort());
    const csv = readFileSync(join(out, 'budget.csv'), 'utf8').trim().split('\n');
    expect(csv[0]).toBe('term,inflow,outflow');
    expect(csv.map((l) => l.split(',')[0])).toEqual(['term', 'west', 'outlet', 'wells', 'recharge', 'total']);
  });

  it('writes head.tif on the input grid with nodata -9999 on inactive cells', async () => {
    const out = join(dir, 'result-tif');
    expect(run(['solve', writeScenario('tif.json'), '-o', out]).code).toBe(0);
    const bytes = readFileSync(join(out, 'head.tif'));
    const tiff = await fromArrayBuffer(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength));
    const image = await tiff.getImage();
    expect([image.getWidth(), image.getHeight()]).toEqual([30, 20]);
    expect(image.getGDALNoData()).toBe(-9999);
    const [band] = (await image.readRasters()) as unknown as Float32Array[];
    expect(band![9 * 30 + 15]).toBe(-9999);
    expect(band![0]).toBeCloseTo(50, 5);
    expect(band![29]).toBeCloseTo(45, 5);
  });

  it('--json prints the summary as JSON on stdout', () => {
    const r = run([
      'solve',
      writeScenario('json.json'),
      '-o',
      join(dir, 'result-json'),
      '--json',
      '--tolerance',
      '1e-9',
      '--max-iterations',
      '4321',
    ]);
    expect(r.code).toBe(0);
    const summary = JSON.parse(r.stdout);
    // The summary reports the settings that applied: command-line overrides win over the scenario's.
    expect(summary.solver).toMatchObject({ tolerance: 1e-9, maxIterations: 4321 });
    expect(summary.caution).toBe(CAUTION);
    expect(summary.solver.converged).toBe(true);
  });

  it('refuses a folder that already holds results unless --overwrite, and never mixes old and new', () => {
    const out = join(dir, 'result-twice');
    const scenario = writeScenario('twice.json');
    expect(run(['solve', scenario, '-o', out]).code).toBe(0);
    const again = run(['solve', scenario, '-o', out]);
    expect(again.code).toBe(2);
    expect(again.stderr).toMatch(/already holds results/);
    expect(again.stderr).toMatch(/--overwrite/);
    expect(run(['solve', scenario, '-o', out, '--overwrite']).code).toBe(0);
  });

  it('exits 3 when the solver does not reach the tolerance, without presenting a head.tif', () => {
    const out = join(dir, 'result-slow');
    const r = run(['solve', writeScenario('slow.json'), '-o', out, '--method', 'jacobi', '--max-iterations', '20']);
    expect(r.code).toBe(3);
    expect(r.stderr).toMatch(/did not reach the tolerance/);
    expect(r.stderr).not.toMatch(/\n\s+at /);
    expect(existsSync(join(out, 'head.tif'))).toBe(false);
    const summary = JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8'));
    expect(summary.solver.converged).toBe(false);
  });

  it('exits 2 naming the culprit, with no stack trace and no result files, for bad input', () => {
    const cases: Array<[string, RegExp]> = [
      [join(dir, 'missing.json'), /missing\.json/],
      [writeScenario('badkey.json', { recharg: 0.1 }), /recharg/],
      [writeScenario('badwell.json', { wells: [{ id: 'FAR', x: 0, y: 0, rate: -1 }] }), /well "FAR"/],
      [writeScenario('badraster.json', { aquifer: { conductivity: 'nope.tif', thickness: 25 } }), /nope\.tif/],
      [writeScenario('nofixed.json', { fixedHeads: [] }), /fixedHeads.*without a fixed head/],
      // An inactive wall cuts off the east: that region has no fixed head (caught by the assembly).
      [
        writeScenario('floating.json', { fixedHeads: [{ edge: 'west', head: 50 }] }, (k) => {
          for (let i = 0; i < 20; i++) k[i * 30 + 5] = NaN;
        }),
        /no fixed head/,
      ],
    ];
    cases.forEach(([scenario, message], k) => {
      const out = join(dir, `bad-${k}`);
      const r = run(['solve', scenario, '-o', out]);
      expect(r.code, r.stderr).toBe(2);
      expect(r.stderr).toMatch(message);
      expect(r.stderr).not.toMatch(/\n\s+at /);
      expect(r.stderr.trim().split('\n').length).toBeLessThanOrEqual(8);
      const files = existsSync(out) ? readdirSync(out) : [];
      expect(files).toEqual([]);
    });
  });

  it('inspect validates and counts without solving', () => {
    const r = run(['inspect', writeScenario('inspect.json')]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/30 x 20 cells/);
    expect(r.stdout).toMatch(/588 active/);
    expect(r.stdout).toMatch(/PW-1: row 10, col 10/);
    const json = JSON.parse(run(['inspect', writeScenario('inspect2.json'), '--json']).stdout);
    expect(json.cells.fixedHead).toBe(40);
  });

  it('inspect makes the input checks solve makes: the same unit and plausibility warnings, also in --json, with units', () => {
    // Declared in metres per second, a conductivity of 8 lies above the published range (1 m/s, Freeze & Cherry
    // 1979, Table 2.2) and a recharge of 0.0002 m/s (17 m/d) beyond any plausible rate: solve warns of both.
    const path = writeScenario('units.json', {
      units: { length: 'm', time: 's' },
      recharge: 0.0002,
      wells: [{ id: 'PW-1', x: 501050, y: 4098950, rate: -0.004 }],
    });
    const out = join(dir, 'units-out');
    const solved = run(['solve', path, '-o', out, '--json']);
    const solveWarnings = (JSON.parse(solved.stdout) as { warnings: string[] }).warnings;
    const fromInputs = solveWarnings.filter((w) => w.startsWith('aquifer.') || w.startsWith('recharge'));
    expect(fromInputs.some((w) => w.startsWith('aquifer.conductivity'))).toBe(true);
    expect(fromInputs.some((w) => w.startsWith('recharge'))).toBe(true);
    const inspected = JSON.parse(run(['inspect', path, '--json']).stdout) as {
      warnings: string[];
      units: { length: string; time: string };
    };
    for (const w of fromInputs) expect(inspected.warnings).toContain(w);
    for (const w of inspected.warnings) expect(solveWarnings).toContain(w);
    expect(inspected.units).toEqual({ length: 'm', time: 's' });
    const text = run(['inspect', path]).stdout;
    expect(text).toMatch(/Conductivity 8\.000 to 8\.000 m\/s on active cells/);
    expect(text).toMatch(/rate -0\.004 m³\/s/);
    expect(text).toMatch(/cells of 100 x 100 m/);
    for (const w of fromInputs) expect(text).toContain(`warning: ${w}`);
  });

  it('shows -o as required in the help of solve and compare', () => {
    for (const command of ['solve', 'compare'])
      expect(run([command, '--help']).stdout).toMatch(/-o, --out <dir>\s+result folder \(required\)/);
  });

  it('states the default tolerance in the README as the scenario schema has it', () => {
    const fallback = solverSchema.parse({}).tolerance;
    expect(readFileSync(resolve(__dirname, '../../README.md'), 'utf8')).toContain(`default ${fallback}`);
  });

  it('titles a variant without its own title after the baseline, with the trailing "baseline" replaced', () => {
    expect(variantTitle('Talvorin valley wellfield (invented demo), baseline', 'more')).toBe(
      'Talvorin valley wellfield (invented demo), variant more',
    );
    expect(variantTitle('Valley wellfield (baseline)', 'dry-year')).toBe('Valley wellfield, variant dry-year');
    expect(variantTitle('Valley wellfield', 'more')).toBe('Valley wellfield, variant more');
  });

  it('demo replaces its own earlier results in its default folder and refuses another folder holding results, as the README says', () => {
    const cwd = join(dir, 'demo-run');
    mkdirSync(cwd, { recursive: true });
    expect(run(['demo', '--no-maps', '--quiet'], cwd).code).toBe(0);
    expect(run(['demo', '--no-maps', '--quiet'], cwd).code).toBe(0);
    expect(existsSync(join(cwd, 'piezomap-demo', 'summary.json'))).toBe(true);
    expect(run(['demo', '--no-maps', '--quiet', '-o', 'mine'], cwd).code).toBe(0);
    const again = run(['demo', '--no-maps', '--quiet', '-o', 'mine'], cwd);
    expect(again.code).toBe(2);
    expect(again.stderr).toMatch(/--overwrite/);
    const readme = readFileSync(resolve(__dirname, '../../README.md'), 'utf8');
    expect(readme).toContain('rerunning the demo replaces its own earlier results there');
  }, 60_000);
});
