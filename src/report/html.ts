/**
 * The self-contained HTML report of a `solve` or `compare` run: one file that opens from disk with no network.
 * No scripts, no external fonts, stylesheets or images: maps are `data:` images, the convergence plot is inline
 * SVG, and a Content-Security-Policy forbids everything else. Every user-supplied string is escaped.
 */
import { convergencePlotSvg, observedSimulatedSvg, sourcesChartSvg } from './plot.js';
import { trackingSectionHtml, type ReportTracking } from './trackingSection.js';
import { dataUrl } from './png.js';
import { escapeMarkup, formatFixed, formatSignificant } from './text.js';

export interface ReportMap {
  caption: string;
  /** The map as an SVG document (preferred: sharp at any zoom). */
  svg?: string;
  /** Or as PNG bytes. */
  png?: Uint8Array;
  /** Path of the map file in the result folder, shown under the map. */
  file?: string;
}

export interface ReportSolver {
  method: string;
  converged: boolean;
  stopReason?: string;
  iterations: number;
  relativeResidual: number;
  tolerance?: number;
  criterion?: string;
  setupSeconds?: number;
  solveSeconds?: number;
  convergenceFactor?: number | null;
  notes?: string[];
  /** Relative residual per iteration (index 0 = start), when recorded. */
  history?: number[];
}

export interface ReportWell {
  id: string;
  x?: number;
  y?: number;
  row: number;
  col: number;
  /** length^3/time, negative = withdrawal. */
  rate: number;
  /** Mean head of the well's cell. */
  cellHead: number;
  /** Head inside the pumped well bore (Peaceman well-block radius). */
  wellboreHead?: number;
  /** Variants: baseline cell head - variant cell head. */
  cellDrawdown?: number;
  /** Variants: head at the bore before the change - variant well-bore head. */
  wellboreDrawdown?: number;
  /** The well-bore head is below the well's minimum head. */
  belowMinimum?: boolean;
}

export interface ReportCalibration {
  count: number;
  meanError: number;
  meanAbsoluteError: number;
  rmsError: number;
  observedRange: number;
  scaledRmsPercent: number | null;
}

/** The inputs a run used, for the report's table of inputs. */
export interface ReportInputs {
  /** Over the active cells, length/time. */
  conductivity: { min: number; max: number; geometricMean: number };
  /** Over the active cells, length. */
  thickness: { min: number; max: number };
  anisotropy: number;
  /** Over the active cells, length/time. */
  recharge: { min: number; max: number };
  /** Every boundary group (fixed heads and any other term drawn on maps): its cells and head range. */
  boundaries: Array<{ name: string; cells: number; headMin: number | null; headMax: number | null }>;
  wells: number;
  /** Sum of withdrawal rates, length^3/time (positive). */
  withdrawal: number;
}

export interface ReportObservation {
  id: string;
  observed: number;
  simulated: number;
  /** simulated - observed. */
  residual: number;
  drawdown?: number;
}

export interface ReportRun {
  /** `baseline` or the variant's name. */
  name: string;
  solver: ReportSolver;
  /** `parts`: sub-rows of a term (a river's reaches), shown indented under it; they split the term's row. */
  budget: {
    terms: Array<{ term: string; inflow: number; outflow: number; parts?: Array<{ part: string; inflow: number; outflow: number }> }>;
    discrepancyPercent: number;
  };
  head?: { min: number; max: number };
  /** Largest drawdown against the baseline, for variants. */
  maxDrawdown?: number;
  wells: ReportWell[];
  observations: ReportObservation[];
  maps: ReportMap[];
  warnings?: string[];
  /** Capture zones, travel times and tracks from points (scenario key `tracking`). */
  tracking?: ReportTracking;
  /** Statistics of simulated - observed head. */
  calibration?: ReportCalibration | null;
}

/** Where the added pumping comes from: one budget term's change (length^3/time) and its share (%). */
export interface ReportSource {
  term: string;
  inflowChange: number;
  outflowChange: number;
  netChange: number;
  percent: number | null;
}

export interface ReportVariantRow {
  name: string;
  maxDrawdown: number;
  totalWithdrawal: number;
  discrepancyPercent: number;
  converged: boolean;
  /** Drawdown at each observation point, in the order of `observationIds`. */
  observationDrawdowns: number[];
  /** Drawdown at each receptor, in the order of `receptorIds`. */
  receptorDrawdowns?: number[];
  /** Largest rise (positive number), null when unsound. */
  maxRise?: number | null;
  /** Changes of head smaller than this are treated as none (length). */
  noiseLevel?: number;
  /** Status word: ok, not-converged, budget-not-closed. */
  status?: string;
  /** Where the largest drawdown is, map coordinates. */
  maxDrawdownAt?: { x: number; y: number } | null;
  /** Whether the variant was solved on the baseline's operator, in words. */
  sharing?: string;
  /** Sources of the added pumping; null when the variant is unsound. */
  sources?: { addedPumping: number; terms: ReportSource[]; totalPercent: number | null } | null;
}

