import { CAUTION } from '../caution.js';
import { cellHeight, cellWidth, crsLabel } from '../grid.js';
import type { SolveResult } from '../analysis/result.js';
import type { WaterBudget } from '../analysis/budget.js';
import type { CalibrationStatistics } from '../analysis/calibration.js';
import { csvRow } from './csv.js';
import { trackingLines, trackingSummary } from './tracking.js';
import type { OuterReport } from '../discretisation/outerLoop.js';
import { dryCells, saturatedThicknessField, type WaterTable } from '../discretisation/aquifer.js';

/** Round to 12 significant digits so files are stable and readable (float noise beyond that is meaningless here). */
export function tidy(v: number): number {
  return Number.isFinite(v) ? Number(v.toPrecision(12)) : v;
}

/** Smallest, largest and mean head over the cells that have one: active, and not dry in a water-table aquifer. */
export function headRange(head: Float64Array, table: WaterTable | null = null): { min: number; max: number; mean: number } {
  let min = Infinity,
    max = -Infinity,
    sum = 0,
    count = 0;
  const bottom = table?.bottom;
  for (let p = 0; p < head.length; p++) {
    const h = head[p]!;
    // dry cells (head at or below the bottom) have no head: head.tif shows them as nodata (headsForOutput)
    if (h === h && !(bottom !== undefined && h <= bottom[p]!)) {
      if (h < min) min = h;
      if (h > max) max = h;
      sum += h;
      count++;
    }
  }
  return { min, max, mean: count ? sum / count : NaN };
}

export interface SummaryJson {
  title: string;
  piezomap: string;
  scenario: string;
  units: { length: string; time: string };
  grid: Record<string, unknown>;
  solver: Record<string, unknown>;
  budget: {
    terms: Array<{ term: string; inflow: number; outflow: number; parts?: Array<{ part: string; inflow: number; outflow: number }> }>;
    totalIn: number;
    totalOut: number;
    discrepancyPercent: number;
  };
  head: { min: number; max: number; mean: number };
  wells: Array<Record<string, unknown>>;
  observations: Array<Record<string, unknown>>;
  warnings: string[];
  files: string[];
  timings: Record<string, number>;
  caution: string;
  [extra: string]: unknown;
}

export function buildSummary(result: SolveResult, files: string[], version: string): SummaryJson {
  const { model, system, stats, budget } = result;
  const range = headRange(result.head, system.waterTable);
  return {
    title: model.title,
    piezomap: version,
    scenario: model.scenarioPath,
    units: model.units,
    grid: {
      nx: model.grid.nx,
      ny: model.grid.ny,
      dx: cellWidth(model.grid),
      dy: cellHeight(model.grid),
      crs: crsLabel(model.grid.crs),
      geotransform: [...model.grid.transform],
      activeCells: system.counts.active,
      fixedHeadCells: system.counts.fixed,
      unknowns: system.counts.unknowns,
      regions: system.counts.regions,
    },
    solver: {
      method: stats.method,
      requested: model.solver.method,
      iterations: stats.iterations,
      relativeResidual: stats.relativeResidual,
      converged: stats.converged,
      stopReason: stats.stopReason,
      tolerance: model.solver.tolerance,
      maxIterations: model.solver.maxIterations,
      criterion: stats.criterion,
      convergenceFactor: stats.convergenceFactor,
      spectralRadius: stats.spectralRadius,
      headDatum: tidy(system.datum),
      setupSeconds: tidy(stats.setupSeconds),
      seconds: tidy(stats.solveSeconds),
      peakMemoryMiB: tidy(result.peakMemoryMiB),
      notes: stats.notes,
      // Only when a term is nonlinear, so that linear runs keep their summary as it was.
      ...(result.outer.stopReason === 'linear'
        ? {}
        : {
            outerIterations: result.outer.iterations,
            outerStopReason: result.outer.stopReason,
            innerIterationsTotal: result.outer.innerIterations,
            outerHistory: result.outer.history.map((h) => ({
              ...h,
              maxHeadChange: tidy(h.maxHeadChange),
              flowResidual: tidy(h.flowResidual),
            })),
          }),
    },
    ...(system.waterTable === null ? {} : { aquifer: waterTableSummary(result) }),
    budget: budgetJson(budget),
    head: { min: tidy(range.min), max: tidy(range.max), mean: tidy(range.mean) },
    wells: result.wells.map((w, k) => {
      const bore = result.wellbore[k];
      return {
        id: w.id,
        x: w.x,
        y: w.y,
        row: w.row,
        col: w.col,
        rate: w.rate,
        cellHead: tidy(w.cellHead),
        ...(bore
          ? {
              wellboreHead: tidy(bore.wellboreHead),
              radius: bore.radius,
              radiusDefaulted: bore.radiusDefaulted,
              equivalentRadius: tidy(bore.equivalentRadius),
              ...(bore.minimumHead !== null ? { minimumHead: bore.minimumHead, belowMinimum: bore.belowMinimum } : {}),
              ...(system.waterTable === null
                ? {}
                : { undeliveredRate: tidy(bore.undeliveredRate), wellboreShortfall: tidy(bore.wellboreShortfall), dry: bore.dry }),
            }
          : {}),
      };
    }),
    observations: result.observations.map((o) => ({
      id: o.id,
      x: o.x,
      y: o.y,
      row: o.row,
      col: o.col,
      simulated: tidy(o.simulated),
      observed: o.observed,
      residual: tidy(o.residual),
    })),
    calibration: calibrationJson(result.calibration),
    ...(result.tracking ? { tracking: trackingSummary(result.tracking) } : {}),
    warnings: result.warnings,
    files,
    timings: Object.fromEntries(Object.entries(result.timings).map(([k, v]) => [k, tidy(v)])),
    caution: CAUTION,
  };
}

