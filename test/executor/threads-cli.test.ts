/**
 * The thread count from the command line and the scenario, through the worker executor (the solve worker starts the
 * thread team): `--threads` and `solver.threads` are honoured and recorded in summary.json, refused alike when
 * invalid (exit 2, naming the key), and SIGINT during a solve shared by a team ends the run at once (exit 130).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { testGrid } from '../helpers/model.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
let dir: string;

/** A scenario on an n x n raster of smoothly varying K (0.5..50 m/d), fixed heads west and east, recharge. */
function writeScenario(n: number, name: string, solver: Record<string, unknown> = {}): string {
  const k = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) k[i * n + j] = 5 * 10 ** Math.sin((i * 7 + j * 3) / n);
  }
  writeFileSync(join(dir, `${name}.tif`), encodeFloat32GeoTiff(testGrid(n, n, 10), k));
  const file = join(dir, `${name}.json`);
  writeFileSync(
    file,
    JSON.stringify({
      title: name,
      aquifer: { conductivity: `${name}.tif`, thickness: 10 },
      fixedHeads: [
        { edge: 'west', head: 20 },
        { edge: 'east', head: 10 },
      ],
      recharge: 0.001,
      solver: { tolerance: 1e-10, ...solver },
    }),
  );
  return file;
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-threads-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function run(args: string[]) {
  return spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', env: { ...process.env, FORCE_COLOR: '0' } });
}

function solverNotes(out: string): string {
  const summary = JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8')) as { solver: { notes: string[] } };
  return summary.solver.notes.join('; ');
}

describe('thread count of a solve', () => {
  it('--threads and solver.threads are used and recorded in summary.json; the heads agree within the tolerance', () => {
    // 600 x 600 = 360 000 cells: above the size from which levels are shared (PARALLEL_MIN_CELLS)
    const scenario = writeScenario(600, 'mid', { threads: 2 });
    const two = join(dir, 'two');
    const one = join(dir, 'one');
    const a = run(['solve', scenario, '-o', two, '--no-maps', '--quiet']);
    expect(a.status, a.stderr).toBe(0);
    expect(solverNotes(two)).toContain('threads: 2');
    const b = run(['solve', scenario, '-o', one, '--no-maps', '--quiet', '--threads', '1']);
    expect(b.status, b.stderr).toBe(0);
    expect(solverNotes(one)).toContain('threads: 1');
    const s1 = JSON.parse(readFileSync(join(one, 'summary.json'), 'utf8')) as { solver: { iterations: number; converged: boolean } };
    const s2 = JSON.parse(readFileSync(join(two, 'summary.json'), 'utf8')) as { solver: { iterations: number; converged: boolean } };
    expect(s1.solver.converged && s2.solver.converged).toBe(true);
    expect(Math.abs(s2.solver.iterations - s1.solver.iterations)).toBeLessThanOrEqual(2);
  }, 120_000);

  it('refuses a thread count that is not a whole number >= 1 or "auto", alike on the command line and in the scenario', () => {
    const scenario = writeScenario(20, 'tiny');
    for (const bad of ['0', '1.5', 'many']) {
      const r = run(['solve', scenario, '-o', join(dir, 'bad'), '--threads', bad]);
      expect(r.status, r.stderr).toBe(2);
      expect(r.stderr).toMatch(/--threads/);
      expect(r.stderr).not.toMatch(/\n\s+at /);
      if (bad === 'many') expect(r.stderr).toMatch(/expected a whole number or "auto", got "many"/);
    }
    const inJson = writeScenario(20, 'tiny-bad', { threads: 0 });
    const r = run(['solve', inJson, '-o', join(dir, 'bad2')]);
    expect(r.status, r.stderr).toBe(2);
    expect(r.stderr).toMatch(/solver\.threads|threads/);
    const auto = run(['solve', scenario, '-o', join(dir, 'auto'), '--threads', 'auto', '--no-maps', '--quiet']);
    expect(auto.status, auto.stderr).toBe(0);
    // 400 cells: below the break-even size, auto solves on one thread
    expect(solverNotes(join(dir, 'auto'))).toContain('threads: 1');
  }, 120_000);

  it('SIGINT during a solve shared by two threads ends the run promptly with exit 130 and no result files', async () => {
    const scenario = writeScenario(1500, 'big');
    const out = join(dir, 'interrupted');
    const child = spawn(process.execPath, [BIN, 'solve', scenario, '-o', out, '--threads', '2'], {
      env: { ...process.env, FORCE_COLOR: '0' },
    });
    let stderr = '';
    child.stderr.on('data', (d) => (stderr += d));
    const exited = new Promise<number | null>((r) => child.on('exit', (code) => r(code)));
    // the output folder is made just before the solve starts (2.25 M cells: a few seconds of solving)
    for (let i = 0; i < 1200 && !existsSync(out); i++) await new Promise((r) => setTimeout(r, 50));
    expect(existsSync(out), 'the run reached the solve').toBe(true);
    await new Promise((r) => setTimeout(r, 300));
    child.kill('SIGINT');
    const sent = performance.now();
    const code = await exited;
    expect(code, stderr).toBe(130);
    expect(stderr).toMatch(/interrupted by SIGINT/);
    // a liveness bound, not a speed test: an ignored signal would let the solve and the writing run to their end
    expect((performance.now() - sent) / 1000).toBeLessThan(20);
    expect(readdirSync(out)).toEqual([]);
  }, 180_000);
});