export interface ReportInput {
  kind: 'solve' | 'compare';
  title: string;
  units: { length: string; time: string };
  grid: { nx: number; ny: number; dx: number; dy: number; crs: string; activeCells: number; fixedHeadCells: number };
  /** One run for `solve`; baseline first, then the variants, for `compare`. */
  runs: ReportRun[];
  /** `compare` only: one row per variant. */
  variants?: ReportVariantRow[];
  /** Column headings of `observationDrawdowns`. */
  observationIds?: string[];
  /** Ids of `receptorDrawdowns`. */
  receptorIds?: string[];
  /** The inputs used (the baseline's for a comparison). */
  inputs?: ReportInputs;
  warnings: string[];
  caution: string;
  scenarioFile?: string;
  /** e.g. "piezomap 0.1.0". */
  program?: string;
  /** When the run was made, as the caller wants it shown (e.g. ISO 8601). */
  generatedAt?: string;
  /** Wall time per stage, seconds. */
  timings?: Array<{ stage: string; seconds: number }>;
  /** Files written, relative to the result folder. */
  files?: string[];
}

const e = escapeMarkup;

/** Render the report as one HTML document. */
export function renderReportHtml(input: ReportInput): string {
  const L = input.units.length;
  const T = input.units.time;
  const flowUnit = `${L}\u00b3/${T}`;
  const kindLabel = input.kind === 'solve' ? 'Steady head solution' : 'Scenario comparison';
  const body: string[] = [];

  body.push('<header>');
  body.push(`<p class="kicker">${e(kindLabel)} \u00b7 confined aquifer, steady state</p>`);
  body.push(`<h1>${e(input.title)}</h1>`);
  const meta: string[] = [];
  if (input.scenarioFile) meta.push(`scenario <code>${e(input.scenarioFile)}</code>`);
  if (input.generatedAt) meta.push(e(input.generatedAt));
  if (input.program) meta.push(e(input.program));
  if (meta.length) body.push(`<p class="meta">${meta.join(' \u00b7 ')}</p>`);
  body.push('</header>');
  body.push(`<aside class="caution" role="note"><strong>Caution.</strong> ${e(input.caution)}</aside>`);

  body.push(glance(input));

  if (input.runs.length > 1) {
    body.push('<nav><span>Jump to:</span>');
    if (input.variants?.length) body.push('<a href="#variants">variants table</a><a href="#sources">sources of pumped water</a>');
    for (const run of input.runs) body.push(`<a href="#${anchor(run.name)}">${e(run.name)}</a>`);
    body.push('</nav>');
  }

  if (input.inputs) body.push(inputsSection(input.inputs, L, T, input.kind));
  if (input.kind === 'compare' && input.variants) {
    body.push(variantsTable(input.variants, input.observationIds ?? [], input.receptorIds ?? [], L, flowUnit));
    body.push(sourcesSection(input.variants, flowUnit));
  }

  for (const run of input.runs) body.push(runSection(run, input, L, flowUnit));

  body.push('<section><h2>Grid</h2><table class="facts">');
  const g = input.grid;
  body.push(row('Size', `${g.nx} \u00d7 ${g.ny} cells`));
  body.push(row('Cell size', `${formatSignificant(g.dx, 6)} \u00d7 ${formatSignificant(g.dy, 6)} ${e(L)}`));
  body.push(row('Coordinate reference system', e(g.crs)));
  body.push(row('Active cells', g.activeCells.toLocaleString('en-US')));
  body.push(row('Fixed-head cells', g.fixedHeadCells.toLocaleString('en-US')));
  body.push('</table></section>');

  body.push('<section><h2>Warnings</h2>');
  if (input.warnings.length) body.push(`<ul class="warnings">${input.warnings.map((w) => `<li>${e(w)}</li>`).join('')}</ul>`);
  else body.push('<p class="quiet">None.</p>');
  body.push('</section>');

  if (input.timings?.length) {
    body.push('<section><h2>Timing</h2><table class="facts">');
    for (const t of input.timings) body.push(row(e(t.stage), `${formatSignificant(t.seconds, 3)} s`));
    body.push('</table></section>');
  }
  if (input.files?.length) {
    body.push(
      `<section><h2>Files written</h2><ul class="files">${input.files.map((f) => `<li><code>${e(f)}</code></li>`).join('')}</ul></section>`,
    );
  }

  body.push(`<footer><p>${e(input.caution)}</p></footer>`);

  return [
    '<!DOCTYPE html>',
    '<html lang="en">',
    '<head>',
    '<meta charset="utf-8">',
    // Nothing may load from anywhere but this file; no script may run at all.
    `<meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'">`,
    '<meta name="viewport" content="width=device-width, initial-scale=1">',
    `<title>${e(input.title)} \u2013 ${e(kindLabel)}</title>`,
    `<style>${STYLE}</style>`,
    '</head>',
    '<body>',
    '<main>',
    ...body,
    '</main>',
    '</body>',
    '</html>',
    '',
  ].join('\n');
}

