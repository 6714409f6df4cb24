/**
 * `piezomap ensemble`: the realisations of a scenario's `ensemble` (all of them, or one shard's), solved on a pool of
 * worker threads (inline when the compiled worker is absent, e.g. running from sources), gathered by index.
 * Input problems (the ensemble key, conditioning points, the embedding) are found here, in the main thread, before
 * any worker starts. Writing is the caller's: src/ensemble/files.ts makes the bytes, src/output/resultFolder.ts
 * writes them.
 */
import { createHash } from 'node:crypto';
import { hostname, availableParallelism } from 'node:os';
import { inputError, PiezomapError } from '../errors.js';
import { resolveVariants } from '../compare/run.js';
import { loadScenario, type ScenarioJson } from '../scenario/load.js';
import type { SolverOverrides } from '../scenario/solverSettings.js';
import type { ModelInput } from '../scenario/types.js';
import { VERSION } from '../version.js';
import { memoryLimit, formatBytes } from '../memory.js';
import { ensembleWorkerAvailable, runOnPool } from './pool.js';
import { prepareEnsemble, solveRealisation, type EnsembleContext } from './realisation.js';
import type { EnsembleRunInfo } from './files.js';
import type { EnsembleSetup, RealisationRecord } from './types.js';

export interface EnsembleOptions extends SolverOverrides {
  /** Worker threads (default: every core). */
  workers?: number;
  /** Run only shard k of n (1-based). */
  shard?: { k: number; n: number };
  /** Called after each realisation with the count done and the count to do. */
  onProgress?: (done: number, total: number) => void;
  /** Solve in this thread even when the worker script is there (library callers, tests). */
  inline?: boolean;
}

export interface EnsembleRun {
  setup: EnsembleSetup;
  /** Realisations [start, end) of this run (all, or the shard's), records in index order. */
  range: [number, number];
  records: RealisationRecord[];
  runInfo: EnsembleRunInfo;
  inputFiles: string[];
}

/** Realisations [start, end) of shard k of n: contiguous blocks, sizes differing by at most one. */
export function shardRange(realisations: number, k: number, n: number): [number, number] {
  return [Math.floor(((k - 1) * realisations) / n), Math.floor((k * realisations) / n)];
}

/**
 * `--shard` as given: "K/N" (1 <= K <= N), or "auto": a 0-based array index from the environment plus 1, N from
 * the environment too where the engine gives it (else from `count`), read from the first variable set of
 * SHARD_INDEX_VARIABLES.
 */
export const SHARD_INDEX_VARIABLES = [
  'PIEZOMAP_SHARD_INDEX',
  'SLURM_ARRAY_TASK_ID',
  'JOB_COMPLETION_INDEX',
  'AWS_BATCH_JOB_ARRAY_INDEX',
  'CLOUD_RUN_TASK_INDEX',
  'BATCH_TASK_INDEX',
];
export const SHARD_COUNT_VARIABLES = ['PIEZOMAP_SHARD_COUNT', 'SLURM_ARRAY_TASK_COUNT', 'CLOUD_RUN_TASK_COUNT'];

export function parseShard(given: string, env: NodeJS.ProcessEnv = process.env): { k: number; n: number } {
  const text = given.trim();
  if (text === 'auto') {
    const indexVar = SHARD_INDEX_VARIABLES.find((v) => env[v] !== undefined && env[v] !== '');
    if (!indexVar) {
      throw new PiezomapError('usage', `--shard auto: none of ${SHARD_INDEX_VARIABLES.join(', ')} is set`, {
        hint: 'run it as an array job, or give --shard K/N',
      });
    }
    const countVar = SHARD_COUNT_VARIABLES.find((v) => env[v] !== undefined && env[v] !== '');
    const index = Number(env[indexVar]);
    const count = countVar ? Number(env[countVar]) : NaN;
    if (!Number.isInteger(index) || index < 0)
      throw new PiezomapError('usage', `--shard auto: ${indexVar}="${env[indexVar]}" is not a 0-based index`);
    if (!countVar) {
      throw new PiezomapError(
        'usage',
        `--shard auto: ${indexVar} gives the index, but none of ${SHARD_COUNT_VARIABLES.join(', ')} gives the number of shards`,
        {
          hint: 'set PIEZOMAP_SHARD_COUNT to the array size (Kubernetes: from spec.completions)',
        },
      );
    }
    if (!Number.isInteger(count) || count < 1 || index >= count)
      throw new PiezomapError('usage', `--shard auto: ${countVar}="${env[countVar]}" does not fit index ${index} from ${indexVar}`);
    return { k: index + 1, n: count };
  }
  const m = /^(\d+)\/(\d+)$/.exec(text);
  const k = m ? Number(m[1]) : NaN;
  const n = m ? Number(m[2]) : NaN;
  if (!m || !(n >= 1) || !(k >= 1) || k > n)
    throw new PiezomapError('usage', `--shard "${given}": expected K/N with 1 <= K <= N (e.g. 3/8), or "auto"`);
  return { k, n };
}

