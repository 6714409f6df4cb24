/**
 * Solver benchmark: every practical method on the synthetic benchmark case (bench/case.ts) at several sizes,
 * each solve in its own child process so that its peak memory is its own.
 *
 *   npm run bench -- [--sizes 512,1024,2048] [--methods auto,pcg-multigrid,...] [--out bench-results]
 *                    [--threads 1,2] [--tolerance 1e-10] [--max-iterations 20000] [--time-limit 240]
 *                    [--write-case DIR --size N]
 *   npm run bench -- --table FILE.json   (prints the table of an earlier run)
 *   npm run bench -- --whole [--sizes 512,1024,2048] [--repeat 1]   whole `piezomap solve` runs against the reference
 *   npm run bench -- --write-stages [--sizes 1024,2048]   CPU per product, serial vs concurrent writer
 *   npm run bench -- --rough [--sizes 512,1024]   rough vs smooth conductivity: auto, pcg-pairwise, pcg-multigrid, pcg-ic0
 *
 * The reference solver (hypre BoomerAMG-PCG, built from ../shared/bench-reference) is used when
 * PIEZOMAP_REFERENCE_DIR names the folder holding its hypre_pcg (./reference.ts).
 *
 * With `--threads 1,2` every method runs once per thread count (pcg-multigrid and `auto` share their work with a
 * thread team; other methods ignore it) and a speed-up table follows (1-thread time / T-thread time).
 *
 * Prints a table and writes bench-results/bench-<stamp>.json. Heads are compared with a tighter multigrid
 * solve (relative residual 1e-12) of the same size: max |h - h_ref| / max |h_ref| over active cells.
 */
import { spawnSync } from 'node:child_process';
import { mkdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { cpus, loadavg, totalmem } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { waterBudget } from '../src/analysis/budget.js';
import { assembleSystem, headsFromSolution } from '../src/discretisation/assemble.js';
import { chooseAutoMethod, createSolver } from '../src/solvers/registry.js';
import { benchCase, CASE_FIELDS, unconfinedBenchCase, type CaseField } from './case.js';
import { referenceSolver, runReference, writeSystemFile } from './reference.js';
import { printWhole, runWhole } from './whole.js';
import { solveOuter } from '../src/discretisation/outerLoop.js';
import { closeSession, openSession, runInline } from '../src/executor/plan.js';
import { Team } from '../src/solvers/team.js';

/** A method name ending in this suffix solves the unconfined case (water table, outer iteration) with that method. */
const UNCONFINED_SUFFIX = '+unconfined';

interface ChildResult {
  size: number;
  cells: number;
  unknowns: number;
  method: string;
  resolvedMethod: string;
  /** Threads asked for (a team of that size for pcg-multigrid; the notes say what the solver used). */
  threads: number;
  /** One-minute load average when the child started: the machine's other work. */
  loadAverage: number;
  caseSeconds: number;
  assembleSeconds: number;
  setupSeconds: number;
  solveSeconds: number;
  /** CPU time (user + system) of setup + solve: less sensitive than wall time to other load on the machine. */
  cpuSeconds: number;
  iterations: number;
  relativeResidual: number;
  stopReason: string;
  converged: boolean;
  budgetDiscrepancyPercent: number;
  peakRssMiB: number;
  notes: string[];
  headsFile: string;
}

interface Row extends ChildResult {
  maxRelativeHeadError: number | null;
  nsPerCell: number;
  nsPerCellIteration: number | null;
}

/** Default method set per size: slow single-level methods only where they finish in minutes. */
const DEFAULT_METHODS: Record<number, string[]> = {
  512: ['auto', 'pcg-multigrid', 'pcg-ic0', 'pcg-ssor', 'pcg-jacobi', 'cg', 'sor', 'gauss-seidel', 'jacobi'],
  1024: ['auto', 'pcg-multigrid', 'pcg-ic0', 'pcg-jacobi'],
  2048: ['auto', 'pcg-multigrid'],
};

function parseArgs(argv: string[]): Map<string, string> {
  const args = new Map<string, string>();
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (!a.startsWith('--')) throw new Error(`unexpected argument "${a}"`);
    const next = argv[i + 1];
    if (next === undefined || next.startsWith('--')) args.set(a.slice(2), 'true');
    else {
      args.set(a.slice(2), next);
      i++;
    }
  }
  return args;
}

