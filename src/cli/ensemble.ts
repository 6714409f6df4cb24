/**
 * The `ensemble` and `ensemble merge` commands: parse, run (src/ensemble/run.ts), write (src/ensemble/files.ts via
 * the staged result folder), print. Exit 0 when results were written (realisations that did not converge are
 * listed in summary.json and left out of the statistics), 3 when no realisation of the baseline converged.
 */
import { type Command, Option } from 'commander';
import { PiezomapError } from '../errors.js';
import { CAUTION } from '../caution.js';
import { formatLevel } from '../report/text.js';
import { prepareResultFolder, releaseResultFolder, writeResultFiles } from '../output/resultFolder.js';
import { parseSolverOption } from '../scenario/solverSettings.js';
import { solverMethodNames } from '../solvers/registry.js';
import { ensembleFiles, recordSource, shardFiles, type EnsembleSummaryJson } from '../ensemble/files.js';
import { loadEnsemble, parseShard, runEnsemble, type EnsembleOptions } from '../ensemble/run.js';
import { readShards } from '../ensemble/shard.js';
/** Where the command prints (the CLI's streams, or a test's). */
interface CliIO {
  stdout: (text: string) => void;
  stderr: (text: string) => void;
}

interface EnsembleFlags {
  out?: string;
  workers?: number;
  shard?: string;
  overwrite?: boolean;
  json?: boolean;
  quiet?: boolean;
  debug?: boolean;
  method?: string;
  tolerance?: number;
  maxIterations?: number;
  relaxation?: number;
  blockRows?: number;
}

function positiveInteger(name: string) {
  return (value: string): number => {
    const v = Number(value);
    if (!Number.isInteger(v) || v < 1) throw new PiezomapError('usage', `${name} must be a whole number >= 1, got "${value}"`);
    return v;
  };
}

/** "[####....] 37/200 realisations, 1m 12s left" on a terminal's stderr, nothing elsewhere. */
function progressBar(quiet: boolean, stream: NodeJS.WriteStream = process.stderr): ((done: number, total: number) => void) | undefined {
  if (quiet || !stream.isTTY) return undefined;
  const start = Date.now();
  let last = 0;
  return (done, total) => {
    const t = Date.now();
    if (done < total && t - last < 200) return;
    last = t;
    const width = 24;
    const filled = Math.round((done / total) * width);
    const left = done > 0 ? (((t - start) / done) * (total - done)) / 1000 : NaN;
    const eta = Number.isFinite(left)
      ? left >= 60
        ? `${Math.floor(left / 60)}m ${Math.round(left % 60)}s left`
        : `${Math.round(left)}s left`
      : '';
    stream.write(`\r\x1b[2Krealisations [${'#'.repeat(filled)}${'.'.repeat(width - filled)}] ${done}/${total} ${eta}`);
    if (done === total) stream.write('\r\x1b[2K');
  };
}

function formatEnsemble(summary: EnsembleSummaryJson, outDir: string): string {
  const lines = [
    `piezomap ensemble: ${summary.title}`,
    `  ${summary.realisations} realisations, seed ${summary.seed}, sd(ln K) ${summary.logConductivity.sd}`,
  ];
  for (const run of summary.runs) {
    lines.push(
      `  ${run.name}: ${run.converged} converged${run.notConverged.length ? `, ${run.notConverged.length} left out (not converged)` : ''}`,
    );
    for (const p of run.drawdownAtPoints ?? []) {
      if (p.kind !== 'receptor') continue;
      const exc = p.exceedance.map(
        ({ threshold, probability }) =>
          `P(drawdown > ${threshold} ${summary.units.length}) = ${probability === null ? 'n/a' : probability.toFixed(3)}`,
      );
      lines.push(
        `    receptor ${p.id}: mean drawdown ${p.mean === null ? 'n/a' : formatLevel(p.mean)} ${summary.units.length}${exc.length ? '; ' + exc.join(', ') : ''}`,
      );
    }
    const L = summary.units.length;
    for (const well of run.captureProbability ?? []) {
      const steady = well.zones[well.zones.length - 1]!;
      const area = (a: number) => `${Math.round(a)} ${L}²`;
      const inside = steady.receptors.filter((r) => r.probability !== null && r.probability > 0);
      lines.push(
        `    capture zone of ${well.well} (steady): expected area ${area(steady.expectedArea)}, P >= 0.5 on ${area(steady.areaP50)}, P >= 0.9 on ${area(steady.areaP90)}` +
          (inside.length ? `; ${inside.map((r) => `receptor ${r.id} inside with P = ${r.probability!.toFixed(3)}`).join(', ')}` : ''),
      );
    }
  }
  lines.push(`  results in ${outDir}`, `  ${CAUTION}`);
  return lines.join('\n') + '\n';
}

function requireOut(flags: EnsembleFlags): void {
  if (!flags.out) throw new PiezomapError('usage', "required option '-o, --out <dir>' not specified");
}

