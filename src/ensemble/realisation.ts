/**
 * One realisation of an ensemble: its ln K field (circulant embedding, conditioned when measurements are given), the
 * baseline and every variant solved on the realisation's conductivity as `compare` solves them (variants that change
 * only wells or recharge share the baseline's operator and solver session), and what the statistics need kept:
 * head per cell (Float32), drawdown per cell per variant (Float32), head at every well, observation and receptor.
 * Pure computation on a prepared context; the same function runs in a worker thread or inline, so results do not
 * depend on where they were computed.
 */
import { headAtPoint, wellCells } from '../analysis/points.js';
import { resultProblem, type SolveResult } from '../analysis/result.js';
import { comparePlan, prepareComparison } from '../compare/run.js';
import { inputError } from '../errors.js';
import { runInline } from '../executor/plan.js';
import { fieldsEqual } from '../field.js';
import { cellAt, cellHeight, cellWidth, type Grid } from '../grid.js';
import type { RunOptions } from '../pipeline.js';
import type { EnsembleInput, ModelInput, WellInput } from '../scenario/types.js';
import { Conditioner, type ConditioningDatum } from './conditioning.js';
import { GaussianFieldGenerator, type EmbeddingReport } from './field.js';
import type { CaptureSetup, CaptureWell, PointColumn, RealisationRecord, RunRecord } from './types.js';

export interface EnsembleContext {
  baseline: ModelInput;
  variants: Array<{ name: string; model: ModelInput }>;
  settings: EnsembleInput;
  generator: GaussianFieldGenerator;
  conditioner: Conditioner | null;
  /** Measured cells and their conductivity, written as measured. */
  measured: Array<{ cell: number; k: number }>;
  columns: PointColumn[];
  options: RunOptions;
  /** Capture-zone probability: capture times and each run's wells; null when not counted. */
  capture: CaptureSetup | null;
}

/**
 * The capture wells of a run as particle tracking labels them (src/analysis/tracking/fromSystem.ts): wells sharing a
 * cell form one, named by their ids joined with "+", in scenario order; kept when their rates sum to a withdrawal.
 * File stems as `exchange-NAME.tif` makes them: letters, digits, "-" and "_", unique ignoring case.
 */
export function captureWells(grid: Grid, wells: readonly WellInput[]): CaptureWell[] {
  const cells = wellCells(grid, wells);
  const groups = new Map<number, { id: string; rate: number }>();
  wells.forEach((w, k) => {
    const cell = cells[k]!;
    if (cell < 0) return;
    const group = groups.get(cell);
    if (group) {
      group.id = `${group.id}+${w.id}`;
      group.rate += w.rate;
    } else groups.set(cell, { id: w.id, rate: w.rate });
  });
  const used = new Set<string>();
  const out: CaptureWell[] = [];
  for (const { id, rate } of groups.values()) {
    if (!(rate < 0)) continue;
    const base = id.replace(/[^A-Za-z0-9_-]+/g, '-');
    let stem = base;
    for (let k = 2; used.has(stem.toLowerCase()); k++) stem = `${base}-${k}`;
    used.add(stem.toLowerCase());
    out.push({ id, stem });
  }
  return out;
}

/**
 * The model a realisation solves: tracking reduced to what the capture probability needs (no pathlines, no point
 * tracks), or dropped when capture probability is off.
 */
function ensembleModel(model: ModelInput, capture: CaptureSetup | null): ModelInput {
  if (!model.tracking) return model;
  if (!capture) {
    const { tracking: _dropped, ...rest } = model;
    return rest;
  }
  // Every run counts the baseline's capture times (travel times are exact up to the largest of them).
  return { ...model, tracking: { ...model.tracking, captureTimes: [...capture.times], particlesPerWell: 0, points: [] } };
}

/** The point columns of ensemble.csv: wells (baseline's, then those only variants have), observations, receptors. */
export function pointColumns(baseline: ModelInput, variants: ReadonlyArray<{ model: ModelInput }>): PointColumn[] {
  const columns: PointColumn[] = [];
  const seen = new Map<string, string>();
  const add = (id: string, kind: PointColumn['kind'], x: number, y: number) => {
    const other = seen.get(id);
    if (other === kind) return;
    if (other !== undefined) {
      throw inputError(`ensemble: the id "${id}" names both a ${other} and a ${kind}, so ensemble.csv cannot give each its own column`, {
        key: 'ensemble',
        hint: 'give wells, observations and receptors distinct ids',
      });
    }
    seen.set(id, kind);
    columns.push({ id, kind, x, y });
  };
  for (const m of [baseline, ...variants.map((v) => v.model)]) for (const w of m.wells) add(w.id, 'well', w.x, w.y);
  for (const o of baseline.observations) add(o.id, 'observation', o.x, o.y);
  for (const r of baseline.receptors ?? []) add(r.id, 'receptor', r.x, r.y);
  return columns;
}