/** Runs one solve in this process (child mode) and prints its result as JSON on stdout. */
function runChild(
  size: number,
  method: string,
  tolerance: number,
  timeLimit: number,
  maxIterations: number,
  headsFile: string,
  field: CaseField,
  threads: number,
): void {
  if (method.endsWith(UNCONFINED_SUFFIX)) {
    runUnconfinedChild(size, method, tolerance, maxIterations, headsFile, threads);
    return;
  }
  let t = performance.now();
  const { model } = benchCase(size, undefined, field);
  const caseSeconds = (performance.now() - t) / 1000;
  t = performance.now();
  const system = assembleSystem(model);
  const assembleSeconds = (performance.now() - t) / 1000;
  // drop the case's inputs before the solve, as the CLI would after assembly
  (model as { conductivity: Float64Array | null }).conductivity = null;
  (globalThis as { gc?: () => void }).gc?.();
  const resolvedMethod = method === 'auto' ? chooseAutoMethod(system.operator) : method;
  const loadAverage = loadavg()[0]!;
  const cpuStart = process.cpuUsage();
  // the team's start (helper threads) counts as set-up, as in a solver session
  const t0 = performance.now();
  const team = threads > 1 ? new Team(threads) : null;
  const solver = createSolver(method, system.operator, { team });
  const setupSeconds = (performance.now() - t0) / 1000;
  const x = new Float64Array(system.operator.n);
  const stats = solver.solve(system.rhs, x, { tolerance, maxIterations, timeLimitSeconds: timeLimit });
  const cpu = process.cpuUsage(cpuStart);
  void team?.close();
  const head = headsFromSolution(system, x);
  const budget = waterBudget(system, head);
  if (headsFile) writeFileSync(headsFile, new Uint8Array(head.buffer, head.byteOffset, head.byteLength));
  const result: ChildResult = {
    size,
    cells: system.counts.cells,
    unknowns: system.counts.unknowns,
    method,
    resolvedMethod,
    threads,
    loadAverage,
    caseSeconds,
    assembleSeconds,
    setupSeconds,
    solveSeconds: stats.solveSeconds,
    cpuSeconds: (cpu.user + cpu.system) / 1e6,
    iterations: stats.iterations,
    relativeResidual: stats.relativeResidual,
    stopReason: stats.stopReason,
    converged: stats.converged,
    budgetDiscrepancyPercent: budget.discrepancyPercent,
    peakRssMiB: process.resourceUsage().maxRSS / 1024,
    notes: stats.notes,
    headsFile,
  };
  process.stdout.write(JSON.stringify(result) + '\n');
}

/**
 * The unconfined case: the outer (Picard) iteration with its inner solves in one solver session, as the CLI runs it.
 * Set-up and solve seconds are the whole outer iteration's (set-ups included in solveSeconds after the first);
 * iterations are the inner iterations summed; notes give the outer iterations.
 */