async function runEnsembleCommand(scenario: string, flags: EnsembleFlags, io: CliIO): Promise<number> {
  requireOut(flags);
  const options: EnsembleOptions = {};
  if (flags.workers !== undefined) options.workers = flags.workers;
  if (flags.shard !== undefined) options.shard = parseShard(flags.shard);
  if (flags.method) options.method = flags.method;
  if (flags.tolerance !== undefined) options.tolerance = flags.tolerance;
  if (flags.maxIterations !== undefined) options.maxIterations = flags.maxIterations;
  if (flags.relaxation !== undefined) options.relaxation = flags.relaxation;
  const progress = progressBar(Boolean(flags.quiet));
  if (progress) options.onProgress = progress;
  // The folder is checked (inputs, earlier results) and locked before the long work, with the scenario's inputs.
  const loaded = await loadEnsemble(scenario, options);
  const folder = await prepareResultFolder(flags.out!, Boolean(flags.overwrite), loaded.inputFiles);
  try {
    const run = await runEnsemble(scenario, options, loaded);
    run.runInfo.seconds.total = run.runInfo.seconds.load! + run.runInfo.seconds.realisations!;
    if (options.shard) {
      await writeResultFiles(folder, shardFiles(run.setup, options.shard, run.range, run.records, run.runInfo));
      const failed = run.records.filter((r) => !r.runs.every((x) => x.converged)).length;
      const text = `piezomap ensemble: shard ${options.shard.k}/${options.shard.n}, realisations ${run.range[0]}..${run.range[1] - 1} (${run.records.length}) written to ${flags.out}${failed ? `; ${failed} with a run not converged` : ''}\n  combine the shards with: piezomap ensemble merge SHARD_DIR... -o OUTDIR\n`;
      io.stdout(flags.json ? JSON.stringify({ shard: options.shard, range: run.range, run: run.runInfo }, null, 2) + '\n' : text);
      return 0;
    }
    const { files, summary } = ensembleFiles(recordSource(run.setup, run.records), {
      ...run.runInfo,
      ...(folder.notes.length ? { notes: folder.notes } : {}),
    });
    await writeResultFiles(folder, files);
    io.stdout(flags.json ? JSON.stringify(summary, null, 2) + '\n' : formatEnsemble(summary, flags.out!));
    return noneConverged(summary, io);
  } finally {
    releaseResultFolder(folder.dir);
  }
}

function noneConverged(summary: EnsembleSummaryJson, io: CliIO): number {
  if (summary.runs[0]!.converged === 0) {
    io.stderr('piezomap: no realisation of the baseline reached the solver tolerance; see runs.notConverged in summary.json\n');
    return 3;
  }
  return 0;
}

async function runMerge(dirs: string[], flags: EnsembleFlags, io: CliIO): Promise<number> {
  requireOut(flags);
  const merged = await readShards(dirs);
  let folder: Awaited<ReturnType<typeof prepareResultFolder>>;
  try {
    folder = await prepareResultFolder(flags.out!, Boolean(flags.overwrite), merged.folders);
  } catch (thrown) {
    merged.close();
    throw thrown;
  }
  try {
    const { files, summary } = ensembleFiles(merged.source, merged.runInfo, flags.blockRows ? { blockRows: flags.blockRows } : {});
    merged.close();
    await writeResultFiles(folder, files);
    io.stdout(flags.json ? JSON.stringify(summary, null, 2) + '\n' : formatEnsemble(summary, flags.out!));
    return noneConverged(summary, io);
  } finally {
    merged.close();
    releaseResultFolder(folder.dir);
  }
}

/** Add `ensemble` (with `merge`) to the program. */
export function addEnsembleCommand(program: Command, io: CliIO, run: (fn: () => Promise<number>) => () => Promise<void>): void {
  // -o is checked in the actions: a required option on `ensemble` would also be demanded of `ensemble merge`.
  const common = (cmd: Command) =>
    cmd
      .option('-o, --out <dir>', 'result folder (required)')
      .option('--overwrite', 'replace results already in the output folder')
      .option('--json', 'print the machine-readable summary on stdout instead of the human one')
      .option('--quiet', 'no progress on stderr')
      .option('--debug', 'show stack traces for errors');
  const ensemble = common(
    program
      .command('ensemble')
      .description(
        'solve the baseline and every variant over realisations of ln K (the scenario\'s "ensemble" key); write per-cell statistics, ensemble.csv and summary.json into OUTDIR',
      )
      .argument('<scenario>', 'scenario JSON file with "ensemble"')
      .option('--workers <n>', 'worker threads (default: every core)', positiveInteger('--workers'))
      .option(
        '--shard <K/N|auto>',
        'run only shard K of N into OUTDIR (combine with "ensemble merge"); "auto": the array index from the environment (SLURM_ARRAY_TASK_ID, JOB_COMPLETION_INDEX, ...) plus 1',
      )
      .addOption(
        new Option('--method <name>', `solver method (overrides the scenario): ${solverMethodNames().join(', ')}`).argParser((v) =>
          parseSolverOption('method', v),
        ),
      )
      .option('--tolerance <number>', 'relative residual to reach (overrides the scenario)', (v) => parseSolverOption('tolerance', v))
      .option('--max-iterations <n>', 'iteration cap (overrides the scenario)', (v) => parseSolverOption('maxIterations', v))
      .option('--relaxation <omega>', 'relaxation factor for SOR', (v) => parseSolverOption('relaxation', v)),
  ).action(async (scenario: string, flags: EnsembleFlags) => {
    await run(() => runEnsembleCommand(scenario, flags, io))();
  });
  common(
    ensemble
      .command('merge')
      .description('combine shard folders of one ensemble into its results (identical to a one-machine run)')
      .argument('<shards...>', 'shard folders')
      // Internal: rows per block of the out-of-core statistics (default: as many as fit 64 MiB), for tests and measurements.
      .addOption(new Option('--block-rows <n>', 'rows per block').argParser(positiveInteger('--block-rows')).hideHelp()),
  ).action(async (shards: string[], flags: EnsembleFlags) => {
    // Options written after "merge" may be taken by `ensemble` itself (commander's global options): use both.
    const given = {
      ...(ensemble.opts() as EnsembleFlags),
      ...Object.fromEntries(Object.entries(flags).filter(([, v]) => v !== undefined)),
    } as EnsembleFlags;
    await run(() => runMerge(shards, given, io))();
  });
}