function glance(input: ReportInput): string {
  const first = input.runs[0];
  const cards: string[] = [];
  const L = input.units.length;
  if (first?.head)
    cards.push(card('Head range', `${formatFixed(first.head.min, 2)} \u2013 ${formatFixed(first.head.max, 2)} ${e(L)}`, first.name));
  if (input.variants?.length) {
    let worst = input.variants[0]!;
    for (const v of input.variants) if (v.maxDrawdown > worst.maxDrawdown) worst = v;
    cards.push(card('Largest drawdown', `${formatFixed(worst.maxDrawdown, 2)} ${e(L)}`, worst.name));
  }
  const allConverged = input.runs.every((r) => r.solver.converged);
  cards.push(
    card(
      'Solver',
      allConverged ? 'converged' : 'NOT converged',
      input.runs.length > 1 ? `${input.runs.length} runs` : e(first?.solver.method ?? ''),
      allConverged ? '' : 'bad',
    ),
  );
  let worstDiscrepancy = 0;
  for (const r of input.runs) worstDiscrepancy = Math.max(worstDiscrepancy, Math.abs(r.budget.discrepancyPercent));
  cards.push(
    card(
      'Budget discrepancy',
      `${formatSignificant(worstDiscrepancy, 2)} %`,
      input.runs.length > 1 ? 'largest of all runs' : 'in \u2212 out',
    ),
  );
  cards.push(
    card('Warnings', String(input.warnings.length), input.warnings.length ? 'see below' : 'none', input.warnings.length ? 'warn' : ''),
  );
  return `<section class="glance">${cards.join('')}</section>`;
}

function card(label: string, value: string, note: string, tone = ''): string {
  return `<div class="card${tone ? ` ${tone}` : ''}"><div class="label">${label}</div><div class="value">${value}</div><div class="note">${e(note)}</div></div>`;
}

function row(label: string, value: string): string {
  return `<tr><th scope="row">${label}</th><td>${value}</td></tr>`;
}

/** A number cell; `key` names the value for readers and tests (data-key), e.g. "expanded.receptor.farm-well". */
function num(v: number | undefined | null, decimals: number, key?: string): string {
  return `<td class="num"${key ? ` data-key="${e(key)}"` : ''}>${fixedOrSmall(v, decimals)}</td>`;
}

/** A number cell with fixed decimals only (budget flows: their sums near zero are rounding, shown as 0.00). */
function fx(v: number | undefined | null, decimals: number): string {
  return `<td class="num">${formatFixed(v, decimals)}</td>`;
}

/** Fixed decimals, but a non-zero value that would round to zero in significant digits (0.000324, not 0.000). */
function fixedOrSmall(v: number | undefined | null, decimals: number): string {
  if (v !== null && v !== undefined && v !== 0 && Number.isFinite(v) && Math.abs(v) < 0.5 * 10 ** -decimals) {
    // Plain decimals as in the printout (0.0000626 beside 0.053), exponent form only below 1e-6.
    if (Math.abs(v) < 1e-6) return formatSignificant(v, 3);
    const text = Math.abs(v).toLocaleString('en-US', { maximumSignificantDigits: 3, minimumSignificantDigits: 3, useGrouping: false });
    return v < 0 ? `\u2212${text}` : text;
  }
  return formatFixed(v, decimals);
}

/** A number cell in significant digits (for values that span decades, e.g. percentages of small changes). */
function sig(v: number | undefined | null, digits: number, key?: string): string {
  return `<td class="num"${key ? ` data-key="${e(key)}"` : ''}>${formatSignificant(v, digits)}</td>`;
}