function runUnconfinedChild(
  size: number,
  method: string,
  tolerance: number,
  maxIterations: number,
  headsFile: string,
  threads: number,
): void {
  const solverMethod = method.slice(0, -UNCONFINED_SUFFIX.length);
  let t = performance.now();
  const { model } = unconfinedBenchCase(size);
  const caseSeconds = (performance.now() - t) / 1000;
  t = performance.now();
  const system = assembleSystem(model);
  const assembleSeconds = (performance.now() - t) / 1000;
  const loadAverage = loadavg()[0]!;
  const cpuStart = process.cpuUsage();
  t = performance.now();
  const { answer, setupSeconds, resolvedMethod } = runInline(
    (function* () {
      const session = yield* openSession(system.operator, { method: solverMethod, threads });
      const firstSetup = session.setupSeconds;
      const answer = yield* solveOuter(system, session, { tolerance, maxIterations });
      yield* closeSession(session);
      return { answer, setupSeconds: firstSetup, resolvedMethod: session.method };
    })(),
  );
  const total = (performance.now() - t) / 1000;
  const cpu = process.cpuUsage(cpuStart);
  const head = headsFromSolution(system, answer.x);
  const budget = waterBudget(system, head);
  if (headsFile) writeFileSync(headsFile, new Uint8Array(head.buffer, head.byteOffset, head.byteLength));
  const outer = answer.outer;
  const dry = outer.history.at(-1)?.dryCells ?? 0;
  const rebuilds = outer.history.filter((h) => h.rebuilt).length;
  const result: ChildResult = {
    size,
    cells: system.counts.cells,
    unknowns: system.counts.unknowns,
    method,
    resolvedMethod: `${resolvedMethod}${UNCONFINED_SUFFIX}`,
    threads,
    loadAverage,
    caseSeconds,
    assembleSeconds,
    setupSeconds,
    solveSeconds: total - setupSeconds,
    cpuSeconds: (cpu.user + cpu.system) / 1e6,
    iterations: outer.innerIterations,
    relativeResidual: outer.history.at(-1)?.flowResidual ?? answer.stats.relativeResidual,
    stopReason: outer.stopReason === 'settled' ? answer.stats.stopReason : (outer.stopReason as ChildResult['stopReason']),
    converged: outer.stopReason === 'settled' && answer.stats.converged,
    budgetDiscrepancyPercent: budget.discrepancyPercent,
    peakRssMiB: process.resourceUsage().maxRSS / 1024,
    notes: [`${outer.iterations} outer iterations, ${rebuilds} solver rebuilds, ${dry} dry cells`],
    headsFile,
  };
  process.stdout.write(JSON.stringify(result) + '\n');
}

function spawnChild(
  size: number,
  method: string,
  tolerance: number,
  timeLimit: number,
  maxIterations: number,
  headsFile: string,
  field: CaseField = 'smooth',
  threads = 1,
): ChildResult | null {
  const script = fileURLToPath(import.meta.url);
  const args = [
    '--expose-gc',
    '--max-old-space-size=4096',
    script,
    '--child',
    '--size',
    String(size),
    '--method',
    method,
    '--field',
    field,
    '--threads',
    String(threads),
  ];
  args.push(
    '--tolerance',
    String(tolerance),
    '--time-limit',
    String(timeLimit),
    '--max-iterations',
    String(maxIterations),
    '--heads',
    headsFile,
  );
  const run = spawnSync(process.execPath, args, { encoding: 'utf8', maxBuffer: 1 << 24 });
  if (run.status !== 0) {
    process.stderr.write(`  ${method} at ${size}: child failed (status ${run.status})\n${run.stderr}\n`);
    return null;
  }
  const line = run.stdout.trim().split('\n').pop()!;
  return JSON.parse(line) as ChildResult;
}

function readHeads(file: string): Float64Array {
  const buf = readFileSync(file);
  return new Float64Array(buf.buffer.slice(buf.byteOffset, buf.byteOffset + buf.byteLength));
}

function maxRelativeDifference(h: Float64Array, ref: Float64Array): number {
  let scale = 0;
  let err = 0;
  for (let i = 0; i < ref.length; i++) {
    const r = ref[i]!;
    if (Number.isNaN(r)) continue;
    scale = Math.max(scale, Math.abs(r));
    err = Math.max(err, Math.abs(h[i]! - r));
  }
  return err / scale;
}

function fmt(v: number | null, digits: number): string {
  return v === null || !Number.isFinite(v) ? '-' : v.toFixed(digits);
}

function exp(v: number | null): string {
  return v === null || !Number.isFinite(v) ? '-' : v.toExponential(1);
}