/** Set up what every realisation shares: the field generator (eigenvalues), the kriging system, the point columns. */
export function prepareEnsemble(
  baseline: ModelInput,
  variants: Array<{ name: string; model: ModelInput }>,
  options: RunOptions = {},
): EnsembleContext {
  const settings = baseline.ensemble;
  if (!settings)
    throw inputError(`${baseline.scenarioPath}: the scenario has no "ensemble" key`, {
      key: 'ensemble',
      hint: 'add e.g. "ensemble": { "realisations": 200, "seed": 1, "logConductivity": { "sd": 0.5, "correlationLength": 300 } }',
    });
  const grid = baseline.grid;
  const spec = {
    nx: grid.nx,
    ny: grid.ny,
    dx: cellWidth(grid),
    dy: cellHeight(grid),
    sd: settings.sd,
    lx: settings.correlationLength[0],
    ly: settings.correlationLength[1],
    model: settings.model,
  };
  const generator = new GaussianFieldGenerator(spec);
  const measured: EnsembleContext['measured'] = [];
  const data: ConditioningDatum[] = [];
  for (const m of settings.conditioning) {
    const where = `ensemble.conditioning "${settings.conditioningFile}" ${m.source} (id "${m.id}")`;
    const cell = cellAt(grid, m.x, m.y);
    if (!cell) throw inputError(`${where}: the point (${m.x}, ${m.y}) is outside the grid`, { key: 'ensemble.conditioning' });
    const p = cell.row * grid.nx + cell.col;
    const k = baseline.conductivity[p]!;
    if (!(k > 0))
      throw inputError(`${where}: the point lies in an inactive cell (row ${cell.row}, col ${cell.col})`, { key: 'ensemble.conditioning' });
    data.push({ id: m.id, row: cell.row, col: cell.col, y: Math.log(m.k / k) });
    measured.push({ cell: p, k: m.k });
  }
  if (data.length && settings.sd === 0) {
    throw inputError(
      'ensemble.conditioning: with logConductivity.sd = 0 every realisation is the raster itself, so measured values cannot be honoured',
      {
        key: 'ensemble.conditioning',
        hint: 'give sd > 0, or drop the conditioning file',
      },
    );
  }
  const conditioner = data.length ? new Conditioner(spec, data) : null;
  const counted = settings.captureProbability && baseline.tracking !== undefined;
  const runs = [{ model: baseline }, ...variants];
  const capture: CaptureSetup | null = counted
    ? {
        times: [...baseline.tracking!.captureTimes],
        wells: runs.map(({ model }) => (model.tracking ? captureWells(grid, model.wells) : [])),
      }
    : null;
  return {
    baseline: ensembleModel(baseline, capture),
    variants: variants.map((v) => ({ name: v.name, model: ensembleModel(v.model, capture) })),
    settings,
    generator,
    conditioner,
    measured,
    columns: pointColumns(baseline, variants),
    options,
    capture,
  };
}

/** The realisation's conductivity: the raster's K times exp(Y); measured cells as measured. */
function realisedConductivity(k: Float64Array, y: Float64Array, measured: EnsembleContext['measured']): Float64Array {
  const out = new Float64Array(k.length);
  for (let p = 0; p < k.length; p++) out[p] = k[p]! * Math.exp(y[p]!);
  for (const m of measured) out[m.cell] = m.k;
  return out;
}

/** The ln K deviations of realisation `index` (conditioned when measurements are given). */
export function realisationField(ctx: EnsembleContext, index: number): Float64Array {
  const y = ctx.generator.generate(ctx.settings.seed, index);
  ctx.conditioner?.apply(y);
  return y;
}

