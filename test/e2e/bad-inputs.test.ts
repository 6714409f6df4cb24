/**
 * The corpus of malformed inputs (scripts/make-bad-inputs.ts) through the command line: each case must end
 * with the exit status of the contract (../shared/spec/interface.md: 2 bad input, 3 solver), a short message naming
 * the culprit, no stack trace, and no result or temporary file left behind.
 *
 * Every case runs through the built CLI entry point (dist/src/cli/main.js, the code bin/piezomap.js calls) in this
 * process, which keeps the suite fast; a sample of them (every fourth, and the ones that depend on the process: /proc,
 * the memory limit, the solver failures) also runs as a separate `node bin/piezomap.js` process, with the same checks.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { writeBadInputs, type BadInputCase } from '../../scripts/make-bad-inputs.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
const ENTRY = resolve(__dirname, '../../dist/src/cli/main.js');
const dir = mkdtempSync(join(tmpdir(), 'piezomap-bad-'));
const cases = writeBadInputs(dir);
const PROCESS_CASES = new Set(['out-in-proc', 'out-under-file', 'memory-limit', 'not-converged', 'budget-open', 'raster-huge-header']);
const sampled = cases.filter((c, i) => i % 4 === 0 || PROCESS_CASES.has(c.name));

interface Outcome {
  code: number | null;
  stdout: string;
  stderr: string;
}

function spawnCli(c: BadInputCase): Promise<Outcome> {
  return new Promise((done) => {
    const child = spawn(process.execPath, [BIN, ...c.args], { env: { ...process.env, FORCE_COLOR: '0', ...c.env } });
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d) => (stdout += d));
    child.stderr.on('data', (d) => (stderr += d));
    child.on('close', (code) => done({ code, stdout, stderr }));
  });
}

type Main = (argv: string[], io: { stdout: (t: string) => void; stderr: (t: string) => void }) => Promise<number>;

async function inProcess(main: Main, c: BadInputCase): Promise<Outcome> {
  const saved = new Map<string, string | undefined>();
  for (const [key, value] of Object.entries(c.env ?? {})) {
    saved.set(key, process.env[key]);
    process.env[key] = value;
  }
  let stdout = '';
  let stderr = '';
  try {
    const code = await main(c.args, { stdout: (t) => (stdout += t), stderr: (t) => (stderr += t) });
    return { code, stdout, stderr };
  } finally {
    for (const [key, value] of saved) {
      if (value === undefined) delete process.env[key];
      else process.env[key] = value;
    }
  }
}

/** The case with a result folder of its own, where the folder is ours to choose (not /proc, a file, or earlier results). */
function asProcessCase(c: BadInputCase): BadInputCase {
  if (!c.out.startsWith(join(dir, 'out')) || c.name === 'out-holds-results') return c;
  const out = `${c.out}-process`;
  return { ...c, out, args: c.args.map((a) => (a === c.out ? out : a)) };
}

const outcomes = new Map<string, Outcome>();
const spawned = new Map<string, Outcome>();

beforeAll(async () => {
  const { main } = (await import(ENTRY)) as { main: Main };
  for (const c of cases) outcomes.set(c.name, await inProcess(main, c));
  // The sampled cases again as processes, into result folders of their own.
  const queue = sampled.map(asProcessCase);
  const worker = async () => {
    for (let c = queue.shift(); c; c = queue.shift()) spawned.set(c.name, await spawnCli(c));
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

  const check = (c: BadInputCase, r: Outcome) => {
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
  };

  for (const c of cases) {
    it(`${c.name}: ${c.what} -> exit ${c.code}`, () => check(c, outcomes.get(c.name)!));
  }

  it(`the same holds for ${sampled.length} of the cases run as separate processes (node bin/piezomap.js)`, () => {
    expect(sampled.length).toBeGreaterThanOrEqual(20);
    for (const c of sampled) check(asProcessCase(c), spawned.get(c.name)!);
  });

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