function printTable(rows: Row[]): void {
  const header = [
    'cells',
    'unknowns',
    'method',
    'threads',
    'setup s',
    'solve s',
    'cpu s',
    'iters',
    'rel.res',
    'stop',
    'budget %',
    'head err',
    'RSS MiB',
    'ns/cell',
    'ns/cell/it',
  ];
  const lines = rows.map((r) => [
    String(r.cells),
    String(r.unknowns),
    r.method === r.resolvedMethod ? r.method : `${r.method}→${r.resolvedMethod}`,
    String(r.threads ?? 1),
    fmt(r.setupSeconds, 3),
    fmt(r.solveSeconds, 3),
    fmt(r.cpuSeconds, 3),
    String(r.iterations),
    exp(r.relativeResidual),
    r.stopReason,
    exp(r.budgetDiscrepancyPercent),
    exp(r.maxRelativeHeadError),
    fmt(r.peakRssMiB, 0),
    fmt(r.nsPerCell, 0),
    fmt(r.nsPerCellIteration, 1),
  ]);
  const widths = header.map((h, c) => Math.max(h.length, ...lines.map((l) => l[c]!.length)));
  const show = (cols: string[]) => '| ' + cols.map((v, c) => v.padStart(widths[c]!)).join(' | ') + ' |';
  console.log(show(header));
  console.log('| ' + widths.map((w) => '-'.repeat(w)).join(' | ') + ' |');
  for (const l of lines) console.log(show(l));
}

async function main(): Promise<void> {
  const args = parseArgs(process.argv.slice(2));
  const tolerance = Number(args.get('tolerance') ?? 1e-10);
  const timeLimit = Number(args.get('time-limit') ?? 240);
  const maxIterations = Number(args.get('max-iterations') ?? 20_000);
  const field = caseField(args.get('field') ?? 'smooth');
  if (args.has('child')) {
    runChild(
      Number(args.get('size')),
      args.get('method')!,
      tolerance,
      timeLimit,
      maxIterations,
      args.get('heads') ?? '',
      field,
      Number(args.get('threads') ?? 1),
    );
    return;
  }
  if (args.has('child-system')) {
    const system = assembleSystem(benchCase(Number(args.get('size')), undefined, field).model);
    writeSystemFile(system, args.get('child-system')!);
    return;
  }
  if (args.has('table')) {
    printTable((JSON.parse(readFileSync(args.get('table')!, 'utf8')) as { rows: Row[] }).rows);
    return;
  }
  if (args.has('write-case')) {
    const { writeCase } = await import('./write-case.js');
    await writeCase(Number(args.get('size') ?? 512), args.get('write-case')!, field);
    return;
  }
  const outDir = args.get('out') ?? 'bench-results';
  const stamp = new Date().toISOString().replace(/[:.]/g, '-');
  const machine = `${cpus().length} x ${cpus()[0]?.model ?? 'unknown CPU'}, ${(totalmem() / 2 ** 30).toFixed(0)} GiB, Node ${process.version}`;
  if (args.has('whole')) {
    mkdirSync(outDir, { recursive: true });
    const sizes = (args.get('sizes') ?? '512,1024,2048').split(',').map(Number);
    console.log(`piezomap whole-run benchmark — ${machine}; tolerance ${tolerance}; load average at start ${loadavg()[0]!.toFixed(1)}`);
    const rows = await runWhole({
      sizes,
      out: outDir,
      tolerance,
      repeat: Number(args.get('repeat') ?? 1),
      field,
      method: args.get('methods') ?? null,
      keep: args.has('keep'),
    });
    printWhole(rows);
    const file = join(outDir, `whole-${stamp}.json`);
    writeFileSync(file, JSON.stringify({ machine, tolerance, loadAtEnd: loadavg()[0], rows }, null, 2) + '\n');
    console.log(`load average at end ${loadavg()[0]!.toFixed(1)}; written ${file}`);
    return;
  }
  if (args.has('write-stages')) {
    const { runWriteStages } = await import('./write-stages.js');
    console.log(`piezomap write stages — ${machine}; load average at start ${loadavg()[0]!.toFixed(1)}`);
    await runWriteStages((args.get('sizes') ?? '1024,2048').split(',').map(Number), outDir);
    console.log(`load average at end ${loadavg()[0]!.toFixed(1)}`);
    return;
  }
  if (args.has('rough')) {
    await runRough(args, outDir, stamp, machine, tolerance, timeLimit, maxIterations);
    return;
  }
  const sizes = (args.get('sizes') ?? '512,1024,2048').split(',').map(Number);
  const methodsArg = args.get('methods');
  const out = args.get('out') ?? 'bench-results';
  mkdirSync(out, { recursive: true });
  const scratch = join(out, 'tmp-heads');
  mkdirSync(scratch, { recursive: true });
  const threadCounts = (args.get('threads') ?? '1').split(',').map(Number);
  if (threadCounts.some((t) => !Number.isInteger(t) || t < 1)) throw new Error('--threads must list whole numbers >= 1, e.g. 1,2');
  console.log(`piezomap solver benchmark — ${machine}; tolerance ${tolerance}; load average at start ${loadavg()[0]!.toFixed(1)}`);
  const rows: Row[] = [];
  const file = join(out, `bench-${stamp}.json`);
  // rewritten after every solve, so a long run interrupted midway keeps what it measured
  const save = () => writeFileSync(file, JSON.stringify({ machine, tolerance, maxIterations, rows }, null, 2) + '\n');
  for (const size of sizes) {
    const methods = methodsArg ? methodsArg.split(',') : (DEFAULT_METHODS[size] ?? ['auto', 'pcg-multigrid']);
    process.stderr.write(`size ${size}: reference solve (pcg-multigrid to 1e-12)\n`);
    const refFile = join(scratch, `ref-${size}.f64`);
    const reference = spawnChild(size, 'pcg-multigrid', 1e-12, 3 * timeLimit, 1000, refFile);
    const refHeads = reference ? readHeads(refFile) : null;
    for (const method of methods)
      for (const threads of threadCounts) {
        process.stderr.write(`size ${size}: ${method}, ${threads} thread${threads > 1 ? 's' : ''}\n`);
        const headsFile = join(scratch, `${method}-${size}.f64`);
        const result = spawnChild(size, method, tolerance, timeLimit, maxIterations, headsFile, 'smooth', threads);
        if (!result) continue;
        const total = result.setupSeconds + result.solveSeconds;
        const row: Row = {
          ...result,
          // The reference is the confined case's: no head comparison for the unconfined one.
          maxRelativeHeadError:
            refHeads && !method.endsWith(UNCONFINED_SUFFIX) ? maxRelativeDifference(readHeads(headsFile), refHeads) : null,
          nsPerCell: (total / result.cells) * 1e9,
          nsPerCellIteration: result.iterations > 0 ? (result.solveSeconds / result.iterations / result.cells) * 1e9 : null,
        };
        rmSync(headsFile, { force: true });
        rows.push(row);
        save();
        const notes = result.notes.length ? ` (${result.notes.join('; ')})` : '';
        process.stderr.write(`  ${result.stopReason} in ${result.iterations} iterations, ${total.toFixed(2)} s${notes}\n`);
      }
    rmSync(refFile, { force: true });
  }
  rmSync(scratch, { recursive: true, force: true });
  printTable(rows);
  if (threadCounts.length > 1) printSpeedUps(rows);
  save();
  console.log(`load average at end ${loadavg()[0]!.toFixed(1)}; written ${file}`);
}

