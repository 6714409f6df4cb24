/**
 * Whole-run benchmark: the real `piezomap solve` (the CLI process, every default product) on the benchmark case
 * written as GeoTIFF + scenario, and the reference algebraic multigrid-PCG (./reference.ts) on the same system, in
 * the same run; prints the ratio whole run / reference set-up + solve per size, the stages of the run (from
 * summary.json), its CPU time and peak memory (/usr/bin/time when present), and the machine load beside each row.
 */
import { spawnSync } from 'node:child_process';
import { closeSync, existsSync, mkdirSync, openSync, readFileSync, readSync, rmSync, statSync } from 'node:fs';
import { loadavg } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { readRaster } from '../src/raster/read.js';
import type { CaseField } from './case.js';
import { readSolution, referenceSolver, runReference, type ReferenceResult } from './reference.js';
import { writeCase } from './write-case.js';

const CLI = fileURLToPath(new URL('../../bin/piezomap.js', import.meta.url));
const BENCH = fileURLToPath(new URL('./bench.js', import.meta.url));
const TIME = '/usr/bin/time';

export interface WholeRow {
  size: number;
  field: CaseField;
  cells: number;
  unknowns: number;
  /** Load average (1 min) just before the piezomap run and just before the reference run. */
  loadBefore: number;
  loadReference: number | null;
  wallSeconds: number;
  /** User + system CPU of the whole process (all threads); null without /usr/bin/time. */
  cpuSeconds: number | null;
  peakRssMiB: number | null;
  /** summary.json timings: load, assemble, solve (incl. worker start and copies), analyse, write (products as bytes). */
  stages: Record<string, number>;
  /** Wall time not in the stages: process start, module loading, the report, staging the files, exit. */
  otherSeconds: number;
  method: string;
  iterations: number;
  setupSeconds: number;
  solverSeconds: number;
  outputBytes: number;
  reference: ReferenceResult | null;
  referenceNote: string | null;
  /** Max |h_piezomap - h_reference| over unknowns, metres (head.tif is Float32). */
  maxHeadDifference: number | null;
  ratioWall: number | null;
  ratioCpu: number | null;
}

function load1(): number {
  return loadavg()[0]!;
}

function folderBytes(dir: string): number {
  let total = 0;
  for (const name of [
    'head.tif',
    'darcy-flux-x.tif',
    'darcy-flux-y.tif',
    'darcy-flux.tif',
    'head-contours.geojson',
    'head-map.png',
    'report.html',
    'summary.json',
    'budget.csv',
    'convergence.csv',
  ]) {
    const f = join(dir, name);
    if (existsSync(f)) total += statSync(f).size;
  }
  return total;
}

/** One `piezomap solve` under /usr/bin/time (when present): wall, CPU, peak RSS, summary.json. */
function runCli(
  scenario: string,
  outDir: string,
  method: string | null,
): { wall: number; cpu: number | null; rss: number | null; summary: Record<string, unknown> } {
  const args = [CLI, 'solve', scenario, '-o', outDir, '--overwrite', '--quiet'];
  if (method) args.push('--method', method);
  const timeFile = `${outDir}.time`;
  const timed = existsSync(TIME);
  const t0 = performance.now();
  const run = timed
    ? spawnSync(TIME, ['-f', '%e %U %S %M', '-o', timeFile, process.execPath, ...args], { encoding: 'utf8', maxBuffer: 1 << 24 })
    : spawnSync(process.execPath, args, { encoding: 'utf8', maxBuffer: 1 << 24 });
  const wall = (performance.now() - t0) / 1000;
  if (run.status !== 0) throw new Error(`piezomap solve failed (status ${run.status}): ${run.stderr}`);
  const summary = JSON.parse(readFileSync(join(outDir, 'summary.json'), 'utf8')) as Record<string, unknown>;
  if (!timed) return { wall, cpu: null, rss: null, summary };
  const fields = readFileSync(timeFile, 'utf8').trim().split('\n').pop()!.split(/\s+/).map(Number);
  rmSync(timeFile, { force: true });
  return { wall: fields[0]!, cpu: fields[1]! + fields[2]!, rss: fields[3]! / 1024, summary };
}

/** The cell index of each unknown, from the tail of a GWCSR01 file. */
function systemCells(file: string): Float64Array {
  const fd = openSync(file, 'r');
  try {
    const header = Buffer.alloc(40);
    readSync(fd, header, 0, 40, 0);
    const n = Number(header.readBigInt64LE(8));
    const size = statSync(file).size;
    const tail = Buffer.alloc(8 * n);
    readSync(fd, tail, 0, 8 * n, size - 8 * n);
    const cells = new Float64Array(n);
    for (let i = 0; i < n; i++) cells[i] = Number(tail.readBigInt64LE(8 * i));
    return cells;
  } finally {
    closeSync(fd);
  }
}

async function maxHeadDifference(headTif: string, systemFile: string, solutionFile: string): Promise<number | null> {
  const x = readSolution(solutionFile);
  if (!x) return null;
  const cells = systemCells(systemFile);
  const { values } = await readRaster(headTif);
  let err = 0;
  for (let i = 0; i < x.length; i++) err = Math.max(err, Math.abs(values[cells[i]!]! - x[i]!));
  return err;
}

export interface WholeOptions {
  sizes: number[];
  out: string;
  tolerance: number;
  repeat: number;
  field: CaseField;
  method: string | null;
  keep: boolean;
}

