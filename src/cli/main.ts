/**
 * The command-line shell: parse arguments, call the library, format its result, return an exit code.
 * Exit codes (../shared/spec/interface.md): 0 done, 2 bad input or usage, 3 solver did not reach the tolerance, 1 anything else.
 */
import { Command, CommanderError, Option } from 'commander';
import { PiezomapError, describeThrown, exitCodeFor } from '../errors.js';
import { VERSION } from '../version.js';
import { CAUTION } from '../caution.js';
import { demoScenarioPath } from '../demoPath.js';
import { solverMethodNames } from '../solvers/registry.js';
import type { RunOptions } from '../pipeline.js';
import type { Executor } from '../executor/types.js';
import type { ProductOptions } from '../output/products.js';
import { parseSolverOption } from '../scenario/solverSettings.js';
import type { SolverSettings } from '../scenario/types.js';
import { abandonResultFoldersSync } from '../output/resultFolder.js';
import { startWritePool, type WritePool } from '../output/writePool.js';
import { makeProgress, clearProgress } from './progress.js';

// Each command imports what it runs when it runs (scenario loading, solving, writing, comparing, ensembles), so that
// a command does not load the others' modules and `solve` starts its result-writing threads before the heavy imports.

interface CommonFlags {
  json?: boolean;
  quiet?: boolean;
  debug?: boolean;
}

interface SolveFlags extends CommonFlags {
  out?: string;
  method?: string;
  tolerance?: number;
  maxIterations?: number;
  relaxation?: number;
  threads?: number | 'auto';
  overwrite?: boolean;
  /** commander's negated --no-maps: false when given. */
  maps?: boolean;
  nativeContours?: boolean;
  contourInterval?: number;
}

export interface CliIO {
  stdout: (text: string) => void;
  stderr: (text: string) => void;
}

const defaultIO: CliIO = {
  stdout: (t) => process.stdout.write(t),
  stderr: (t) => process.stderr.write(t),
};

function positiveNumber(name: string) {
  return (value: string): number => {
    const v = Number(value);
    if (!Number.isFinite(v) || v <= 0) throw new PiezomapError('usage', `${name} must be a positive number, got "${value}"`);
    return v;
  };
}

/** A solver setting on the command line, checked by the same code as the scenario's `solver` key. */
function solverOption(key: keyof SolverSettings) {
  return (value: string) => parseSolverOption(key, value);
}

/**
 * Where the solves run: worker threads (signals answered at once) when the compiled worker is there; the first one
 * starts now, to load its modules while this thread reads the input. `close` ends it if no solve took it.
 */
async function startExecutor(): Promise<Executor & { close(): void }> {
  const { workerAvailable, startWorkerExecutor } = await import('../executor/worker.js');
  if (workerAvailable()) return startWorkerExecutor();
  const { inlineExecutor } = await import('../executor/inline.js');
  return { open: inlineExecutor.open, close: () => undefined };
}

function addCommon(cmd: Command): Command {
  return cmd
    .option('--json', 'print the machine-readable summary on stdout instead of the human one')
    .option('--quiet', 'no progress on stderr')
    .option('--debug', 'show stack traces for errors');
}

function productOptions(flags: SolveFlags): ProductOptions {
  const options: ProductOptions = { maps: flags.maps !== false, nativeContours: Boolean(flags.nativeContours) };
  if (flags.contourInterval !== undefined) options.contourInterval = flags.contourInterval;
  return options;
}

function addSolverOptions(cmd: Command): Command {
  return cmd
    .addOption(
      new Option('--method <name>', `solver method (overrides the scenario): ${solverMethodNames().join(', ')}`).argParser(
        solverOption('method'),
      ),
    )
    .option('--tolerance <number>', 'relative residual to reach (overrides the scenario)', solverOption('tolerance'))
    .option('--max-iterations <n>', 'iteration cap (overrides the scenario)', solverOption('maxIterations'))
    .option('--relaxation <omega>', 'relaxation factor for SOR (default: chosen automatically)', solverOption('relaxation'))
    .option('--threads <n>', 'threads of the solve: a whole number or "auto" (default: all cores on large grids)', solverOption('threads'))
    .option('--overwrite', 'replace results already in the output folder')
    .option('--no-maps', 'write only rasters, tables and the summary: no contours, flux rasters, map or report')
    .option('--native-contours', "also write contours (and capture zones and pathlines) in the raster's own CRS (*.native.geojson)")
    .option(
      '--contour-interval <number>',
      'contour interval in length units (default: a round interval)',
      positiveNumber('--contour-interval'),
    );
}