/** Speed-up of every multi-thread row over the 1-thread row of the same size and method: 1-thread time / T-thread time. */
function printSpeedUps(rows: Row[]): void {
  console.log('\nspeed-up = 1-thread time / T-thread time (set-up + solve, and solve alone); cpu = CPU seconds of all threads');
  for (const r of rows) {
    if (r.threads === 1) continue;
    const one = rows.find((o) => o.size === r.size && o.method === r.method && o.threads === 1);
    if (!one) continue;
    const total = (x: Row) => x.setupSeconds + x.solveSeconds;
    console.log(
      `  ${r.size}² ${r.method} ×${r.threads}: ${(total(one) / total(r)).toFixed(2)}x (solve alone ${(one.solveSeconds / r.solveSeconds).toFixed(2)}x); ` +
        `cpu ${one.cpuSeconds.toFixed(2)} -> ${r.cpuSeconds.toFixed(2)} s; iterations ${one.iterations} -> ${r.iterations}; ` +
        `load average ${one.loadAverage.toFixed(1)} / ${r.loadAverage.toFixed(1)}`,
    );
  }
}

function caseField(name: string): CaseField {
  if (!(CASE_FIELDS as readonly string[]).includes(name)) throw new Error(`--field must be one of ${CASE_FIELDS.join(', ')}`);
  return name as CaseField;
}