function pointHeads(grid: Grid, head: Float64Array, columns: readonly PointColumn[], present: ReadonlySet<string>): Array<number | null> {
  return columns.map((c) => {
    if (!present.has(c.id)) return null;
    const at = headAtPoint(grid, head, c.x, c.y);
    if (at !== null) return at;
    const cell = cellAt(grid, c.x, c.y);
    const v = cell ? head[cell.row * grid.nx + cell.col]! : NaN;
    return Number.isFinite(v) ? v : null;
  });
}

/**
 * The capture code per cell (RunRecord.capture) from the run's capture result: the capturing-well raster of
 * `solve`'s tracking and the travel time to that well.
 */
function captureCodes(ctx: EnsembleContext, run: number, result: SolveResult): Int16Array | null {
  const setup = ctx.capture;
  if (!setup) return null;
  const capture = result.tracking?.capture;
  const out = new Int16Array(result.head.length).fill(-1);
  if (!capture) return out;
  const times = setup.times;
  const T = times.length;
  const index = new Map(setup.wells[run]!.map((w, k) => [w.id, k]));
  const toSetup = Int32Array.from(capture.wells, (w) => index.get(w.id) ?? -1);
  const { capturingWell, travelTime } = capture;
  for (let p = 0; p < out.length; p++) {
    const i = capturingWell[p]!;
    if (i < 0) continue;
    const k = toSetup[i]!;
    if (k < 0) continue;
    const t = travelTime[p]!;
    let c = 0;
    while (c < T && !(t <= times[c]!)) c++;
    out[p] = k * (T + 1) + c;
  }
  return out;
}

function runRecord(
  ctx: EnsembleContext,
  run: number,
  result: SolveResult | null,
  reason: string | null,
  drawdown: Float64Array | null,
): RunRecord {
  if (!result || reason !== null)
    return {
      converged: false,
      reason: reason ?? 'not solved',
      head: null,
      drawdown: null,
      points: ctx.columns.map(() => null),
      capture: null,
    };
  const model = result.model;
  const present = new Set<string>([
    ...model.wells.map((w) => w.id),
    ...ctx.baseline.observations.map((o) => o.id),
    ...(ctx.baseline.receptors ?? []).map((r) => r.id),
  ]);
  // A well that a variant moves is read where that run has it.
  const columns = ctx.columns.map((c) => {
    const w = c.kind === 'well' ? model.wells.find((x) => x.id === c.id) : undefined;
    return w ? { ...c, x: w.x, y: w.y } : c;
  });
  return {
    converged: true,
    reason: null,
    head: Float32Array.from(result.head),
    drawdown: drawdown ? Float32Array.from(drawdown) : null,
    points: pointHeads(model.grid, result.head, columns, present),
    capture: captureCodes(ctx, run, result),
  };
}

/** The baseline conductivity of realisation `index`. */
export function realisationConductivity(ctx: EnsembleContext, index: number): Float64Array {
  return realisedConductivity(ctx.baseline.conductivity, realisationField(ctx, index), ctx.measured);
}

/** Solve realisation `index`: the baseline and every variant on the realisation's conductivity. */
export function solveRealisation(ctx: EnsembleContext, index: number): RealisationRecord {
  const y = realisationField(ctx, index);
  const baseK = realisedConductivity(ctx.baseline.conductivity, y, ctx.measured);
  const baseline: ModelInput = { ...ctx.baseline, conductivity: baseK };
  const variants = ctx.variants.map(({ name, model }) => ({
    name,
    model: {
      ...model,
      conductivity: fieldsEqual(model.conductivity, ctx.baseline.conductivity)
        ? baseK
        : realisedConductivity(model.conductivity, y, ctx.measured),
    },
  }));
  // one thread per solve: the realisations themselves run in parallel, one per worker (no oversubscription)
  const options = { ...ctx.options, threads: 1 };
  const comparison = runInline(comparePlan(prepareComparison(baseline, variants, options), options));
  const baseProblem = resultProblem(comparison.baseline);
  const runs: RunRecord[] = [runRecord(ctx, 0, comparison.baseline, baseProblem ? baseProblem.message : null, null)];
  for (let k = 0; k < ctx.variants.length; k++) {
    const v = comparison.variants[k];
    if (!v) runs.push(runRecord(ctx, k + 1, null, 'the baseline of this realisation did not give a sound result', null));
    else runs.push(runRecord(ctx, k + 1, v.result, v.problem ? v.problem.message : null, v.drawdown));
  }
  return { index, runs };
}

export type { EmbeddingReport };
