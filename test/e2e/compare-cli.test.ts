/**
 * `piezomap compare` as users run it (../shared/spec/interface.md): result folders, drawdown rasters, comparison.csv,
 * summary.json and the printed table agree with each other; exit codes; no misleading files for a failed variant.
 * The main case runs the built program (`npm test` builds first) in a child process; the failure cases call the
 * same CLI entry point in this process.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { fromArrayBuffer } from 'geotiff';
import proj4 from 'proj4';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { CAUTION } from '../../src/caution.js';
import { testGrid } from '../helpers/model.js';
import { main } from '../../src/cli/main.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
const NX = 30;
const NY = 20;

/** The built program in a child process, as users run it. */
function run(args: string[]) {
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', env: { ...process.env, FORCE_COLOR: '0' } });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

/** The same CLI in this process (no start-up cost), for the cases that need no second look at the binary. */
async function runHere(args: string[]) {
  let stdout = '';
  let stderr = '';
  const code = await main(args, { stdout: (t) => (stdout += t), stderr: (t) => (stderr += t) });
  return { code, stdout, stderr };
}

let dir: string;

/** Cell centre in the test grid's map coordinates (x0 = 500000, y0 = 4100000, 100 m cells, north-up). */
const centre = (row: number, col: number) => ({ x: 500000 + (col + 0.5) * 100, y: 4100000 - (row + 0.5) * 100 });

/** 30 x 20 cells of 100 m: river west (50 m), outlet east (45 m), one baseline well, two observations, two receptors. */
function writeScenario(name: string, variants: unknown[], extra: Record<string, unknown> = {}): string {
  const grid = testGrid(NX, NY, 100);
  writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(grid, new Float64Array(NX * NY).fill(8)));
  // Receptor R-2 given in WGS 84 lon/lat, converted here with proj4 from the cell centre (row 15, col 20).
  const r2 = centre(15, 20);
  const [lon, lat] = proj4('EPSG:32633', 'EPSG:4326', [r2.x, r2.y]);
  const scenario = {
    title: 'compare test aquifer',
    aquifer: { conductivity: 'k.tif', thickness: 25 },
    fixedHeads: [
      { edge: 'west', head: 50, name: 'river' },
      { edge: 'east', head: 45, name: 'outlet' },
    ],
    recharge: 0.0002,
    wells: [{ id: 'PW-1', ...centre(10, 10), rate: -400 }],
    observations: [
      { id: 'OB-1', ...centre(10, 14), head: 48.1 },
      { id: 'OB-2', ...centre(4, 22), head: 46.9 },
    ],
    receptors: [
      { id: 'R-1', ...centre(12, 16) },
      { id: 'R-2', x: lon, y: lat, crs: 'EPSG:4326' },
    ],
    solver: { method: 'auto', tolerance: 1e-10 },
    variants,
    ...extra,
  };
  const path = join(dir, name);
  writeFileSync(path, JSON.stringify(scenario, null, 2));
  return path;
}

async function readTif(path: string): Promise<Float32Array> {
  const bytes = readFileSync(path);
  const tiff = await fromArrayBuffer(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength));
  const image = await tiff.getImage();
  const [band] = (await image.readRasters()) as unknown as Float32Array[];
  return band!;
}