/** The methods of the rough-conductivity comparison, on both fields: `auto`, the two multigrid methods, IC(0). */
const ROUGH_METHODS = ['auto', 'pcg-pairwise', 'pcg-multigrid', 'pcg-ic0'];

/**
 * Iterations and CPU time on the rough case (white-noise log K, sigma 3) against the smooth one, for ROUGH_METHODS
 * on both, and the reference's on the rough one when it is there.
 */
async function runRough(
  args: Map<string, string>,
  out: string,
  stamp: string,
  machine: string,
  tolerance: number,
  timeLimit: number,
  maxIterations: number,
): Promise<void> {
  const sizes = (args.get('sizes') ?? '512,1024').split(',').map(Number);
  const scratch = join(out, 'tmp-rough');
  mkdirSync(scratch, { recursive: true });
  const reference = referenceSolver();
  if ('missing' in reference) process.stderr.write(`reference solver absent: ${reference.missing}\n`);
  console.log(
    `piezomap rough-conductivity benchmark — ${machine}; tolerance ${tolerance}; load average at start ${loadavg()[0]!.toFixed(1)}`,
  );
  const rows: Array<Record<string, unknown>> = [];
  const lines: string[] = [
    '| N | case | method | iterations | stop | setup s | solve s | cpu s | load |',
    '|---|---|---|---|---|---|---|---|---|',
  ];
  for (const size of sizes) {
    const runs: Array<[CaseField, string]> = [];
    for (const field of CASE_FIELDS) for (const method of ROUGH_METHODS) runs.push([field, method]);
    for (const [field, method] of runs) {
      const load = loadavg()[0]!;
      process.stderr.write(`size ${size}: ${method} on the ${field} case (load ${load.toFixed(1)})\n`);
      const r = spawnChild(size, method, tolerance, timeLimit, maxIterations, '', field);
      if (!r) continue;
      rows.push({ ...r, field, load });
      lines.push(
        `| ${size} | ${field} | ${r.method === r.resolvedMethod ? r.method : `${r.method} → ${r.resolvedMethod}`} | ${r.iterations} | ${r.stopReason} | ${r.setupSeconds.toFixed(2)} | ${r.solveSeconds.toFixed(2)} | ${r.cpuSeconds.toFixed(2)} | ${load.toFixed(1)} |`,
      );
    }
    if (!('missing' in reference)) {
      const systemFile = join(scratch, `rough-${size}.bin`);
      const made = spawnSync(
        process.execPath,
        [
          '--max-old-space-size=4096',
          fileURLToPath(import.meta.url),
          '--child-system',
          systemFile,
          '--size',
          String(size),
          '--field',
          'rough',
        ],
        { encoding: 'utf8' },
      );
      const load = loadavg()[0]!;
      const ref = made.status === 0 ? runReference(reference.path, systemFile, tolerance, 1) : { error: made.stderr };
      rmSync(systemFile, { force: true });
      if ('error' in ref) process.stderr.write(`  reference on the rough case failed: ${ref.error}\n`);
      else {
        rows.push({ size, field: 'rough', method: 'reference BoomerAMG-PCG', load, ...ref });
        lines.push(
          `| ${size} | rough | reference BoomerAMG-PCG | ${ref.iterations} | ${ref.converged ? 'converged' : 'not converged'} | ${ref.setupSeconds.toFixed(2)} | ${ref.solveSeconds.toFixed(2)} | ${ref.cpuSeconds.toFixed(2)} | ${load.toFixed(1)} |`,
        );
      }
    }
  }
  rmSync(scratch, { recursive: true, force: true });
  for (const l of lines) console.log(l);
  const file = join(out, `rough-${stamp}.json`);
  writeFileSync(file, JSON.stringify({ machine, tolerance, rows }, null, 2) + '\n');
  console.log(`load average at end ${loadavg()[0]!.toFixed(1)}; written ${file}`);
}

main().catch((error: unknown) => {
  console.error(error instanceof Error ? error.message : String(error));
  process.exit(1);
});
