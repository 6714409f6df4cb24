/**
 * Interruption: SIGINT or SIGTERM during a long solve ends the run at once with a clear message and leaves no
 * partial result and no temporary file. The solver runs in a worker thread (src/executor/worker.ts), so the
 * main thread is free to answer the signal. The slow solve is Jacobi on 300 x 300 cells with a tolerance it cannot
 * reach for minutes; the run must end well before that.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { testGrid } from '../helpers/model.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
let dir: string;
let scenario: string;
let compareScenario: string;

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-interrupt-'));
  const n = 300;
  writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(testGrid(n, n, 10), new Float64Array(n * n).fill(3)));
  scenario = join(dir, 'slow.json');
  writeFileSync(
    scenario,
    JSON.stringify({
      title: 'slow solve',
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [
        { edge: 'west', head: 20 },
        { edge: 'east', head: 10 },
      ],
      recharge: 0.001,
      solver: { method: 'jacobi', tolerance: 1e-14, maxIterations: 100000000 },
    }),
  );
  // The same slow solve with a pumping variant, for compare (which solves through the same executor).
  compareScenario = join(dir, 'slow-compare.json');
  writeFileSync(
    compareScenario,
    JSON.stringify({
      title: 'slow compare',
      aquifer: { conductivity: 'k.tif', thickness: 10 },
      fixedHeads: [
        { edge: 'west', head: 20 },
        { edge: 'east', head: 10 },
      ],
      recharge: 0.001,
      solver: { method: 'jacobi', tolerance: 1e-14, maxIterations: 100000000 },
      variants: [
        {
          name: 'more-pumping',
          wells: [{ id: 'W1', x: testGrid(n, n, 10).transform[0] + 1505, y: testGrid(n, n, 10).transform[3] - 1505, rate: -500 }],
        },
      ],
    }),
  );
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

async function interruptDuringSolve(signal: 'SIGINT' | 'SIGTERM', out: string, command: 'solve' | 'compare' = 'solve') {
  const file = command === 'solve' ? scenario : compareScenario;
  const child = spawn(process.execPath, [BIN, command, file, '-o', out], { env: { ...process.env, FORCE_COLOR: '0' } });
  let stderr = '';
  child.stderr.on('data', (d) => (stderr += d));
  const exited = new Promise<{ code: number | null; signal: NodeJS.Signals | null }>((r) =>
    child.on('exit', (code, sig) => r({ code, signal: sig })),
  );
  // The output folder is made just before the solve starts; give the solver a moment to be well inside its loop.
  for (let i = 0; i < 600 && !existsSync(out); i++) await sleep(50);
  expect(existsSync(out), 'the run reached the solve').toBe(true);
  await sleep(1000);
  child.kill(signal);
  const sent = performance.now();
  const result = await exited;
  return { ...result, stderr, secondsToExit: (performance.now() - sent) / 1000 };
}

describe('interrupting a solve', () => {
  for (const [signal, code] of [
    ['SIGINT', 130],
    ['SIGTERM', 143],
  ] as const) {
    it(`${signal} ends the run promptly with exit ${code}, a message, and an empty result folder`, async () => {
      const out = join(dir, `out-${signal}`);
      const r = await interruptDuringSolve(signal, out);
      expect(r.code, r.stderr).toBe(code);
      expect(r.stderr).toMatch(new RegExp(`interrupted by ${signal}; no result files were completed, temporary files removed`));
      expect(r.stderr).not.toMatch(/\n\s+at /);
      // An uninterruptible solve would run for minutes (Jacobi, 90 000 cells, tolerance 1e-14).
      expect(r.secondsToExit).toBeLessThan(20);
      expect(readdirSync(out)).toEqual([]);
    }, 120_000);
  }
});

describe('interrupting a comparison', () => {
  // Before compare ran through the executor, SIGTERM waited for the current variant's solve to end (issue 9, item 10).
  for (const [signal, code] of [
    ['SIGINT', 130],
    ['SIGTERM', 143],
  ] as const) {
    it(`${signal} ends compare promptly with exit ${code}, a message, and an empty result folder`, async () => {
      const out = join(dir, `compare-${signal}`);
      const r = await interruptDuringSolve(signal, out, 'compare');
      expect(r.code, r.stderr).toBe(code);
      expect(r.stderr).toMatch(new RegExp(`interrupted by ${signal}; no result files were completed, temporary files removed`));
      expect(r.stderr).not.toMatch(/\n\s+at /);
      expect(r.secondsToExit).toBeLessThan(20);
      expect(readdirSync(out)).toEqual([]);
    }, 120_000);
  }
});
