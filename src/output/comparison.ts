/**
 * The files and texts of a comparison: comparison.csv (one row per variant), the comparison summary.json and the
 * printed table. Pure functions: the folder is written by comparisonFiles.ts through resultFolder.ts.
 */
import { dryCells } from '../discretisation/aquifer.js';
import type { SolveResult } from '../analysis/result.js';
import { CAUTION } from '../caution.js';
import type { ComparisonResult, VariantComparison } from '../compare/types.js';
import { calibrationJson, calibrationLine, MAX_PRINTED_ROWS, tidy } from './summary.js';
import { csvRow } from './csv.js';
import { captureComparisonJson, captureComparisonLines } from './tracking.js';

/** A number for a CSV cell: rounded, empty when not a finite number (csvCell writes it). */
function cell(v: number | null | undefined): number | null {
  return v === null || v === undefined || !Number.isFinite(v) ? null : tidy(v);
}

/** Budget terms other than wells over all variants, baseline order first. */
function sourceTerms(c: ComparisonResult): string[] {
  const names: string[] = [];
  for (const v of c.variants) for (const t of v.sources.terms) if (!names.includes(t.term)) names.push(t.term);
  return names;
}

/** Well ids over all variants, in order of first appearance. */
function wellIds(c: ComparisonResult): string[] {
  const ids: string[] = [];
  for (const v of c.variants) for (const w of v.wellbores) if (!ids.includes(w.id)) ids.push(w.id);
  return ids;
}

export function variantStatus(v: VariantComparison): string {
  if (!v.problem) return 'ok';
  return v.result.stats.converged ? 'budget-not-closed' : 'not-converged';
}

/**
 * comparison.csv: one row per variant. Drawdowns (baseline head - variant head, positive = lowered) in length
 * units; rates in length^3/time; `source_TERM_volume` is the term's net change (more inflow or less outflow =
 * positive) and `source_TERM_percent` that change as a percentage of the added pumping.
 */
export function comparisonCsv(c: ComparisonResult): string {
  const observations = c.baseline.model.observations.map((o) => o.id);
  const receptors = c.receptors.map((r) => r.id);
  const terms = sourceTerms(c);
  const wells = wellIds(c);
  const header = [
    'variant',
    'status',
    'shared_operator',
    'max_drawdown',
    'max_drawdown_x',
    'max_drawdown_y',
    'max_rise',
    ...observations.map((id) => `drawdown_obs_${id}`),
    ...receptors.map((id) => `drawdown_receptor_${id}`),
    ...wells.map((id) => `drawdown_wellbore_${id}`),
    'well_withdrawal',
    'added_pumping',
    'discrepancy_percent',
    ...terms.flatMap((t) => [`source_${t}_volume`, `source_${t}_percent`]),
    'source_total_percent',
    // Water-table aquifers only, so that confined comparisons keep their columns.
    ...(c.baseline.system.waterTable === null ? [] : ['dry_cells', 'undelivered_pumping']),
  ];
  const lines = [csvRow(header)];
  for (const v of c.variants) {
    const byTerm = new Map(v.sources.terms.map((t) => [t.term, t]));
    const byWell = new Map(v.wellbores.map((w) => [w.id, w]));
    const sound = v.problem === null;
    const row: Array<string | number | null> = [
      v.name,
      variantStatus(v),
      v.sharedOperator ? 'yes' : 'no',
      cell(v.maxDrawdown?.value),
      cell(v.maxDrawdown?.x),
      cell(v.maxDrawdown?.y),
      sound ? cell(v.maxRise) : '',
      ...v.observations.map((o) => cell(o.drawdown)),
      ...v.receptors.map((r) => cell(r.drawdown)),
      ...wells.map((id) => cell(byWell.get(id)?.drawdown)),
      cell(v.withdrawal),
      sound ? cell(v.sources.addedPumping) : '',
      cell(v.result.budget.discrepancyPercent),
      ...terms.flatMap((t): Array<number | null | ''> => {
        const s = byTerm.get(t);
        return sound && s ? [cell(s.netChange), cell(s.percentOfAddedPumping)] : ['', ''];
      }),
      sound ? cell(v.sources.totalPercent) : '',
      ...(c.baseline.system.waterTable === null
        ? []
        : (() => {
            const w = waterTableBrief(v.result)!;
            return [cell(w.dryCells), cell(w.undeliveredPumping)];
          })()),
    ];
    lines.push(csvRow(row));
  }
  return lines.join('\n') + '\n';
}