/** Calibration statistics for summary.json (rounded), or null without observations. */
export function calibrationJson(stats: CalibrationStatistics | null): Record<string, number | null> | null {
  if (!stats) return null;
  return {
    count: stats.count,
    meanError: tidy(stats.meanError),
    meanAbsoluteError: tidy(stats.meanAbsoluteError),
    rmsError: tidy(stats.rmsError),
    observedRange: tidy(stats.observedRange),
    scaledRmsPercent: stats.scaledRmsPercent === null ? null : tidy(stats.scaledRmsPercent),
  };
}

export function budgetJson(budget: WaterBudget): SummaryJson['budget'] {
  return {
    terms: budget.terms.map((t) => ({
      term: t.term,
      inflow: tidy(t.inflow),
      outflow: tidy(t.outflow),
      ...(t.parts ? { parts: t.parts.map((r) => ({ part: r.part, inflow: tidy(r.inflow), outflow: tidy(r.outflow) })) } : {}),
    })),
    totalIn: tidy(budget.totalIn),
    totalOut: tidy(budget.totalOut),
    discrepancyPercent: tidy(budget.discrepancyPercent),
  };
}

export function budgetCsv(budget: WaterBudget): string {
  const lines = [csvRow(['term', 'inflow', 'outflow'])];
  for (const t of budget.terms) lines.push(csvRow([t.term, tidy(t.inflow), tidy(t.outflow)]));
  lines.push(csvRow(['total', tidy(budget.totalIn), tidy(budget.totalOut)]));
  return lines.join('\n') + '\n';
}

/**
 * convergence.csv of a run with an outer iteration (nonlinear terms, water-table aquifers): one row per outer
 * iteration with its inner (linear) iterations, largest head change, flow residual of the nonlinear equations, dry
 * cells, damping factor, cells whose fall was limited, and whether the solver was set up again.
 */
export function outerConvergenceCsv(outer: OuterReport): string {
  const lines = [
    'outer_iteration,inner_iterations,max_head_change,flow_residual,dry_cells,damping,limited_cells,solver_rebuilt,state_changes',
  ];
  outer.history.forEach((h, k) =>
    lines.push(
      `${k + 1},${h.innerIterations},${h.maxHeadChange},${h.flowResidual},${h.dryCells},${h.damping},${h.limitedCells},${h.rebuilt ? 1 : 0},${h.stateChanges}`,
    ),
  );
  return lines.join('\n') + '\n';
}

export function convergenceCsv(history: number[]): string {
  const lines = [csvRow(['iteration', 'relative_residual'])];
  history.forEach((r, k) => lines.push(csvRow([k, r])));
  return lines.join('\n') + '\n';
}

function num(v: number, digits = 4): string {
  if (!Number.isFinite(v)) return String(v);
  const a = Math.abs(v);
  if (a !== 0 && (a >= 1e7 || a < 1e-3)) return v.toExponential(2);
  return v.toLocaleString('en-US', { maximumFractionDigits: digits, minimumFractionDigits: 0 });
}