function parseCsv(text: string): Array<Record<string, string>> {
  const [header, ...rows] = text
    .trim()
    .split('\n')
    .map((l) => l.split(','));
  return rows.map((r) => Object.fromEntries(header!.map((h, i) => [h, r[i]!])));
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-compare-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('piezomap compare', () => {
  it('writes every folder, drawdown rasters, comparison.csv and summary.json that agree with the printed table', async () => {
    const scenario = writeScenario('plans.json', [
      {
        name: 'more',
        wells: [
          { id: 'PW-1', rate: -600 },
          { id: 'PW-2', ...centre(6, 18), rate: -300, radius: 0.2 },
        ],
      },
      { name: 'thin', aquifer: { conductivity: 'k.tif', thickness: 15 } },
    ]);
    const out = join(dir, 'out');
    const r = run(['compare', scenario, '-o', out]);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    expect(readdirSync(out).sort()).toEqual(['baseline', 'comparison.csv', 'more', 'report.html', 'summary.json', 'thin']);
    expect(readdirSync(join(out, 'more'))).toEqual(
      expect.arrayContaining(['drawdown.tif', 'drawdown-contours.geojson', 'drawdown-map.png', 'report.html']),
    );
    expect(existsSync(join(out, 'baseline', 'drawdown.tif'))).toBe(false);
    for (const folder of ['baseline', 'more', 'thin']) {
      for (const file of ['head.tif', 'budget.csv', 'summary.json']) expect(existsSync(join(out, folder, file))).toBe(true);
    }

    const base = await readTif(join(out, 'baseline', 'head.tif'));
    const rows = parseCsv(readFileSync(join(out, 'comparison.csv'), 'utf8'));
    expect(rows.map((row) => [row.variant, row.status, row.shared_operator])).toEqual([
      ['more', 'ok', 'yes'],
      ['thin', 'ok', 'no'],
    ]);
    const summary = JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8'));
    expect(summary.caution).toBe(CAUTION);
    for (const [k, name] of ['more', 'thin'].entries()) {
      const head = await readTif(join(out, name, 'head.tif'));
      const drawdown = await readTif(join(out, name, 'drawdown.tif'));
      // drawdown.tif = baseline head.tif - variant head.tif (Float32 rounding of heads near 50 m: ~4e-6).
      let max = -Infinity;
      for (let p = 0; p < drawdown.length; p++) {
        expect(Math.abs(drawdown[p]! - (base[p]! - head[p]!))).toBeLessThan(1e-5);
        max = Math.max(max, drawdown[p]!);
      }
      const row = rows[k]!;
      expect(Number(row.max_drawdown)).toBeCloseTo(max, 5);
      // Points at cell centres: the csv value is the raster's value in that cell.
      expect(Number(row['drawdown_obs_OB-1'])).toBeCloseTo(drawdown[10 * NX + 14]!, 5);
      expect(Number(row['drawdown_obs_OB-2'])).toBeCloseTo(drawdown[4 * NX + 22]!, 5);
      expect(Number(row['drawdown_receptor_R-1'])).toBeCloseTo(drawdown[12 * NX + 16]!, 5);
      expect(Number(row['drawdown_receptor_R-2'])).toBeCloseTo(drawdown[15 * NX + 20]!, 4);
      // The printed table shows the same maximum (3 decimals) on the variant's row.
      const line = r.stdout.split('\n').find((l) => l.trim().startsWith(`${name} `) && l.includes(max.toFixed(3)));
      expect(line, `table row for ${name}`).toBeDefined();
      expect(summary.variants[k].maxDrawdown.value).toBeCloseTo(max, 5);
      // Sources of the added pumping sum to 100 % within the discrepancy.
      if (name === 'more') expect(Number(row.source_total_percent)).toBeCloseTo(100, 4);
    }
    expect(rows[0]!.well_withdrawal).toBe('900');
    expect(rows[0]!.added_pumping).toBe('500');
    // Thinner aquifer, same wells: more drawdown but no added pumping, so no fractions.
    expect(Number(rows[1]!.max_drawdown)).toBeGreaterThan(0);
    expect(rows[1]!.source_total_percent).toBe('');
    expect(summary.variants[0].wells.find((w: { id: string }) => w.id === 'PW-2').wellboreDrawdown).toBeGreaterThan(0);
    const variantSummary = JSON.parse(readFileSync(join(out, 'more', 'summary.json'), 'utf8'));
    expect(variantSummary.wells.map((w: { id: string; radius: number }) => [w.id, w.radius])).toEqual([
      ['PW-1', 0.1],
      ['PW-2', 0.2],
    ]);
    expect(variantSummary.calibration.count).toBe(2);
    expect(r.stdout.trimEnd().endsWith(CAUTION)).toBe(true);
    const report = readFileSync(join(out, 'report.html'), 'utf8');
    expect(report).toMatch(/Scenario comparison/);
    expect(report).toMatch(/Variant more/);
    expect(report).toContain(CAUTION);

    // Existing results are refused without --overwrite, replaced with it.
    const again = run(['compare', scenario, '-o', out]);
    expect(again.code).toBe(2);
    expect(again.stderr).toMatch(/already holds results/);
    const json = run(['compare', scenario, '-o', out, '--overwrite', '--json', '--no-maps']);
    // The overwrite removed the earlier run's maps: old and new results never mix.
    expect(existsSync(join(out, 'more', 'drawdown-map.png'))).toBe(false);
    expect(existsSync(join(out, 'report.html'))).toBe(false);
    expect(json.code).toBe(0);
    expect(JSON.parse(json.stdout).variants.map((v: { name: string }) => v.name)).toEqual(['more', 'thin']);
  });

  it('exits 3 when a variant does not converge and writes no drawdown or head.tif for it', async () => {
    const scenario = writeScenario('slow.json', [
      { name: 'fine', wells: [{ id: 'PW-1', rate: -500 }] },
      { name: 'stuck', wells: [{ id: 'PW-1', rate: -500 }], solver: { method: 'jacobi', maxIterations: 3 } },
    ]);
    const out = join(dir, 'slow');
    const r = await runHere(['compare', scenario, '-o', out, '--no-maps']);
    expect(r.code).toBe(3);
    expect(r.stderr).toMatch(/variant "stuck": solver jacobi did not reach the tolerance/);
    expect(existsSync(join(out, 'fine', 'drawdown.tif'))).toBe(true);
    expect(existsSync(join(out, 'stuck', 'drawdown.tif'))).toBe(false);
    expect(existsSync(join(out, 'stuck', 'head.tif'))).toBe(false);
    const rows = parseCsv(readFileSync(join(out, 'comparison.csv'), 'utf8'));
    expect(rows[1]).toMatchObject({ variant: 'stuck', status: 'not-converged', max_drawdown: '', 'drawdown_obs_OB-1': '' });
  });

  it('exits 3 without solving the variants when the baseline does not converge', async () => {
    const scenario = writeScenario('stuck-base.json', [{ name: 'v', wells: [{ id: 'PW-1', rate: -500 }] }], {
      solver: { method: 'jacobi', maxIterations: 3 },
    });
    const out = join(dir, 'stuck-base');
    const r = await runHere(['compare', scenario, '-o', out, '--no-maps']);
    expect(r.code).toBe(3);
    expect(r.stderr).toMatch(/solver jacobi did not reach the tolerance/);
    expect(existsSync(join(out, 'baseline', 'head.tif'))).toBe(false);
    expect(existsSync(join(out, 'v'))).toBe(false);
    expect(readFileSync(join(out, 'comparison.csv'), 'utf8').trim().split('\n')).toHaveLength(1);
  });

  it('inspect checks the variants as compare would, without solving', async () => {
    const ok = await runHere([
      'inspect',
      writeScenario('inspect.json', [
        { name: 'more', wells: [{ id: 'PW-1', rate: -600 }] },
        { name: 'thin', aquifer: { conductivity: 'k.tif', thickness: 15 } },
      ]),
    ]);
    expect(ok.code).toBe(0);
    expect(ok.stdout).toMatch(/Receptors +2/);
    expect(ok.stdout).toMatch(/Variant +more: 1 well\(s\); same aquifer, fixed heads and solver/);
    expect(ok.stdout).toMatch(/Variant +thin: 1 well\(s\); solved afresh: aquifer\.thickness differs/);
    const bad = await runHere([
      'inspect',
      writeScenario('inspect-bad.json', [{ name: 'far', wells: [{ id: 'PW-9', x: 10, y: 10, rate: -5 }] }]),
    ]);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toMatch(/well "PW-9" \(variants "far"\.wells\[0\]\) at x=10, y=10 lies outside the grid/);
  });

  it('exits 2 for a scenario without variants and for a receptor outside the grid', async () => {
    const none = await runHere(['compare', writeScenario('none.json', []), '-o', join(dir, 'none'), '--no-maps']);
    expect(none.code).toBe(2);
    expect(none.stderr).toMatch(/no "variants"/);
    const far = await runHere([
      'compare',
      writeScenario('far.json', [{ name: 'v', recharge: 0.0003 }], { receptors: [{ id: 'spring-9', x: 10, y: 10 }] }),
      '-o',
      join(dir, 'far'),
      '--no-maps',
    ]);
    expect(far.code).toBe(2);
    expect(far.stderr).toMatch(/receptor "spring-9" \(receptors\[0\]\).*outside the grid/);
    expect(far.stderr).not.toMatch(/\n\s+at /);
    expect(existsSync(join(dir, 'far', 'summary.json'))).toBe(false);
  });
});