export interface ComparisonSummaryJson {
  title: string;
  piezomap: string;
  scenario: string;
  units: { length: string; time: string };
  baseline: Record<string, unknown>;
  variants: Array<Record<string, unknown>>;
  receptors: Array<{ id: string; x: number; y: number }>;
  warnings: string[];
  files: string[];
  caution: string;
  [extra: string]: unknown;
}

function budgetBrief(v: { budget: { totalIn: number; totalOut: number; discrepancyPercent: number } }) {
  return { totalIn: tidy(v.budget.totalIn), totalOut: tidy(v.budget.totalOut), discrepancyPercent: tidy(v.budget.discrepancyPercent) };
}

function nullable(v: number): number | null {
  return Number.isFinite(v) ? tidy(v) : null;
}

export function comparisonSummary(c: ComparisonResult, files: string[], version: string): ComparisonSummaryJson {
  const base = c.baseline;
  return {
    title: base.model.title,
    piezomap: version,
    scenario: base.model.scenarioPath,
    units: base.model.units,
    baseline: {
      folder: 'baseline',
      converged: base.stats.converged,
      sound: c.baselineProblem === null,
      solver: {
        method: base.stats.method,
        iterations: base.stats.iterations,
        ...outerOf(base),
        setupSeconds: tidy(base.stats.setupSeconds),
        seconds: tidy(base.stats.solveSeconds),
      },
      budget: budgetBrief(base),
      withdrawal: tidy(base.model.wells.reduce((sum, w) => sum + (w.rate < 0 ? -w.rate : 0), 0)),
      wells: base.wellbore.map((w) => ({
        id: w.id,
        rate: w.rate,
        cellHead: tidy(w.cellHead),
        wellboreHead: tidy(w.wellboreHead),
        belowMinimum: w.belowMinimum,
      })),
      calibration: calibrationJson(base.calibration),
      ...(base.system.waterTable === null ? {} : { waterTable: waterTableBrief(base) }),
    },
    variants: c.variants.map((v) => ({
      name: v.name,
      title: v.result.model.title,
      folder: v.name,
      status: variantStatus(v),
      sharedOperator: v.sharedOperator,
      sharing: v.sharing,
      solver: {
        method: v.result.stats.method,
        converged: v.result.stats.converged,
        iterations: v.result.stats.iterations,
        ...outerOf(v.result),
        relativeResidual: v.result.stats.relativeResidual,
        setupSeconds: tidy(v.result.stats.setupSeconds),
        seconds: tidy(v.result.stats.solveSeconds),
      },
      maxDrawdown: v.maxDrawdown ? { ...v.maxDrawdown, value: tidy(v.maxDrawdown.value) } : null,
      maxRise: v.problem ? null : tidy(v.maxRise),
      drawdownNoiseLevel: Number(v.noiseLevel.toPrecision(2)),
      observations: v.observations.map((o) => ({ id: o.id, drawdown: nullable(o.drawdown) })),
      receptors: v.receptors.map((r) => ({ id: r.id, drawdown: nullable(r.drawdown) })),
      wells: v.wellbores.map((w) => ({
        id: w.id,
        rate: w.rate,
        baselineHead: nullable(w.baselineHead),
        wellboreHead: nullable(w.wellboreHead),
        wellboreDrawdown: nullable(w.drawdown),
        ...(w.minimumHead !== null ? { minimumHead: w.minimumHead, belowMinimum: w.belowMinimum } : {}),
      })),
      withdrawal: tidy(v.withdrawal),
      ...(v.result.system.waterTable === null ? {} : { waterTable: waterTableBrief(v.result) }),
      budget: budgetBrief(v.result),
      sourcesOfWater: v.problem
        ? null
        : {
            addedPumping: tidy(v.sources.addedPumping),
            terms: v.sources.terms.map((t) => ({
              term: t.term,
              inflowChange: tidy(t.inflowChange),
              outflowChange: tidy(t.outflowChange),
              netChange: tidy(t.netChange),
              percentOfAddedPumping: t.percentOfAddedPumping === null ? null : tidy(t.percentOfAddedPumping),
              ...(t.partOf === undefined ? {} : { partOf: t.partOf }),
            })),
            totalPercent: v.sources.totalPercent === null ? null : tidy(v.sources.totalPercent),
          },
      calibration: calibrationJson(v.result.calibration),
      ...(v.capture ? { capture: captureComparisonJson(v.capture) } : {}),
      warnings: v.result.warnings.filter((w) => !base.warnings.includes(w)),
      problem: v.problem ? v.problem.message : null,
    })),
    receptors: c.receptors.map((r) => ({ id: r.id, x: r.x, y: r.y })),
    warnings: [...base.warnings, ...c.warnings],
    files,
    caution: CAUTION,
  };
}