function inputsSection(inputs: ReportInputs, L: string, T: string, kind: 'solve' | 'compare'): string {
  // Four significant digits without trailing zeros (0.9, 120, 0.0004): inputs are usually round numbers.
  const plain = (v: number) =>
    Number.isFinite(v)
      ? formatSignificant(Number(v.toPrecision(4)), 4)
          .replace(/(\.\d*?)0+$/, '$1')
          .replace(/\.$/, '')
      : '\u2013';
  const range = (r: { min: number; max: number }, unit: string) =>
    r.min === r.max ? `${plain(r.min)} ${e(unit)}` : `${plain(r.min)} \u2013 ${plain(r.max)} ${e(unit)}`;
  const rows: string[] = [];
  rows.push(
    row(
      'Hydraulic conductivity',
      `${range(inputs.conductivity, `${L}/${T}`)}; geometric mean ${plain(inputs.conductivity.geometricMean)} ${e(`${L}/${T}`)}`,
    ),
  );
  rows.push(row('Thickness', range(inputs.thickness, L)));
  rows.push(row('Anisotropy (Ky/Kx)', plain(inputs.anisotropy)));
  rows.push(row('Recharge', range(inputs.recharge, `${L}/${T}`)));
  rows.push(row('Wells', `${inputs.wells}; total withdrawal ${plain(inputs.withdrawal)} ${e(`${L}\u00b3/${T}`)}`));
  const groups = inputs.boundaries.map(
    (b) =>
      `<tr><th scope="row">${e(b.name)}</th><td class="num" data-key="input.boundary.${e(b.name)}.cells">${b.cells.toLocaleString('en-US')}</td>${num(b.headMin, 3)}${num(b.headMax, 3)}</tr>`,
  );
  return (
    `<section id="inputs"><h2>Inputs used</h2><p class="quiet">Over the active cells${kind === 'compare' ? ' of the baseline' : ''}.</p><div class="columns"><div><table class="facts">${rows.join('')}</table></div>` +
    `<div><table class="data"><thead><tr><th scope="col">Boundary group</th><th scope="col" class="num">Cells</th><th scope="col" class="num">Lowest head (${e(L)})</th><th scope="col" class="num">Highest head (${e(L)})</th></tr></thead><tbody>${groups.join('')}</tbody></table></div></div></section>`
  );
}

/** Quantities as rows and variants as columns, so that the table stays narrow however many points there are. */
function variantsTable(variants: ReportVariantRow[], observationIds: string[], receptorIds: string[], L: string, flowUnit: string): string {
  const head = `<th scope="col">Quantity</th>${variants.map((v) => `<th scope="col" class="num"><a href="#${anchor(v.name)}">${e(v.name)}</a></th>`).join('')}`;
  const rows: string[] = [];
  const line = (label: string, cell: (v: ReportVariantRow) => string, cls = '') =>
    rows.push(`<tr${cls ? ` class="${cls}"` : ''}><th scope="row">${label}</th>${variants.map(cell).join('')}</tr>`);
  line(
    'Solver',
    (v) =>
      `<td class="num">${v.converged ? 'converged' : '<span class="bad">not converged</span>'}${v.status && v.status !== 'ok' && v.converged ? ` (${e(v.status)})` : ''}</td>`,
  );
  line(`Largest drawdown (${e(L)})`, (v) => num(v.maxDrawdown, 3, `${v.name}.maxDrawdown`));
  line(
    'Largest drawdown at (x, y)',
    (v) =>
      `<td class="num">${v.maxDrawdownAt ? `${formatFixed(v.maxDrawdownAt.x, 1)}, ${formatFixed(v.maxDrawdownAt.y, 1)}` : '\u2013'}</td>`,
  );
  line(`Largest rise (${e(L)})`, (v) => num(v.maxRise, 3, `${v.name}.maxRise`));
  if (receptorIds.length)
    rows.push(
      `<tr class="group"><th scope="rowgroup" colspan="${variants.length + 1}"><span class="receptor-symbol" aria-hidden="true">\u25c7</span> Drawdown at receptors (${e(L)})</th></tr>`,
    );
  receptorIds.forEach((id, k) =>
    line(`<span class="receptor-symbol" aria-hidden="true">\u25c7</span> ${e(id)}`, (v) =>
      num(v.receptorDrawdowns?.[k], 3, `${v.name}.receptor.${id}`),
    ),
  );
  if (observationIds.length)
    rows.push(
      `<tr class="group"><th scope="rowgroup" colspan="${variants.length + 1}">\u25b3 Drawdown at observation points (${e(L)})</th></tr>`,
    );
  observationIds.forEach((id, k) => line(`\u25b3 ${e(id)}`, (v) => num(v.observationDrawdowns[k], 3, `${v.name}.observation.${id}`)));
  rows.push(`<tr class="group"><th scope="rowgroup" colspan="${variants.length + 1}">Pumping and budget</th></tr>`);
  line(`Total withdrawal (${e(flowUnit)})`, (v) => num(v.totalWithdrawal, 1, `${v.name}.withdrawal`));
  line(`Added pumping (${e(flowUnit)})`, (v) => num(v.sources?.addedPumping, 1, `${v.name}.addedPumping`));
  line('Budget discrepancy (%)', (v) => sig(v.discrepancyPercent, 2, `${v.name}.discrepancyPercent`));
  line(`Noise level: smaller changes shown as 0 (${e(L)})`, (v) => sig(v.noiseLevel, 2, `${v.name}.noiseLevel`));
  if (variants.some((v) => v.sharing)) line('Operator', (v) => `<td class="wrap">${e(v.sharing ?? '')}</td>`);
  const noise = variants.map((v) => v.noiseLevel).filter((x): x is number => x !== undefined);
  const noiseNote = noise.length
    ? ` Changes of head smaller than the noise level (at most ${formatSignificant(Math.max(...noise), 2)} ${e(L)}) are rounding and solver error, not results: they are set to 0 and get no contour. The level is 100 \u00d7 each solve\u2019s final relative residual \u00d7 the largest |head \u2212 datum|, summed over baseline and variant, plus 1000 machine epsilons of the largest head.`
    : '';
  return `<section id="variants"><h2>Variants against the baseline</h2><p class="quiet">Drawdown = baseline head \u2212 variant head (positive = lowered).${noiseNote}</p><div class="scroll"><table class="data variants"><thead><tr>${head}</tr></thead><tbody>${rows.join('')}</tbody></table></div></section>`;
}