export async function runWhole(options: WholeOptions): Promise<WholeRow[]> {
  const rows: WholeRow[] = [];
  const reference = referenceSolver();
  if ('missing' in reference) process.stderr.write(`reference solver absent: ${reference.missing}; whole runs are timed without ratios\n`);
  for (const size of options.sizes) {
    const caseDir = join(options.out, 'cases', `${options.field}-${size}`);
    if (!existsSync(join(caseDir, 'scenario.json'))) {
      process.stderr.write(`size ${size}: writing the ${options.field} case to ${caseDir}\n`);
      await writeCase(size, caseDir, options.field, true);
    }
    const systemFile = join(caseDir, 'system.bin');
    if (!('missing' in reference) && !existsSync(systemFile)) {
      const made = spawnSync(
        process.execPath,
        ['--max-old-space-size=4096', BENCH, '--child-system', systemFile, '--size', String(size), '--field', options.field],
        { encoding: 'utf8' },
      );
      if (made.status !== 0) throw new Error(`writing ${systemFile} failed: ${made.stderr}`);
    }
    const outDir = join(options.out, 'runs', `${options.field}-${size}`);
    mkdirSync(join(options.out, 'runs'), { recursive: true });
    let best: ReturnType<typeof runCli> | null = null;
    let loadBefore = 0;
    for (let r = 0; r < options.repeat; r++) {
      const before = load1();
      process.stderr.write(`size ${size}: piezomap solve (load ${before.toFixed(1)})\n`);
      const run = runCli(join(caseDir, 'scenario.json'), outDir, options.method);
      if (!best || run.wall < best.wall) {
        best = run;
        loadBefore = before;
      }
    }
    const { summary } = best!;
    const solver = summary.solver as Record<string, number | string>;
    const grid = summary.grid as Record<string, number>;
    const stages = summary.timings as Record<string, number>;
    const staged = Object.values(stages).reduce((a, b) => a + b, 0);
    let ref: ReferenceResult | null = null;
    let referenceNote: string | null = 'missing' in reference ? reference.missing : null;
    let loadReference: number | null = null;
    let headDifference: number | null = null;
    if (!('missing' in reference)) {
      loadReference = load1();
      process.stderr.write(`size ${size}: reference (load ${loadReference.toFixed(1)})\n`);
      const solutionFile = join(caseDir, 'reference-x.bin');
      const answer = runReference(reference.path, systemFile, options.tolerance, options.repeat, solutionFile);
      if ('error' in answer) referenceNote = answer.error;
      else {
        ref = answer;
        headDifference = await maxHeadDifference(join(outDir, 'head.tif'), systemFile, solutionFile);
      }
      rmSync(solutionFile, { force: true });
    }
    const row: WholeRow = {
      size,
      field: options.field,
      cells: grid.nx! * grid.ny!,
      unknowns: grid.unknowns!,
      loadBefore,
      loadReference,
      wallSeconds: best!.wall,
      cpuSeconds: best!.cpu,
      peakRssMiB: best!.rss,
      stages,
      otherSeconds: best!.wall - staged,
      method: String(solver.method),
      iterations: Number(solver.iterations),
      setupSeconds: Number(solver.setupSeconds),
      solverSeconds: Number(solver.seconds),
      outputBytes: folderBytes(outDir),
      reference: ref,
      referenceNote,
      maxHeadDifference: headDifference,
      ratioWall: ref ? best!.wall / ref.totalSeconds : null,
      ratioCpu: ref && best!.cpu !== null ? best!.cpu / ref.cpuSeconds : null,
    };
    rows.push(row);
    if (!options.keep) rmSync(outDir, { recursive: true, force: true });
  }
  return rows;
}

const f = (v: number | null | undefined, d = 2) => (v === null || v === undefined || !Number.isFinite(v) ? '-' : v.toFixed(d));

export function printWhole(rows: WholeRow[]): void {
  const header = [
    'N',
    'unknowns',
    'load',
    'whole s',
    'cpu s',
    'RSS MiB',
    'load s',
    'asm s',
    'solve s',
    'anl s',
    'write s',
    'other s',
    'write %',
    'iters',
    'ref load',
    'ref setup',
    'ref solve',
    'ref cpu',
    'ref its',
    'whole/ref',
    'cpu/ref',
    'max |dh| m',
  ];
  const lines = rows.map((r) => [
    `${r.size}${r.field === 'rough' ? 'r' : ''}`,
    String(r.unknowns),
    f(r.loadBefore, 1),
    f(r.wallSeconds),
    f(r.cpuSeconds),
    f(r.peakRssMiB, 0),
    f(r.stages.load),
    f(r.stages.assemble),
    f(r.stages.solve),
    f(r.stages.analyse),
    f(r.stages.write),
    f(r.otherSeconds),
    f((100 * (r.stages.write ?? NaN)) / r.wallSeconds, 0),
    String(r.iterations),
    f(r.loadReference, 1),
    f(r.reference?.setupSeconds),
    f(r.reference?.solveSeconds),
    f(r.reference?.cpuSeconds),
    r.reference ? String(r.reference.iterations) : '-',
    f(r.ratioWall),
    f(r.ratioCpu),
    r.maxHeadDifference === null ? '-' : r.maxHeadDifference.toExponential(1),
  ]);
  const widths = header.map((h, c) => Math.max(h.length, ...lines.map((l) => l[c]!.length)));
  const show = (cols: string[]) => '| ' + cols.map((v, c) => v.padStart(widths[c]!)).join(' | ') + ' |';
  console.log(show(header));
  console.log('| ' + widths.map((w) => '-'.repeat(w)).join(' | ') + ' |');
  for (const l of lines) console.log(show(l));
  for (const r of rows) if (r.referenceNote) console.log(`N=${r.size}: no reference figures: ${r.referenceNote}`);
  console.log(
    'whole = wall time of the `piezomap solve` process; other = whole minus the summary.json stages (process start, module loading, report, staging files, exit); ratios against the reference set-up + solve.',
  );
}