/** The run options of the flags: solver overrides (already checked while parsing), progress. */
function runOptions(flags: SolveFlags): { options: RunOptions; progress: ReturnType<typeof makeProgress> } {
  const progress = makeProgress(Boolean(flags.quiet));
  const options: RunOptions = { onProgress: progress };
  if (flags.method) options.method = flags.method;
  if (flags.tolerance !== undefined) options.tolerance = flags.tolerance;
  if (flags.maxIterations !== undefined) options.maxIterations = flags.maxIterations;
  if (flags.relaxation !== undefined) options.relaxation = flags.relaxation;
  if (flags.threads !== undefined) options.threads = flags.threads;
  return { options, progress };
}

/**
 * The result writers and what they pull in (maps, report, PNG rasterising) are imported when a command writes
 * results, so that the other commands start without them; a failed import is not left unobserved meanwhile.
 */
function writersModule(): Promise<typeof import('../output/solveFiles.js')> {
  const loading = import('../output/solveFiles.js');
  loading.catch(() => undefined);
  return loading;
}

/**
 * Run `work` with the threads a solving command uses, started first: the result-writing pool and the first solve
 * worker load their modules on the other cores while this one loads the input; both are ended afterwards.
 */
async function withRunThreads(work: (pool: WritePool | null, solveExecutor: Executor) => Promise<number>): Promise<number> {
  const pool = startWritePool();
  const solveExecutor = await startExecutor();
  try {
    return await work(pool, solveExecutor);
  } finally {
    solveExecutor.close();
    void pool?.close();
  }
}

function runSolve(scenario: string, outDir: string, flags: SolveFlags, io: CliIO): Promise<number> {
  return withRunThreads((pool, solveExecutor) => solveAndWrite(scenario, outDir, flags, io, pool, solveExecutor));
}

async function solveAndWrite(
  scenario: string,
  outDir: string,
  flags: SolveFlags,
  io: CliIO,
  pool: WritePool | null,
  solveExecutor: Executor,
): Promise<number> {
  const { options, progress } = runOptions(flags);
  progress?.({ stage: 'load', message: `reading ${scenario}` });
  const [{ loadScenario }, { solveModelWith }, { prepareResultFolder }, { resultProblem }, { formatSummary }] = await Promise.all([
    import('../scenario/load.js'),
    import('../pipeline.js'),
    import('../output/resultFolder.js'),
    import('../analysis/result.js'),
    import('../output/summary.js'),
  ]);
  // the load stage is reading the scenario and its rasters, as before; module loading is start-up
  const t0 = performance.now();
  const { model } = await loadScenario(scenario);
  const timings: Record<string, number> = { load: (performance.now() - t0) / 1000 };
  // Check (and lock) the output folder before the long work.
  const folder = await prepareResultFolder(outDir, Boolean(flags.overwrite), model.inputFiles);
  printNotes(folder.notes, io);
  // The writers (maps, report) load while the worker thread solves, off the critical path, and compile the loops
  // this thread runs for the write pool.
  const writers = writersModule();
  if (pool)
    writers.then(
      (m) => m.prepareWriting(model.grid.nx * model.grid.ny),
      () => undefined,
    );
  const result = await solveModelWith(model, solveExecutor, options, timings);
  progress?.({ stage: 'write', message: `writing results to ${outDir}` });
  const { writeSolveResults } = await writers;
  const summary = await writeSolveResults(result, outDir, { overwrite: Boolean(flags.overwrite), pool, ...productOptions(flags) });
  clearProgress();
  const problem = resultProblem(result);
  if (flags.json) io.stdout(JSON.stringify(summary, null, 2) + '\n');
  else io.stdout(formatSummary(summary, outDir));
  if (problem) {
    io.stderr(`piezomap: ${problem.describe()}\n  no head.tif was written; diagnostics are in ${outDir}\n`);
    return exitCodeFor(problem);
  }
  return 0;
}

function runCompare(scenario: string, outDir: string, flags: SolveFlags, io: CliIO): Promise<number> {
  return withRunThreads((pool, solveExecutor) => compareAndWrite(scenario, outDir, flags, io, pool, solveExecutor));
}