/** Where the added pumping of each variant comes from: a table per variant and a bar per budget term. */
function sourcesSection(variants: ReportVariantRow[], flowUnit: string): string {
  const parts: string[] = ['<section id="sources"><h2>Where the added pumping comes from</h2>'];
  parts.push(
    '<p class="quiet">In a steady state every unit of added withdrawal is balanced by more inflow from, or less outflow to, the other budget terms (e.g. water drawn from a river). Net change = change of inflow \u2212 change of outflow; its share is net change / added pumping.</p>',
  );
  for (const v of variants) {
    parts.push(`<h3>${e(v.name)}</h3>`);
    const s = v.sources;
    if (!s) {
      parts.push('<p class="quiet">Not a sound result: no sources computed.</p>');
      continue;
    }
    const rows = s.terms.map(
      (t) =>
        `<tr><th scope="row">${e(t.term)}</th>${fx(t.inflowChange, 2)}${fx(t.outflowChange, 2)}${num(t.netChange, 2, `${v.name}.source.${t.term}.netChange`)}${sig(t.percent, 4, `${v.name}.source.${t.term}.percent`)}</tr>`,
    );
    parts.push(
      `<div><div class="scroll"><table class="data sources"><thead><tr><th scope="col">Budget term</th><th scope="col" class="num">Change of inflow (${e(flowUnit)})</th><th scope="col" class="num">Change of outflow (${e(flowUnit)})</th><th scope="col" class="num">Net change (${e(flowUnit)})</th><th scope="col" class="num">Share of added pumping (%)</th></tr></thead><tbody>${rows.join('')}</tbody>` +
        `<tfoot><tr><th scope="row">Added pumping</th><td></td><td></td>${num(s.addedPumping, 2)}${sig(s.totalPercent, 6, `${v.name}.sourcesTotalPercent`)}</tr></tfoot></table></div>`,
    );
    if (s.totalPercent !== null) {
      parts.push(
        `<figure class="plot">${sourcesChartSvg(
          s.terms.map((t) => ({ term: t.term, percent: t.percent ?? NaN })),
          { title: `Sources of the added pumping of ${v.name}`, width: 520 },
        )}<figcaption>Share of the added pumping per budget term, ${e(v.name)}</figcaption></figure>`,
      );
    } else {
      parts.push('<p class="quiet">The pumping did not change: no shares.</p>');
    }
    parts.push('</div>');
  }
  parts.push('</section>');
  return parts.join('');
}