/**
 * A number for the printout, in one style throughout: plain decimals with `digits` decimals; a non-zero value that
 * would show as zero gets three significant digits instead (0.000324, never 3.24e-4 beside 0.053); exponent form
 * only below 1e-6 or from 1e7.
 */
function num(v: number | null | undefined, digits: number): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return '-';
  const a = Math.abs(v);
  if (a !== 0 && (a >= 1e7 || a < 1e-6)) return v.toExponential(2);
  if (a !== 0 && a < 0.5 * 10 ** -digits) return v.toLocaleString('en-US', { maximumSignificantDigits: 3, minimumSignificantDigits: 3 });
  return v.toLocaleString('en-US', { maximumFractionDigits: digits, minimumFractionDigits: digits });
}

/** A percentage for the printout: four significant digits in plain decimals (99.96, 0.005623), 0 for none. */
function pct(v: number | null | undefined): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return '-';
  if (v === 0) return '0';
  if (Math.abs(v) < 1e-6) return v.toExponential(2);
  return v.toLocaleString('en-US', { maximumSignificantDigits: 4, useGrouping: false });
}

function table(rows: string[][], alignRight: (c: number) => boolean): string[] {
  // Widths by a loop: spreading a long list into Math.max overflows the stack.
  const widths = rows[0]!.map(() => 0);
  for (const r of rows) for (let c = 0; c < widths.length; c++) widths[c] = Math.max(widths[c]!, r[c]!.length);
  return rows.map(
    (r) =>
      '  ' +
      r
        .map((text, c) => (alignRight(c) ? text.padStart(widths[c]!) : text.padEnd(widths[c]!)))
        .join('  ')
        .trimEnd(),
  );
}

type VariantJson = {
  name: string;
  status: string;
  sharedOperator: boolean;
  solver: { method: string; iterations: number; setupSeconds: number; seconds: number };
  maxDrawdown: { value: number } | null;
  drawdownNoiseLevel?: number;
  observations: Array<{ id: string; drawdown: number | null }>;
  receptors: Array<{ id: string; drawdown: number | null }>;
  wells: Array<{ id: string; rate: number; wellboreHead: number | null; wellboreDrawdown: number | null; belowMinimum?: boolean }>;
  withdrawal: number;
  budget: { discrepancyPercent: number };
  sourcesOfWater: {
    addedPumping: number;
    terms: Array<{ term: string; percentOfAddedPumping: number | null }>;
    totalPercent: number | null;
  } | null;
  calibration: Record<string, number | null> | null;
  problem: string | null;
};