/** Column widths by a loop: spreading a long list into Math.max overflows the stack (200 000 wells did). */
function columnWidths(rows: string[][]): number[] {
  const widths = rows[0]!.map(() => 0);
  for (const r of rows) for (let c = 0; c < widths.length; c++) widths[c] = Math.max(widths[c]!, r[c]!.length);
  return widths;
}

/** Rows printed per table of the human summary; the rest are counted (all of them are in summary.json). */
export const MAX_PRINTED_ROWS = 50;

/** The header row and at most MAX_PRINTED_ROWS rows (of `total`), plus a line counting the rest. */
function capped(rows: string[][], what: string, total: number): { rows: string[][]; rest: string[] } {
  const more = total - MAX_PRINTED_ROWS;
  if (more <= 0) return { rows, rest: [] };
  return {
    rows: rows.slice(0, MAX_PRINTED_ROWS + 1),
    rest: [`  ... and ${more.toLocaleString('en-US')} more ${what} (all in summary.json)`],
  };
}

function appendAll(out: string[], lines: readonly string[]): void {
  for (const line of lines) out.push(line);
}

function table(rows: string[][], alignRight: boolean[]): string[] {
  const widths = columnWidths(rows);
  return rows.map(
    (r) =>
      '  ' +
      r
        .map((cell, c) => (alignRight[c] ? cell.padStart(widths[c]!) : cell.padEnd(widths[c]!)))
        .join('  ')
        .trimEnd(),
  );
}

/** One line of calibration statistics, e.g. for the printed summaries of solve and compare. */
export function calibrationLine(c: Record<string, number | null>, L: string): string {
  const scaled = c.scaledRmsPercent === null || c.scaledRmsPercent === undefined ? '' : `, RMS/range ${num(c.scaledRmsPercent, 1)} %`;
  return `  ${c.count} observation(s): mean error ${num(c.meanError!, 3)} ${L}, mean absolute error ${num(c.meanAbsoluteError!, 3)} ${L}, RMS error ${num(c.rmsError!, 3)} ${L}${scaled}`;
}