function runSection(run: ReportRun, input: ReportInput, L: string, flowUnit: string): string {
  const parts: string[] = [];
  const heading = input.runs.length > 1 ? (run.name === 'baseline' ? 'Baseline' : `Variant ${e(run.name)}`) : 'Result';
  parts.push(`<section id="${anchor(run.name)}" class="run"><h2>${heading}</h2>`);

  for (const map of run.maps) {
    const src = map.svg ? dataUrl('image/svg+xml', map.svg) : map.png ? dataUrl('image/png', map.png) : null;
    if (!src) continue;
    parts.push(
      `<figure class="map"><img src="${src}" alt="${e(map.caption)}"><figcaption>${e(map.caption)}${map.file ? ` \u00b7 <code>${e(map.file)}</code>` : ''}</figcaption></figure>`,
    );
  }

  parts.push('<div class="columns">');
  // Water budget
  let totalIn = 0;
  let totalOut = 0;
  const budgetRows = run.budget.terms.map((t) => {
    totalIn += t.inflow;
    totalOut += t.outflow;
    const parts = (t.parts ?? []).map(
      (r) => `<tr><th scope="row">&emsp;${e(r.part)}</th>${fx(r.inflow, 2)}${fx(r.outflow, 2)}${fx(r.inflow - r.outflow, 2)}</tr>`,
    );
    return `<tr><th scope="row">${e(t.term)}</th>${fx(t.inflow, 2)}${fx(t.outflow, 2)}${fx(t.inflow - t.outflow, 2)}</tr>${parts.join('')}`;
  });
  parts.push(
    `<div><h3>Water budget (${e(flowUnit)})</h3><table class="data"><thead><tr><th scope="col">Term</th><th scope="col" class="num">In</th><th scope="col" class="num">Out</th><th scope="col" class="num">Net</th></tr></thead><tbody>${budgetRows.join('')}</tbody>` +
      `<tfoot><tr><th scope="row">Total</th>${fx(totalIn, 2)}${fx(totalOut, 2)}${fx(totalIn - totalOut, 2)}</tr>` +
      `<tr><th scope="row">Discrepancy</th><td class="num" colspan="3">${formatSignificant(run.budget.discrepancyPercent, 3)} %</td></tr></tfoot></table></div>`,
  );

  // Solver facts
  const s = run.solver;
  const facts: string[] = [];
  facts.push(row('Method', e(s.method)));
  const reason = s.stopReason && s.stopReason !== 'converged' ? ` (${e(s.stopReason)})` : '';
  facts.push(row('Outcome', s.converged ? `converged${reason}` : `<span class="bad">not converged${reason}</span>`));
  facts.push(row('Iterations', String(s.iterations)));
  facts.push(row('Relative residual', formatSignificant(s.relativeResidual, 3)));
  if (s.tolerance !== undefined) facts.push(row('Tolerance', formatSignificant(s.tolerance, 3)));
  if (s.criterion) facts.push(row('Stopping rule', e(s.criterion)));
  if (s.convergenceFactor !== undefined && s.convergenceFactor !== null)
    facts.push(row('Residual reduction per iteration', formatSignificant(s.convergenceFactor, 4)));
  if (s.setupSeconds !== undefined) facts.push(row('Setup time', `${formatSignificant(s.setupSeconds, 3)} s`));
  if (s.solveSeconds !== undefined) facts.push(row('Solve time', `${formatSignificant(s.solveSeconds, 3)} s`));
  if (run.head) facts.push(row('Head range', `${formatFixed(run.head.min, 3)} \u2013 ${formatFixed(run.head.max, 3)} ${e(L)}`));
  if (run.maxDrawdown !== undefined) facts.push(row('Largest drawdown', `${formatFixed(run.maxDrawdown, 3)} ${e(L)}`));
  parts.push(`<div><h3>Solver</h3><table class="facts">${facts.join('')}</table>`);
  if (s.notes?.length) parts.push(`<ul class="notes">${s.notes.map((n) => `<li>${e(n)}</li>`).join('')}</ul>`);
  parts.push('</div></div>');

  parts.push(
    `<figure class="plot"><figcaption>Convergence: relative residual per iteration${s.history?.length ? '' : ' (history not recorded)'}</figcaption>${convergencePlotSvg(s.history ?? [], { tolerance: s.tolerance, title: `Convergence of ${run.name}` })}</figure>`,
  );

  // Wells
  parts.push(`<h3>Wells</h3>`);
  if (run.wells.length === 0) parts.push('<p class="quiet">No wells.</p>');
  else {
    const hasXY = run.wells.some((w) => w.x !== undefined);
    const hasBore = run.wells.some((w) => w.wellboreHead !== undefined);
    const hasDd = run.wells.some((w) => w.cellDrawdown !== undefined || w.wellboreDrawdown !== undefined);
    const head =
      `<th scope="col">Id</th>${hasXY ? `<th scope="col" class="num">x</th><th scope="col" class="num">y</th>` : ''}` +
      `<th scope="col" class="num">Row</th><th scope="col" class="num">Column</th><th scope="col" class="num">Rate (${e(flowUnit)})</th>` +
      `<th scope="col" class="num">Cell head (${e(L)})</th>${hasDd ? `<th scope="col" class="num">Cell-head drawdown (${e(L)})</th>` : ''}` +
      `${hasBore ? `<th scope="col" class="num">Well-bore head (${e(L)})</th>` : ''}${hasDd ? `<th scope="col" class="num">Well-bore drawdown (${e(L)})</th>` : ''}`;
    const rows = run.wells
      .slice(0, REPORT_TABLE_ROWS)
      .map(
        (w) =>
          `<tr><th scope="row">${e(w.id)}</th>${hasXY ? num(w.x, 2) + num(w.y, 2) : ''}<td class="num">${w.row}</td><td class="num">${w.col}</td>${num(w.rate, 2)}${num(w.cellHead, 3)}` +
          `${hasDd ? num(w.cellDrawdown, 3, `${run.name}.well.${w.id}.cellDrawdown`) : ''}` +
          `${hasBore ? `<td class="num" data-key="${e(`${run.name}.well.${w.id}.wellboreHead`)}">${formatFixed(w.wellboreHead, 3)}${w.belowMinimum ? ' <span class="bad">(below minimum)</span>' : ''}</td>` : ''}` +
          `${hasDd ? num(w.wellboreDrawdown, 3, `${run.name}.well.${w.id}.wellboreDrawdown`) : ''}</tr>`,
      );
    parts.push(`<div class="scroll"><table class="data"><thead><tr>${head}</tr></thead><tbody>${rows.join('')}</tbody></table></div>`);
    parts.push(moreRows(run.wells.length, 'wells'));
    parts.push(
      `<p class="quiet">Cell head is the mean head of the well\u2019s cell; well-bore head is the head inside the pumped bore (Peaceman well-block radius), lower for a pumping well.${hasDd ? ' Cell-head drawdown = baseline cell head \u2212 variant cell head; well-bore drawdown = head at the bore before the change \u2212 variant well-bore head.' : ''}</p>`,
    );
  }

  // Observations
  parts.push(`<h3>Observation points</h3>`);
  if (run.observations.length === 0) parts.push('<p class="quiet">No observation points.</p>');
  else {
    const hasDd = run.observations.some((o) => o.drawdown !== undefined);
    const rows = run.observations
      .slice(0, REPORT_TABLE_ROWS)
      .map(
        (o) =>
          `<tr><th scope="row">${e(o.id)}</th>${num(o.observed, 3)}${num(o.simulated, 3)}${num(o.residual, 3)}${hasDd ? num(o.drawdown, 3) : ''}</tr>`,
      );
    let sum = 0;
    let sumSq = 0;
    let count = 0;
    for (const o of run.observations) {
      if (Number.isFinite(o.residual)) {
        sum += o.residual;
        sumSq += o.residual * o.residual;
        count++;
      }
    }
    parts.push(
      `<div class="scroll"><table class="data"><thead><tr><th scope="col">Id</th><th scope="col" class="num">Observed (${e(L)})</th><th scope="col" class="num">Simulated (${e(L)})</th><th scope="col" class="num">Residual (${e(L)})</th>${hasDd ? `<th scope="col" class="num">Drawdown (${e(L)})</th>` : ''}</tr></thead><tbody>${rows.join('')}</tbody></table></div>`,
    );
    parts.push(moreRows(run.observations.length, 'observation points'));
    if (count > 0) {
      parts.push(
        `<p class="quiet">Residual = simulated \u2212 observed. Mean ${formatFixed(sum / count, 3)} ${e(L)}, root mean square ${formatFixed(Math.sqrt(sumSq / count), 3)} ${e(L)} over ${count} point${count === 1 ? '' : 's'}.</p>`,
      );
      const c = run.calibration;
      const stats = c
        ? `<table class="facts calibration">${row('Points', String(c.count))}${row('Mean error', `<span data-key="${e(run.name)}.calibration.meanError">${formatFixed(c.meanError, 3)}</span> ${e(L)}`)}` +
          `${row('Mean absolute error', `<span data-key="${e(run.name)}.calibration.meanAbsoluteError">${formatFixed(c.meanAbsoluteError, 3)}</span> ${e(L)}`)}` +
          `${row('RMS error', `<span data-key="${e(run.name)}.calibration.rmsError">${formatFixed(c.rmsError, 3)}</span> ${e(L)}`)}` +
          `${row('Range of observed heads', `${formatFixed(c.observedRange, 3)} ${e(L)}`)}` +
          `${row('RMS error / range', c.scaledRmsPercent === null ? '\u2013' : `<span data-key="${e(run.name)}.calibration.scaledRmsPercent">${formatFixed(c.scaledRmsPercent, 1)}</span> %`)}</table>`
        : '';
      parts.push(
        `<div class="calibration-view"><figure class="plot">${observedSimulatedSvg(run.observations, { unit: L, title: `Observed against simulated head, ${run.name}` })}<figcaption>Observed against simulated head; dashed: 1:1 line (a perfect fit). Red: simulated above observed, blue: below.</figcaption></figure><div><h4>Calibration statistics</h4>${stats}</div></div>`,
      );
    }
  }
  if (run.tracking) parts.push(trackingSectionHtml(run.tracking, L, input.units.time));
  if (run.warnings?.length)
    parts.push(`<h3>Warnings for this run</h3><ul class="warnings">${run.warnings.map((w) => `<li>${e(w)}</li>`).join('')}</ul>`);
  parts.push('</section>');
  return parts.join('\n');
}

