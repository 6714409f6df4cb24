/**
 * The corpus of malformed inputs (scripts/make-bad-inputs.ts) through the built command line: each case must end
 * with the exit status of the contract (../shared/spec/interface.md: 2 bad input, 3 solver), a short message naming
 * the culprit, no stack trace, and no result or temporary file left behind.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { writeBadInputs, type BadInputCase } from '../scripts/make-bad-inputs.js';

const BIN = resolve(__dirname, '../bin/piezomap.js');
const dir = mkdtempSync(join(tmpdir(), 'piezomap-bad-'));
const cases = writeBadInputs(dir);

interface Outcome {
  code: number | null;
  stdout: string;
  stderr: string;
}

function run(c: BadInputCase): Promise<Outcome> {
  return new Promise((done) => {
    const child = spawn(process.execPath, [BIN, ...c.args], { env: { ...process.env, FORCE_COLOR: '0', ...c.env } });
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d) => (stdout += d));
    child.stderr.on('data', (d) => (stderr += d));
    child.on('close', (code) => done({ code, stdout, stderr }));
  });
}

const outcomes = new Map<string, Outcome>();

beforeAll(async () => {
  // Two at a time: the machine has two cores.
  const queue = [...cases];
  const worker = async () => {
    for (let c = queue.shift(); c; c = queue.shift()) outcomes.set(c.name, await run(c));
  };
  await Promise.all([worker(), worker()]);
}, 600_000);

afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** Every file below a folder, relative names, hidden ones included. */
function filesBelow(folder: string): string[] {
  if (!existsSync(folder) || !statSync(folder).isDirectory()) return [];
  return readdirSync(folder, { recursive: true, withFileTypes: true })
    .filter((e) => e.isFile())
    .map((e) => join(e.parentPath, e.name).slice(folder.length + 1))
    .sort();
}

describe('malformed inputs through the command line', () => {
  it('the corpus holds at least 30 cases with distinct names', () => {
    expect(cases.length).toBeGreaterThanOrEqual(30);
    expect(new Set(cases.map((c) => c.name)).size).toBe(cases.length);
  });

  for (const c of cases) {
    it(`${c.name}: ${c.what} -> exit ${c.code}`, () => {
      const r = outcomes.get(c.name)!;
      expect(r.code, r.stderr).toBe(c.code);
      expect(r.stderr).toMatch(c.message);
      expect(r.stderr).toMatch(/^piezomap: /);
      // no stack trace, no raw library error, a few lines only
      expect(r.stderr).not.toMatch(/\n\s+at /);
      expect(r.stderr).not.toMatch(/internal error|TypeError|RangeError|SyntaxError/);
      expect(r.stderr.trim().split('\n').length).toBeLessThanOrEqual(10);
      // nothing but the allowed files (diagnostics, or the earlier results) in the result folder; no temporaries
      const left = filesBelow(c.out);
      expect(left.filter((f) => !c.allowedFiles.includes(f))).toEqual([]);
      if (c.code === 3) expect(left).not.toContain('head.tif');
    });
  }

  it('not-converged: the summary records the failure and the message gives residual, factor and a suggestion', () => {
    const c = cases.find((x) => x.name === 'not-converged')!;
    const r = outcomes.get(c.name)!;
    expect(r.stderr).toMatch(/relative residual \d\.\d+e[-+]\d+ after 5 iterations, convergence factor 0\.\d+/);
    expect(r.stderr).toMatch(/hint: .*(raise solver\.maxIterations|pcg-multigrid)/);
    const summary = JSON.parse(readFileSync(join(c.out, 'summary.json'), 'utf8'));
    expect(summary.solver.converged).toBe(false);
  });

  it('budget-open: the residual criterion was met, yet the open water budget fails the run', () => {
    const c = cases.find((x) => x.name === 'budget-open')!;
    const summary = JSON.parse(readFileSync(join(c.out, 'summary.json'), 'utf8'));
    expect(summary.solver.converged).toBe(true);
    expect(Math.abs(summary.budget.discrepancyPercent)).toBeGreaterThan(0.1);
    expect(outcomes.get(c.name)!.stderr).toMatch(/exceeds 0\.1 % although the residual criterion was met/);
  });
});