/** The human-readable summary printed after `solve`; ends with the caution. */
export function formatSummary(summary: SummaryJson, outDir: string | null): string {
  const L = summary.units.length;
  const T = summary.units.time;
  const g = summary.grid as { nx: number; ny: number; dx: number; dy: number; crs: string; activeCells: number; fixedHeadCells: number };
  const s = summary.solver as {
    method: string;
    iterations: number;
    relativeResidual: number;
    converged: boolean;
    stopReason: string;
    seconds: number;
    setupSeconds: number;
  };
  const out: string[] = [];
  out.push(`piezomap: ${summary.title}`);
  out.push(
    `Grid     ${g.nx} x ${g.ny} cells of ${num(g.dx)} x ${num(g.dy)} ${L}, ${g.crs}; ${g.activeCells.toLocaleString('en-US')} active, ${g.fixedHeadCells.toLocaleString('en-US')} fixed-head`,
  );
  const outer = summary.solver as { outerIterations?: number; outerStopReason?: string; innerIterationsTotal?: number };
  // With an outer iteration the last inner solve's count says little: the last one often needs none.
  const count = outer.outerIterations === undefined ? `${s.iterations} iterations` : `${outer.innerIterationsTotal} inner iterations`;
  out.push(
    `Solver   ${s.method}: ${s.converged ? 'converged' : `NOT converged (${s.stopReason})`} in ${count}, ` +
      `relative residual ${s.relativeResidual.toExponential(2)} (setup ${s.setupSeconds.toFixed(2)} s, solve ${s.seconds.toFixed(2)} s)`,
  );
  if (outer.outerIterations !== undefined) {
    out.push(
      `Outer    ${outer.outerIterations} outer iteration(s), ${outer.outerStopReason === 'settled' ? 'settled' : `did NOT settle: ${outer.outerStopReason}`}; ${outer.innerIterationsTotal} inner iterations in all`,
    );
  }
  const aquifer = (
    summary as { aquifer?: { type: string; dryCells: number; confinedCells?: number; saturatedThickness: { min: number; max: number } } }
  ).aquifer;
  if (aquifer) {
    const confined = aquifer.confinedCells === undefined ? '' : `, ${aquifer.confinedCells.toLocaleString('en-US')} confined`;
    out.push(
      `Aquifer  ${aquifer.type}: ${aquifer.dryCells.toLocaleString('en-US')} dry cell(s)${confined}; saturated thickness ${num(aquifer.saturatedThickness.min, 2)} to ${num(aquifer.saturatedThickness.max, 2)} ${L}`,
    );
  }
  out.push(`Head     min ${num(summary.head.min, 3)} ${L}, max ${num(summary.head.max, 3)} ${L}`);
  out.push(`Budget   (${L}³/${T})`);
  const budgetRows = [['term', 'inflow', 'outflow']];
  for (const t of summary.budget.terms) {
    budgetRows.push([t.term, num(t.inflow, 2), num(t.outflow, 2)]);
    // Sub-rows (a river's reaches), indented: they sum to the row above.
    for (const r of t.parts ?? []) budgetRows.push([`  ${r.part}`, num(r.inflow, 2), num(r.outflow, 2)]);
  }
  budgetRows.push(['total', num(summary.budget.totalIn, 2), num(summary.budget.totalOut, 2)]);
  appendAll(out, table(budgetRows, [false, true, true]));
  out.push(`  discrepancy ${summary.budget.discrepancyPercent.toExponential(2)} %`);
  if (summary.wells.length) {
    out.push('Wells');
    const rows = [['id', 'row', 'col', `rate ${L}³/${T}`, `cell head ${L}`, `well-bore head ${L}`]];
    // Only the rows printed are formatted (number formatting of 200 000 rows took 15 s).
    for (const w of summary.wells.slice(0, MAX_PRINTED_ROWS + 1)) {
      const bore = typeof w.wellboreHead === 'number' ? num(w.wellboreHead, 3) + (w.belowMinimum ? ' (below minimum)' : '') : '';
      rows.push([String(w.id), String(w.row), String(w.col), num(w.rate as number, 2), num(w.cellHead as number, 3), bore]);
    }
    const shown = capped(rows, 'wells', summary.wells.length);
    appendAll(out, table(shown.rows, [false, true, true, true, true, true]));
    appendAll(out, shown.rest);
  }
  if (summary.observations.length) {
    out.push('Observations');
    const rows = [['id', `observed ${L}`, `simulated ${L}`, `residual ${L}`]];
    for (const o of summary.observations.slice(0, MAX_PRINTED_ROWS + 1))
      rows.push([String(o.id), num(o.observed as number, 3), num(o.simulated as number, 3), num(o.residual as number, 3)]);
    const shown = capped(rows, 'observations', summary.observations.length);
    appendAll(out, table(shown.rows, [false, true, true, true]));
    appendAll(out, shown.rest);
    const c = summary.calibration as ReturnType<typeof calibrationJson> | undefined;
    if (c) out.push(calibrationLine(c, L));
  }
  appendAll(out, trackingLines(summary.tracking, summary.units));
  const stages = Object.entries(summary.timings);
  if (stages.length) out.push(`Time     ${stages.map(([stage, seconds]) => `${stage} ${seconds.toFixed(2)} s`).join(' · ')}`);
  for (const w of summary.warnings) out.push(`warning: ${w}`);
  if (outDir) out.push(`Results  ${outDir}: ${summary.files.join(', ')}`);
  out.push('');
  out.push(summary.caution);
  return out.join('\n') + '\n';
}

/** The water table of an unconfined or convertible run: type, dry cells, saturated thickness range. */
function waterTableSummary(result: SolveResult): Record<string, unknown> {
  const table = result.system.waterTable!;
  const dry = dryCells(table, result.head);
  const thickness = saturatedThicknessField(table, result.head);
  let min = Infinity;
  let max = -Infinity;
  for (let p = 0; p < thickness.length; p++) {
    const b = thickness[p]!;
    if (!result.system.active[p] || !(b === b)) continue;
    if (b < min) min = b;
    if (b > max) max = b;
  }
  let confinedCells = 0;
  if (table.type === 'convertible')
    for (let p = 0; p < thickness.length; p++) if (result.system.active[p] && result.head[p]! >= table.top[p]!) confinedCells++;
  return {
    type: table.type,
    dryCells: dry.count,
    ...(table.type === 'convertible' ? { confinedCells } : {}),
    saturatedThickness: { min: tidy(min), max: tidy(max) },
  };
}