/** An id attribute value from a run name: letters, digits, - and _ kept, everything else dropped. */
function anchor(name: string): string {
  return `run-${name.replace(/[^A-Za-z0-9_-]/g, '') || 'unnamed'}`;
}

const STYLE = `
:root { --ink: #1d2327; --muted: #5b6770; --line: #d9dee1; --accent: #1f4e79; --warm: #b5651d; --paper: #ffffff; --wash: #f4f6f7; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--wash); color: var(--ink); font: 15px/1.5 'DejaVu Sans', 'Noto Sans', 'Liberation Sans', Arial, sans-serif; }
main { max-width: 1180px; margin: 0 auto; padding: 24px 28px 48px; background: var(--paper); min-height: 100vh; }
header { border-bottom: 3px solid var(--accent); padding-bottom: 10px; margin-bottom: 16px; }
.kicker { margin: 0; color: var(--accent); font-size: 13px; letter-spacing: .06em; text-transform: uppercase; }
h1 { margin: 4px 0 4px; font-size: 26px; line-height: 1.25; overflow-wrap: anywhere; }
h2 { font-size: 20px; margin: 32px 0 10px; padding-bottom: 4px; border-bottom: 1px solid var(--line); }
h3 { font-size: 16px; margin: 20px 0 8px; }
.meta, .quiet { color: var(--muted); font-size: 13px; margin: 4px 0; }
code { font-family: 'DejaVu Sans Mono', 'Liberation Mono', monospace; font-size: .92em; overflow-wrap: anywhere; }
.caution { border-left: 5px solid var(--warm); background: #fbf3ea; padding: 10px 14px; margin: 12px 0 20px; }
.glance { display: grid; grid-template-columns: repeat(auto-fit, minmax(190px, 1fr)); gap: 12px; }
.card { border: 1px solid var(--line); border-radius: 6px; padding: 10px 12px; background: var(--paper); }
.card .label { color: var(--muted); font-size: 12px; text-transform: uppercase; letter-spacing: .05em; }
.card .value { font-size: 19px; font-weight: bold; margin: 2px 0; }
.card .note { color: var(--muted); font-size: 12px; overflow-wrap: anywhere; }
.card.bad { border-color: #a1262b; } .card.bad .value, .bad { color: #a1262b; font-weight: bold; }
.card.warn { border-color: var(--warm); }
nav { margin: 18px 0 0; font-size: 14px; } nav span { color: var(--muted); margin-right: 8px; } nav a { margin-right: 12px; color: var(--accent); }
figure { margin: 16px 0; }
figure.map img { display: block; max-width: 100%; height: auto; border: 1px solid var(--line); }
figcaption { color: var(--muted); font-size: 13px; margin-top: 6px; }
figure.plot svg { max-width: 100%; height: auto; font-family: inherit; }
.columns { display: grid; grid-template-columns: repeat(auto-fit, minmax(360px, 1fr)); gap: 8px 32px; }
table { border-collapse: collapse; font-size: 14px; }
table.data { width: 100%; }
table.data th, table.data td { padding: 5px 10px; border-bottom: 1px solid var(--line); text-align: left; }
table.data thead th { border-bottom: 2px solid var(--ink); font-size: 13px; vertical-align: bottom; }
table.data tfoot th, table.data tfoot td { border-top: 2px solid var(--ink); font-weight: bold; }
table.facts th { text-align: left; font-weight: normal; color: var(--muted); padding: 3px 18px 3px 0; vertical-align: top; }
table.facts td { padding: 3px 0; overflow-wrap: break-word; }
th, td { overflow-wrap: break-word; }
.num { text-align: right !important; font-variant-numeric: tabular-nums; white-space: nowrap; }
.scroll { overflow-x: auto; }
ul.warnings li { margin: 4px 0; } ul.notes { color: var(--muted); font-size: 13px; }
.calibration-view figure { max-width: 380px; }
table.data thead th.num { white-space: normal; }
table.data tbody th { white-space: nowrap; }
table.sources { width: auto; }
td.wrap { font-size: 13px; color: var(--muted); max-width: 420px; }
.calibration-view { display: flex; flex-wrap: wrap; gap: 8px 32px; align-items: flex-start; }
h4 { font-size: 14px; margin: 16px 0 6px; }
table.variants tr.group th { background: var(--wash); font-weight: bold; }
.receptor-symbol { color: #8b1e3f; font-weight: bold; }
figure.plot svg.sources-chart, figure.plot svg.observed-simulated { font-family: inherit; }
footer { margin-top: 40px; border-top: 1px solid var(--line); color: var(--muted); font-size: 13px; }
@media print { body { background: #fff; } main { padding: 0; } figure, table { break-inside: avoid; } }
`;

/** Rows of a point table in the report; a longer list is counted, not shown (every row is in summary.json). */
export const REPORT_TABLE_ROWS = 1000;

function moreRows(count: number, what: string): string {
  if (count <= REPORT_TABLE_ROWS) return '';
  return `<p class="quiet">The first ${REPORT_TABLE_ROWS.toLocaleString('en-US')} of ${count.toLocaleString('en-US')} ${what} are listed; every one is in summary.json.</p>`;
}