/** The printed comparison: one row per variant, then well bores, sources of water, warnings and the caution. */
export function formatComparison(summary: ComparisonSummaryJson, outDir: string | null): string {
  const L = summary.units.length;
  const T = summary.units.time;
  const variants = summary.variants as VariantJson[];
  const base = summary.baseline as {
    sound: boolean;
    solver: { method: string; iterations: number; outerIterations?: number; setupSeconds: number; seconds: number };
    budget: { discrepancyPercent: number };
    withdrawal: number;
  };
  const out: string[] = [];
  out.push(`piezomap compare: ${summary.title}`);
  out.push(
    `Baseline   ${base.sound ? 'converged' : 'NOT a sound result'}: ${base.solver.method}, ${base.solver.iterations} iterations${outerText(base.solver)} ` +
      `(setup ${base.solver.setupSeconds.toFixed(2)} s, solve ${base.solver.seconds.toFixed(2)} s); withdrawal ${num(base.withdrawal, 1)} ${L}³/${T}`,
  );
  const calibration = (summary.baseline as { calibration: Record<string, number | null> | null }).calibration;
  if (calibration) out.push(`Calibration (baseline against observed heads)`, calibrationLine(calibration, L));
  for (const v of variants) {
    out.push(
      `Variant    ${v.name}: ${v.status === 'ok' ? 'converged' : v.status.toUpperCase()}: ${v.solver.iterations} iterations${outerText(v.solver as { outerIterations?: number })}, ` +
        (v.sharedOperator ? 'baseline operator and solver set-up reused' : `own set-up ${v.solver.setupSeconds.toFixed(2)} s`) +
        `, solve ${v.solver.seconds.toFixed(2)} s`,
    );
  }
  if (variants.length) {
    const obsIds = variants[0]!.observations.map((o) => o.id);
    const recIds = variants[0]!.receptors.map((r) => r.id);
    const terms: string[] = [];
    for (const v of variants) for (const t of v.sourcesOfWater?.terms ?? []) if (!terms.includes(t.term)) terms.push(t.term);
    out.push(`Drawdown (${L}, positive = lowered) and where the added pumping comes from (% of it)`);
    const header = [
      'variant',
      'max s',
      ...obsIds.map((id) => `s ${id}`),
      ...recIds.map((id) => `s ${id}`),
      `withdrawal ${L}³/${T}`,
      'discrepancy %',
      ...terms.map((t) => `${t} %`),
    ];
    const rows = [header];
    for (const v of variants) {
      const shares = new Map((v.sourcesOfWater?.terms ?? []).map((t) => [t.term, t.percentOfAddedPumping]));
      rows.push([
        v.name,
        num(v.maxDrawdown?.value, 3),
        ...v.observations.map((o) => num(o.drawdown, 3)),
        ...v.receptors.map((r) => num(r.drawdown, 3)),
        num(v.withdrawal, 1),
        num(v.budget.discrepancyPercent, 3),
        ...terms.map((t) => pct(shares.get(t))),
      ]);
    }
    for (const line of table(rows, (c) => c > 0)) out.push(line);
    if (recIds.length) out.push(`  receptors: ${recIds.join(', ')}`);
    const noise = variants.map((v) => v.drawdownNoiseLevel).filter((x): x is number => typeof x === 'number');
    if (noise.length)
      out.push(
        `  changes of head below ${Math.max(...noise).toExponential(1)} ${L} are rounding and solver error: shown as 0 (the noise level, per variant in summary.json)`,
      );
    const wellRows = [['variant', 'well', `rate ${L}³/${T}`, `well-bore head ${L}`, `well-bore drawdown ${L}`]];
    let wellCount = 0;
    for (const v of variants) {
      wellCount += v.wells.length;
      // Only the rows printed are formatted.
      for (const w of v.wells) {
        if (wellRows.length > MAX_PRINTED_ROWS) break;
        wellRows.push([
          v.name,
          w.id,
          num(w.rate, 1),
          num(w.wellboreHead, 3) + (w.belowMinimum ? ' (below minimum)' : ''),
          num(w.wellboreDrawdown, 3),
        ]);
      }
    }
    if (wellRows.length > 1) {
      out.push('Well bores (Peaceman well-block radius)');
      for (const line of table(wellRows, (c) => c > 1)) out.push(line);
      const more = wellCount - (wellRows.length - 1);
      if (more > 0) out.push(`  ... and ${more.toLocaleString('en-US')} more well rows (all in each variant's summary.json)`);
    }
    for (const v of variants) {
      const s = v.sourcesOfWater;
      if (s && s.totalPercent !== null) {
        out.push(`  ${v.name}: added pumping ${num(s.addedPumping, 1)} ${L}³/${T}; the sources sum to ${pct(s.totalPercent)} %`);
      }
      const w = (v as { waterTable?: WaterTableBrief }).waterTable;
      if (w) {
        const b = (summary.baseline as { waterTable?: WaterTableBrief }).waterTable;
        out.push(
          `  ${v.name}: ${w.dryCells.toLocaleString('en-US')} dry cell(s) (baseline ${b ? b.dryCells.toLocaleString('en-US') : '-'}), ` +
            `${w.outerIterations} outer iterations` +
            (w.undeliveredPumping > 0 ? `; pumping not delivered ${num(w.undeliveredPumping, 1)} ${L}³/${T}` : ''),
        );
      }
      if (v.problem) out.push(`  ${v.name}: ${v.problem.split('\n')[0]}`);
    }
  }
  for (const line of captureComparisonLines(variants as Array<VariantJson & { capture?: unknown }>, summary.units)) out.push(line);
  for (const w of summary.warnings) out.push(`warning: ${w}`);
  for (const v of variants as Array<VariantJson & { warnings?: string[] }>)
    for (const w of v.warnings ?? []) out.push(`warning (${v.name}): ${w}`);
  if (outDir) {
    const top = summary.files.filter((f) => !f.includes('/'));
    out.push(
      `Results    ${outDir}: baseline/, ${variants.map((v) => `${v.name}/`).join(', ')}${variants.length ? ', ' : ''}${top.join(', ')}`,
    );
  }
  out.push('');
  out.push(summary.caution);
  return out.join('\n') + '\n';
}