async function compareAndWrite(
  scenario: string,
  outDir: string,
  flags: SolveFlags,
  io: CliIO,
  pool: WritePool | null,
  solveExecutor: Executor,
): Promise<number> {
  const { options, progress } = runOptions(flags);
  progress?.({ stage: 'load', message: `reading ${scenario}` });
  const [{ loadScenario }, { compareModelsWith, resolveVariants }, { comparisonProblem }, { prepareResultFolder }, { formatComparison }] =
    await Promise.all([
      import('../scenario/load.js'),
      import('../compare/run.js'),
      import('../compare/types.js'),
      import('../output/resultFolder.js'),
      import('../output/comparison.js'),
    ]);
  const loaded = await loadScenario(scenario);
  if (!loaded.raw.variants?.length) {
    throw new PiezomapError('input', `${scenario}: the scenario has no "variants", so there is nothing to compare`, {
      key: 'variants',
      hint: 'add e.g. "variants": [{ "name": "more-pumping", "wells": [{ "id": "W1", "rate": -800 }] }], or use "piezomap solve"',
    });
  }
  // Every variant is resolved first, so that the folder check knows all inputs; then the folder is checked (and
  // locked) before the long work.
  const variants = await resolveVariants(loaded.model, loaded.raw);
  const inputs = [...loaded.model.inputFiles, ...variants.flatMap((v) => v.model.inputFiles)];
  const folder = await prepareResultFolder(outDir, Boolean(flags.overwrite), inputs);
  printNotes(folder.notes, io);
  const writers = import('../output/comparisonFiles.js');
  writers.catch(() => undefined);
  const comparison = await compareModelsWith(loaded.model, variants, solveExecutor, options);
  progress?.({ stage: 'write', message: `writing results to ${outDir}` });
  const { writeComparisonResults } = await writers;
  const summary = await writeComparisonResults(comparison, outDir, { overwrite: Boolean(flags.overwrite), pool, ...productOptions(flags) });
  clearProgress();
  if (flags.json) io.stdout(JSON.stringify(summary, null, 2) + '\n');
  else io.stdout(formatComparison(summary, outDir));
  const problem = comparisonProblem(comparison);
  if (problem) {
    io.stderr(`piezomap: ${problem.describe()}\n  no head.tif or drawdown.tif was written for it; diagnostics are in ${outDir}\n`);
    return exitCodeFor(problem);
  }
  return 0;
}

/** What preparing the result folder did (a stale lock taken over, leftovers removed); also recorded in summary.json. */
function printNotes(notes: string[], io: CliIO): void {
  for (const note of notes) io.stderr(`piezomap: note: ${note}\n`);
}

async function runInspect(scenario: string, flags: CommonFlags, io: CliIO): Promise<number> {
  const [
    { loadScenario },
    { assembleModel, withSolverSettings },
    { prepareComparison, resolveVariants },
    { prepareEnsemble },
    { chooseAutoMethod },
    inspect,
  ] = await Promise.all([
    import('../scenario/load.js'),
    import('../pipeline.js'),
    import('../compare/run.js'),
    import('../ensemble/realisation.js'),
    import('../solvers/registry.js'),
    import('./inspect.js'),
  ]);
  const { formatInspect, inspectReport } = inspect;
  const { model, raw } = await loadScenario(scenario);
  // As a solve would: the memory budget, the assembly, and every point located.
  const settled = withSolverSettings(model, {});
  const system = assembleModel(settled);
  // Variants are resolved and checked as compare would, without solving.
  const variants = await resolveVariants(model, raw);
  const prepared = prepareComparison(model, variants, {}, system);
  // The ensemble key as `ensemble` would check it: conditioning points on active cells, the embedding.
  if (model.ensemble) prepareEnsemble(model, variants);
  const report = inspectReport(settled, system, chooseAutoMethod(system.operator), prepared.variants);
  io.stdout(flags.json ? JSON.stringify(report, null, 2) + '\n' : formatInspect(report));
  return 0;
}

/** A command defined in a module of its own (the ensemble commands, src/cli/ensemble.ts). */
export type AddCommand = (program: Command, io: CliIO, run: (fn: () => Promise<number>) => () => Promise<void>) => void;

