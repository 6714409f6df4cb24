/**
 * `piezomap ensemble` as users run it (../shared/spec/interface.md, section "Ensembles"), on a small aquifer:
 * shards merged equal a one-machine run byte for byte; the same seed gives identical files and another seed other
 * ones; sd = 0 gives every realisation the plain `solve`/`compare` heads; the exceedance probability at a receptor
 * in summary.json is the fraction counted from ensemble.csv; conditioned realisations take the measured K. The
 * scenario has tracking, so the capture-zone probabilities and the PNG maps are among the files compared.
 * The pooled runs use the built program (`npm test` builds first) in a child process.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, relative, resolve } from 'node:path';
import { fromArrayBuffer } from 'geotiff';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { loadScenario } from '../../src/scenario/load.js';
import { resolveVariants } from '../../src/compare/run.js';
import { prepareEnsemble, realisationConductivity } from '../../src/ensemble/realisation.js';
import { parseCsv } from '../../src/scenario/text.js';
import { main } from '../../src/cli/main.js';
import { seededRandom, testGrid } from '../helpers/model.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
const NX = 24;
const NY = 16;
let dir: string;

function run(args: string[]) {
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', env: { ...process.env, FORCE_COLOR: '0' } });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

async function runHere(args: string[]) {
  let stdout = '';
  let stderr = '';
  const code = await main(args, { stdout: (t) => (stdout += t), stderr: (t) => (stderr += t) });
  return { code, stdout, stderr };
}

const centre = (row: number, col: number) => ({ x: 500000 + (col + 0.5) * 100, y: 4100000 - (row + 0.5) * 100 });

function writeScenario(name: string, ensemble: Record<string, unknown>): string {
  const path = join(dir, name);
  writeFileSync(
    path,
    JSON.stringify({
      title: 'ensemble test aquifer',
      aquifer: { conductivity: 'k.tif', thickness: 20, porosity: 0.2 },
      fixedHeads: [
        { edge: 'west', head: 50, name: 'river' },
        { edge: 'east', head: 47, name: 'outlet' },
      ],
      recharge: 0.0002,
      wells: [{ id: 'PW-1', ...centre(8, 8), rate: -300 }],
      observations: [{ id: 'OB-1', ...centre(4, 12), head: 49 }],
      receptors: [{ id: 'R-1', ...centre(9, 12) }],
      solver: { method: 'auto', tolerance: 1e-10 },
      tracking: { captureTimes: [3000, 20000] },
      variants: [{ name: 'more', wells: [{ id: 'PW-2', ...centre(10, 14), rate: -400 }] }],
      ensemble,
    }),
  );
  return path;
}

const ensembleKey = (extra: Record<string, unknown> = {}) => ({
  realisations: 10,
  seed: 3,
  logConductivity: { sd: 0.7, correlationLength: [500, 300], model: 'exponential' },
  drawdownThresholds: [1, 1.5],
  percentiles: [10, 50, 90],
  ...extra,
});

function filesBelow(root: string): string[] {
  const out: string[] = [];
  const walk = (d: string) => {
    for (const e of readdirSync(d)) {
      const p = join(d, e);
      if (statSync(p).isDirectory()) walk(p);
      else out.push(relative(root, p));
    }
  };
  walk(root);
  return out.sort();
}

async function readTif(path: string): Promise<Float32Array> {
  const bytes = readFileSync(path);
  const tiff = await fromArrayBuffer(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength));
  return (await (await tiff.getImage()).readRasters({ interleave: true })) as unknown as Float32Array;
}

const withoutRun = (path: string) => {
  const s = JSON.parse(readFileSync(path, 'utf8'));
  delete s.run;
  return s;
};

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-ensemble-'));
  const grid = testGrid(NX, NY, 100);
  const random = seededRandom(5);
  const k = new Float64Array(NX * NY);
  for (let p = 0; p < k.length; p++) k[p] = 6 * Math.exp(random() - 0.5);
  writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(grid, k));
});

afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('piezomap ensemble', () => {
  it('shards merged equal a one-machine run byte for byte (summary.json apart from its run section)', () => {
    const scenario = writeScenario('ens.json', ensembleKey());
    const one = join(dir, 'one');
    const r = run(['ensemble', scenario, '-o', one, '--workers', '2']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    const shards = [1, 2, 3].map((k) => {
      const out = join(dir, `shard-${k}`);
      const s = run(['ensemble', scenario, '-o', out, '--shard', `${k}/3`, '--workers', '1']);
      expect(s.code, s.stderr).toBe(0);
      return out;
    });
    const merged = join(dir, 'merged');
    // Shards given out of order: the merge orders them.
    const m = run(['ensemble', 'merge', shards[2]!, shards[0]!, shards[1]!, '-o', merged]);
    expect(m.code, m.stderr).toBe(0);
    const files = filesBelow(one).filter((f) => !f.startsWith('.'));
    expect(filesBelow(merged).filter((f) => !f.startsWith('.'))).toEqual(files);
    expect(files).toContain('more/drawdown-exceedance-1.5.tif');
    expect(files).toContain('baseline/head-p90.tif');
    // Capture-zone probability per well and zone, and the maps, are among the identical files.
    expect(files).toContain('baseline/capture-probability-PW-1-3000.tif');
    expect(files).toContain('more/capture-probability-PW-2-steady.tif');
    expect(files).toContain('more/capture-probability-PW-2-steady-map.png');
    expect(files).toContain('more/drawdown-exceedance-1.5-map.png');
    expect(files).toContain('baseline/head-sd-map.png');
    for (const f of files) {
      if (f === 'summary.json') continue;
      expect(Buffer.compare(readFileSync(join(one, f)), readFileSync(join(merged, f))), f).toBe(0);
    }
    expect(withoutRun(join(merged, 'summary.json'))).toEqual(withoutRun(join(one, 'summary.json')));
    // The report: a histogram at the receptor, and the caution.
    const report = readFileSync(join(one, 'report.html'), 'utf8');
    expect(report).toMatch(/aria-label="histogram of drawdown at R-1"/);
    expect(report).toContain('qualified hydrogeologist');
    // A missing shard is refused (exit 2), naming it.
    const partial = run(['ensemble', 'merge', shards[0]!, shards[1]!, '-o', join(dir, 'partial')]);
    expect(partial.code).toBe(2);
    expect(partial.stderr).toMatch(/shard\(s\) 3\/3 missing/);
  });

  it('exceedance probability at a receptor equals the fraction counted from ensemble.csv', () => {
    const one = join(dir, 'one');
    const rows = parseCsv(readFileSync(join(one, 'ensemble.csv'), 'utf8'));
    const header = rows[0]!.fields;
    const col = header.indexOf('R-1');
    const byRealisation = new Map<string, { baseline?: number; more?: number }>();
    for (const row of rows.slice(1)) {
      const [realisation, runName, converged] = row.fields;
      expect(converged).toBe('true');
      const entry = byRealisation.get(realisation!) ?? {};
      entry[runName as 'baseline' | 'more'] = Number(row.fields[col]);
      byRealisation.set(realisation!, entry);
    }
    expect(byRealisation.size).toBe(10);
    const drawdowns = [...byRealisation.values()].map((e) => e.baseline! - e.more!);
    const summary = JSON.parse(readFileSync(join(one, 'summary.json'), 'utf8'));
    const receptor = summary.runs[1].drawdownAtPoints.find((p: { id: string }) => p.id === 'R-1');
    for (const { threshold, probability } of receptor.exceedance) {
      const fraction = drawdowns.filter((s) => s > threshold).length / drawdowns.length;
      expect(probability).toBe(fraction);
    }
    // The thresholds were chosen to split this ensemble: not all 0 or all 1.
    expect(
      receptor.exceedance.some((e: { probability: number }) => e.probability > 0 && e.probability < 1),
      drawdowns.join(' '),
    ).toBe(true);
  });

  it('the same seed gives identical files, another seed other ones', () => {
    const a = join(dir, 'seed-a');
    const b = join(dir, 'seed-b');
    expect(run(['ensemble', join(dir, 'ens.json'), '-o', a, '--workers', '1']).code).toBe(0);
    for (const f of ['ensemble.csv', 'baseline/head-mean.tif', 'more/drawdown-p50.tif']) {
      expect(Buffer.compare(readFileSync(join(dir, 'one', f)), readFileSync(join(a, f))), f).toBe(0);
    }
    const other = writeScenario('ens-seed4.json', ensembleKey({ seed: 4 }));
    expect(run(['ensemble', other, '-o', b, '--workers', '2']).code).toBe(0);
    expect(readFileSync(join(b, 'ensemble.csv'), 'utf8')).not.toBe(readFileSync(join(a, 'ensemble.csv'), 'utf8'));
  });

  it('sd = 0: every realisation is the plain solve (head) and compare (drawdown)', async () => {
    const scenario = writeScenario('sd0.json', ensembleKey({ realisations: 3, logConductivity: { sd: 0, correlationLength: 300 } }));
    const ens = join(dir, 'sd0');
    const cmp = join(dir, 'sd0-compare');
    expect((await runHere(['ensemble', scenario, '-o', ens, '--quiet'])).code).toBe(0);
    expect((await runHere(['compare', scenario, '-o', cmp, '--no-maps', '--quiet'])).code).toBe(0);
    const head = await readTif(join(cmp, 'baseline/head.tif'));
    const drawdown = await readTif(join(cmp, 'more/drawdown.tif'));
    expect(Array.from(await readTif(join(ens, 'baseline/head-p50.tif')))).toEqual(Array.from(head));
    expect(Array.from(await readTif(join(ens, 'more/drawdown-p50.tif')))).toEqual(Array.from(drawdown));
    expect(Array.from(await readTif(join(ens, 'baseline/head-sd.tif'))).every((v) => v === 0)).toBe(true);
    const rows = parseCsv(readFileSync(join(ens, 'ensemble.csv'), 'utf8')).slice(1);
    const baselineRows = rows.filter((r) => r.fields[1] === 'baseline').map((r) => r.fields.slice(3).join(','));
    expect(new Set(baselineRows).size).toBe(1);
  });

  it('conditioned realisations take the measured K at its cell', async () => {
    writeFileSync(
      join(dir, 'k_measured.csv'),
      `id,x,y,k\nM1,${centre(5, 5).x},${centre(5, 5).y},12.5\nM2,${centre(12, 18).x},${centre(12, 18).y},2.25\n`,
    );
    const scenario = writeScenario('cond.json', ensembleKey({ conditioning: 'k_measured.csv' }));
    const { model, raw } = await loadScenario(scenario);
    const ctx = prepareEnsemble(model, await resolveVariants(model, raw));
    for (let i = 0; i < 5; i++) {
      const k = realisationConductivity(ctx, i);
      expect(k[5 * NX + 5]).toBe(12.5);
      expect(k[12 * NX + 18]).toBe(2.25);
      expect(k[5 * NX + 6]).not.toBe(model.conductivity[5 * NX + 6]);
    }
  });

  it('realisations that do not converge are listed and left out; none converged is exit 3', async () => {
    const out = join(dir, 'capped');
    const r = await runHere(['ensemble', join(dir, 'ens.json'), '-o', out, '--max-iterations', '1', '--method', 'jacobi', '--quiet']);
    expect(r.code).toBe(3);
    const summary = JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8'));
    expect(summary.runs[0].converged).toBe(0);
    expect(summary.runs[0].notConverged).toHaveLength(10);
    expect(summary.runs[0].notConverged[0].realisation).toBe(0);
  });

  it('Ctrl-C during the realisations leaves no result file and no lock (exit 130)', async () => {
    // As for solve (../shared/spec/interface.md: a failed command leaves no partial result file).
    const scenario = writeScenario('long.json', ensembleKey({ realisations: 2000 }));
    const out = join(dir, 'interrupted');
    const child = spawn(process.execPath, [BIN, 'ensemble', scenario, '-o', out, '--workers', '2'], { stdio: ['ignore', 'pipe', 'pipe'] });
    let stderr = '';
    child.stderr.on('data', (d) => (stderr += d));
    const exited = new Promise<number | null>((r) => child.on('exit', (code) => r(code)));
    // Wait until the result folder is locked (the run has begun), then a little into the realisations.
    for (let i = 0; i < 400 && !existsSync(join(out, '.piezomap-lock')); i++) await new Promise((r) => setTimeout(r, 50));
    expect(existsSync(join(out, '.piezomap-lock'))).toBe(true);
    await new Promise((r) => setTimeout(r, 1500));
    child.kill('SIGINT');
    expect(await exited).toBe(130);
    expect(stderr).toMatch(/interrupted by SIGINT/);
    expect(readdirSync(out)).toEqual([]);
  });
});