/** Outer iterations of a run with switching terms (absent for linear runs, so their summaries stay as they were). */
function outerOf(result: SolveResult): { outerIterations?: number; outerStopReason?: string } {
  return result.outer.stopReason === 'linear' ? {} : { outerIterations: result.outer.iterations, outerStopReason: result.outer.stopReason };
}

function outerText(solver: { outerIterations?: number }): string {
  return solver.outerIterations === undefined ? '' : ` in ${solver.outerIterations} outer iteration(s)`;
}

interface WaterTableBrief {
  type: string;
  dryCells: number;
  outerIterations: number;
  innerIterations: number;
  /** Withdrawal the wells could not deliver from drying cells (length^3/time). */
  undeliveredPumping: number;
}

/** A water-table run in brief (dry cells, outer iterations, undelivered pumping), null for a confined one. */
function waterTableBrief(result: SolveResult): WaterTableBrief | null {
  const table = result.system.waterTable;
  if (table === null) return null;
  let undelivered = 0;
  for (const w of result.wellbore) undelivered += w.undeliveredRate;
  return {
    type: table.type,
    dryCells: dryCells(table, result.head).count,
    outerIterations: result.outer.iterations,
    innerIterations: result.outer.innerIterations,
    undeliveredPumping: tidy(undelivered),
  };
}