/** The program with solve, compare, inspect and demo, and the commands of `more`. */
export function buildProgram(io: CliIO, setExit: (code: number) => void, more: AddCommand[] = []): Command {
  const program = new Command();
  program
    .name('piezomap')
    .description(
      'Steady groundwater heads, drawdown, water budgets and capture zones from GeoTIFF rasters and a JSON scenario file.\n' + CAUTION,
    )
    .version(VERSION, '--version', 'print the version')
    .showHelpAfterError('(run with --help for usage)')
    .configureOutput({ writeOut: io.stdout, writeErr: io.stderr })
    .exitOverride();

  const run = (fn: () => Promise<number>) => async () => {
    setExit(await fn());
  };

  addSolverOptions(
    addCommon(
      program
        .command('solve')
        .description('solve the baseline of a scenario and write head.tif, budget.csv, summary.json into OUTDIR')
        .argument('<scenario>', 'scenario JSON file')
        .requiredOption('-o, --out <dir>', 'result folder (required)'),
    ),
  ).action(async (scenario: string, flags: SolveFlags) => {
    await run(() => runSolve(scenario, flags.out!, flags, io))();
  });

  addSolverOptions(
    addCommon(
      program
        .command('compare')
        .description(
          "solve the baseline and every variant of a scenario; write each one's results, drawdown.tif per variant, comparison.csv and summary.json into OUTDIR",
        )
        .argument('<scenario>', 'scenario JSON file with "variants"')
        .requiredOption('-o, --out <dir>', 'result folder (required)'),
    ),
  ).action(async (scenario: string, flags: SolveFlags) => {
    await run(() => runCompare(scenario, flags.out!, flags, io))();
  });

  addCommon(
    program
      .command('inspect')
      .description('load and validate a scenario; print the grid, counts and warnings; solve nothing')
      .argument('<scenario>', 'scenario JSON file'),
  ).action(async (scenario: string, flags: CommonFlags) => {
    await run(() => runInspect(scenario, flags, io))();
  });

  addSolverOptions(
    addCommon(
      program
        .command('demo')
        .description('solve the bundled demo scenario (data/valley.json)')
        .option('-o, --out <dir>', 'result folder; the demo replaces its own earlier results in its default folder', 'piezomap-demo'),
    ),
  ).action(async (flags: SolveFlags) => {
    // The demo owns its default folder: rerunning it replaces the earlier demo results.
    const overwrite = flags.overwrite ?? flags.out === 'piezomap-demo';
    await run(() => runSolve(demoScenarioPath(), flags.out!, { ...flags, overwrite }, io))();
  });

  for (const add of more) add(program, io, run);

  return program;
}

/** The commands buildProgram defines itself. */
const OWN_COMMANDS = new Set(['solve', 'compare', 'inspect', 'demo']);

/** Run the CLI; resolves to the exit code. */
export async function main(argv: string[], io: CliIO = defaultIO): Promise<number> {
  let exitCode = 0;
  // The ensemble commands (and their modules) are left out when the command is another one; help lists them.
  const command = argv.find((a) => !a.startsWith('-'));
  const more = command !== undefined && OWN_COMMANDS.has(command) ? [] : [(await import('./ensemble.js')).addEnsembleCommand];
  const program = buildProgram(
    io,
    (code) => {
      exitCode = code;
    },
    more,
  );
  const debug = argv.includes('--debug');
  try {
    await program.parseAsync(argv, { from: 'user' });
    return exitCode;
  } catch (error) {
    clearProgress();
    // A run that failed after preparing its result folder leaves no lock and no staging folder behind.
    abandonResultFoldersSync();
    if (error instanceof CommanderError) {
      if (error.code === 'commander.helpDisplayed' || error.code === 'commander.version' || error.code === 'commander.help') return 0;
      return 2;
    }
    if (error instanceof PiezomapError) {
      io.stderr(`piezomap: ${error.describe()}\n`);
      if (debug && error.stack) io.stderr(error.stack + '\n');
      return exitCodeFor(error);
    }
    io.stderr(`piezomap: internal error: ${describeThrown(error)}\n`);
    if (debug && error instanceof Error && error.stack) io.stderr(error.stack + '\n');
    else io.stderr('  (run with --debug for details)\n');
    return 1;
  }
}

/** Signal handling for the process entry point: remove temporary files, say so, exit. */
export function installSignalHandlers(): void {
  for (const signal of ['SIGINT', 'SIGTERM'] as const) {
    process.on(signal, () => {
      // Results are put in place in one synchronous block (src/output/resultFolder.ts), so a signal lands either
      // before it (the folder keeps its earlier results) or after it (the new results are complete).
      const { committed } = abandonResultFoldersSync();
      process.stderr.write(
        committed.length
          ? `\npiezomap: interrupted by ${signal}; the results in ${committed.join(', ')} were complete before it\n`
          : `\npiezomap: interrupted by ${signal}; no result files were completed, temporary files removed; earlier results, if any, are unchanged\n`,
      );
      process.exit(signal === 'SIGINT' ? 130 : 143);
    });
  }
}