/** The setup the result files need, as plain JSON (taken through JSON so that shards and one run hold the same numbers). */
export function ensembleSetup(ctx: EnsembleContext, raw: ScenarioJson, overrides: SolverOverrides): EnsembleSetup {
  const m = ctx.baseline;
  const s = ctx.settings;
  // The scenario as validated names its rasters by path only: their values (conductivity, and thickness when a
  // raster) go into the hash too, so that shards run against different data cannot be merged.
  const hash = createHash('sha256').update(JSON.stringify({ raw, overrides, version: VERSION }));
  hash.update(new Uint8Array(m.conductivity.buffer, m.conductivity.byteOffset, m.conductivity.byteLength));
  if (typeof m.thickness !== 'number') hash.update(new Uint8Array(m.thickness.buffer, m.thickness.byteOffset, m.thickness.byteLength));
  const fingerprint = hash.digest('hex');
  const setup: EnsembleSetup = {
    fingerprint,
    title: m.title,
    scenario: m.scenarioPath,
    units: m.units,
    grid: m.grid,
    realisations: s.realisations,
    seed: s.seed,
    logConductivity: { sd: s.sd, correlationLength: s.correlationLength, model: s.model },
    conditioning: s.conditioningFile ? { file: s.conditioningFile, points: s.conditioning.length } : null,
    embedding: ctx.generator.report,
    percentiles: s.percentiles,
    drawdownThresholds: s.drawdownThresholds,
    runs: ['baseline', ...ctx.variants.map((v) => v.name)],
    runTitles: [m.title, ...ctx.variants.map((v) => v.model.title)],
    columns: ctx.columns,
    runWells: [m, ...ctx.variants.map((v) => v.model)].map((model) => model.wells.map(({ id, x, y, rate }) => ({ id, x, y, rate }))),
    capture: ctx.capture,
    warnings: [...m.warnings],
  };
  if (ctx.generator.report.clipped > 0)
    setup.warnings.push(`circulant embedding: ${ctx.generator.report.clipped} eigenvalue(s) of rounding size below zero were set to zero`);
  return JSON.parse(JSON.stringify(setup)) as EnsembleSetup;
}

/** Bytes the records of `count` realisations hold (Float32 fields, Int16 capture codes), checked against the memory limit. */
function checkEnsembleMemory(setup: EnsembleSetup, count: number): void {
  const fields = 2 * setup.runs.length - 1;
  const bytes = count * (fields * 4 + (setup.capture ? setup.runs.length * 2 : 0)) * setup.grid.nx * setup.grid.ny;
  const limit = memoryLimit();
  if (bytes > 0.5 * limit.bytes) {
    throw inputError(
      `ensemble: ${count} realisation(s) of ${fields} field(s) on ${setup.grid.nx} × ${setup.grid.ny} cells keep ${formatBytes(bytes)} of values, more than half of the memory limit (${limit.source})`,
      {
        key: 'ensemble.realisations',
        hint: 'run it as shards (--shard K/N) on several machines and merge them (the merge reads the values a block of rows at a time), fewer realisations, or a coarser grid',
      },
    );
  }
}

export async function loadEnsemble(
  scenario: string,
  options: EnsembleOptions = {},
): Promise<{ ctx: EnsembleContext; setup: EnsembleSetup; model: ModelInput; inputFiles: string[]; seconds: number }> {
  const t0 = performance.now();
  const { model, raw } = await loadScenario(scenario);
  if (!model.ensemble) {
    throw inputError(`${scenario}: the scenario has no "ensemble" key, so there is nothing to run`, {
      key: 'ensemble',
      hint: 'add e.g. "ensemble": { "realisations": 200, "seed": 1, "logConductivity": { "sd": 0.5, "correlationLength": 300 } }',
    });
  }
  const variants = await resolveVariants(model, raw);
  const overrides = solverOverrides(options);
  const ctx = prepareEnsemble(model, variants, overrides);
  const inputFiles = [...new Set([...model.inputFiles, ...variants.flatMap((v) => v.model.inputFiles)])];
  return { ctx, setup: ensembleSetup(ctx, raw, overrides), model, inputFiles, seconds: (performance.now() - t0) / 1000 };
}

function solverOverrides(options: EnsembleOptions): SolverOverrides {
  const o: SolverOverrides = {};
  if (options.method !== undefined) o.method = options.method;
  if (options.tolerance !== undefined) o.tolerance = options.tolerance;
  if (options.maxIterations !== undefined) o.maxIterations = options.maxIterations;
  if (options.relaxation !== undefined) o.relaxation = options.relaxation;
  return o;
}

/** Run an ensemble (or one shard of it). Does not write anything. */
export async function runEnsemble(
  scenario: string,
  options: EnsembleOptions = {},
  loaded?: Awaited<ReturnType<typeof loadEnsemble>>,
): Promise<EnsembleRun> {
  const { ctx, setup, inputFiles, seconds: loadSeconds } = loaded ?? (await loadEnsemble(scenario, options));
  const range: [number, number] = options.shard
    ? shardRange(setup.realisations, options.shard.k, options.shard.n)
    : [0, setup.realisations];
  const indices = Array.from({ length: range[1] - range[0] }, (_, i) => range[0] + i);
  checkEnsembleMemory(setup, options.shard ? indices.length : setup.realisations);
  const tStart = performance.now();
  const byIndex = new Map<number, RealisationRecord>();
  const workers = options.workers ?? availableParallelism();
  const pooled = !options.inline && ensembleWorkerAvailable();
  if (pooled) {
    await runOnPool(scenario, solverOverrides(options), indices, workers, (record) => {
      byIndex.set(record.index, record);
      options.onProgress?.(byIndex.size, indices.length);
    });
  } else {
    for (const i of indices) {
      byIndex.set(i, solveRealisation(ctx, i));
      options.onProgress?.(byIndex.size, indices.length);
      // Let signals and other callbacks in between realisations.
      await new Promise((r) => setImmediate(r));
    }
  }
  const records = indices.map((i) => byIndex.get(i)!);
  const tEnd = performance.now();
  return {
    setup,
    range,
    records,
    inputFiles,
    runInfo: {
      workers: pooled ? Math.max(1, Math.min(workers, indices.length)) : 1,
      hosts: [hostname()],
      seconds: { load: loadSeconds, realisations: (tEnd - tStart) / 1000 },
    },
  };
}
