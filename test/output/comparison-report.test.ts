/**
 * The comparison report carries the answers: every number the printout and summary.json give for the demo
 * (drawdown at receptors and observation points, well-bore heads and drawdowns, sources of the added pumping,
 * calibration, budget discrepancy, noise level) is in report.html, and agrees to the digits shown. Values are read
 * from the report's `data-key` cells and compared with summary.json and with the printed table.
 */
import { readFileSync, writeFileSync } from 'node:fs';
import { beforeAll, describe, expect, it } from 'vitest';
import { drawdownNoiseLevel, zeroBelow } from '../../src/analysis/drawdown.js';
import { compareScenario, resolveVariants } from '../../src/compare/run.js';
import type { ComparisonResult } from '../../src/compare/types.js';
import { formatComparison, type ComparisonSummaryJson } from '../../src/output/comparison.js';
import { comparisonFiles } from '../../src/output/comparisonFiles.js';
import { loadScenario } from '../../src/scenario/load.js';

/** Displayed number -> value: minus sign U+2212, thousands separators, exponent form. */
function parseShown(text: string): number {
  return Number(
    text
      .replace(/\u2212/g, '-')
      .replace(/,/g, '')
      .replace(/<[^>]*>/g, '')
      .replace(/\s*\(.*\)$/, '')
      .trim(),
  );
}

/** Half a unit of the last digit shown (the rounding a displayed number carries). */
function halfUnit(text: string): number {
  const t = text
    .replace(/\u2212/g, '-')
    .replace(/,/g, '')
    .replace(/<[^>]*>/g, '')
    .trim();
  const m = /^-?\d*(?:\.(\d*))?(?:e([-+]?\d+))?/.exec(t)!;
  const decimals = m[1]?.length ?? 0;
  const exponent = m[2] ? Number(m[2]) : 0;
  return 0.5 * 10 ** (exponent - decimals);
}

function agrees(shown: string, value: number, other = 0): boolean {
  return Math.abs(parseShown(shown) - value) <= halfUnit(shown) + other + 1e-12 * Math.abs(value);
}

let comparison: ComparisonResult;
let html: string;
let summary: ComparisonSummaryJson;
let printed: string;
const cells = new Map<string, string>();

beforeAll(async () => {
  comparison = await compareScenario('data/valley.json');
  const { files, summary: s } = comparisonFiles(comparison);
  summary = s;
  html = String(files.find((f) => f.name === 'report.html')!.bytes);
  printed = formatComparison(summary, null);
  for (const m of html.matchAll(/data-key="([^"]+)"[^>]*>([^<]*(?:<span[^>]*>[^<]*<\/span>)?[^<]*)</g))
    cells.set(m[1]!.replace(/&quot;/g, '"'), m[2]!);
}, 60_000);

describe('comparison report against summary.json', () => {
  const shown = (key: string): string => {
    const text = cells.get(key);
    expect(text, `report.html has ${key}`).toBeDefined();
    return text!;
  };

  it('shows every variant figure of summary.json: drawdowns, receptors, well bores, sources, budget, noise level', () => {
    type V = {
      name: string;
      maxDrawdown: { value: number } | null;
      maxRise: number | null;
      drawdownNoiseLevel: number;
      observations: Array<{ id: string; drawdown: number | null }>;
      receptors: Array<{ id: string; drawdown: number | null }>;
      wells: Array<{ id: string; wellboreHead: number | null; wellboreDrawdown: number | null }>;
      withdrawal: number;
      budget: { discrepancyPercent: number };
      sourcesOfWater: {
        addedPumping: number;
        terms: Array<{ term: string; netChange: number; percentOfAddedPumping: number | null }>;
        totalPercent: number | null;
      };
      calibration: Record<string, number | null>;
    };
    let checked = 0;
    const check = (key: string, value: number | null | undefined) => {
      expect(value, key).not.toBeNull();
      expect(agrees(shown(key), value!), `${key}: report shows ${shown(key)}, summary.json has ${value}`).toBe(true);
      checked++;
    };
    for (const v of summary.variants as V[]) {
      check(`${v.name}.maxDrawdown`, v.maxDrawdown!.value);
      check(`${v.name}.maxRise`, v.maxRise);
      // The noise level in summary.json is rounded to two digits, as the report shows it.
      check(`${v.name}.noiseLevel`, v.drawdownNoiseLevel);
      for (const r of v.receptors) check(`${v.name}.receptor.${r.id}`, r.drawdown);
      for (const o of v.observations) check(`${v.name}.observation.${o.id}`, o.drawdown);
      for (const w of v.wells) {
        check(`${v.name}.well.${w.id}.wellboreHead`, w.wellboreHead);
        check(`${v.name}.well.${w.id}.wellboreDrawdown`, w.wellboreDrawdown);
      }
      check(`${v.name}.withdrawal`, v.withdrawal);
      check(`${v.name}.discrepancyPercent`, v.budget.discrepancyPercent);
      check(`${v.name}.addedPumping`, v.sourcesOfWater.addedPumping);
      for (const t of v.sourcesOfWater.terms) {
        check(`${v.name}.source.${t.term}.netChange`, t.netChange);
        check(`${v.name}.source.${t.term}.percent`, t.percentOfAddedPumping);
      }
      check(`${v.name}.sourcesTotalPercent`, v.sourcesOfWater.totalPercent);
      for (const stat of ['meanError', 'meanAbsoluteError', 'rmsError', 'scaledRmsPercent'])
        check(`${v.name}.calibration.${stat}`, v.calibration[stat]);
    }
    const base = summary.baseline as { wells: Array<{ id: string; wellboreHead: number }>; calibration: Record<string, number | null> };
    for (const w of base.wells) check(`baseline.well.${w.id}.wellboreHead`, w.wellboreHead);
    for (const stat of ['meanError', 'meanAbsoluteError', 'rmsError', 'scaledRmsPercent'])
      check(`baseline.calibration.${stat}`, base.calibration[stat]);
    // The demo: 1 variant, 2 receptors, 3 observation points, 3 wells, 4 budget terms.
    expect(checked).toBeGreaterThanOrEqual(30);
  });

  it('shows every number of the printed comparison table and well-bore table, to the coarser of the two roundings', () => {
    const lines = printed.split('\n');
    const headerAt = lines.findIndex((l) => l.trim().startsWith('variant') && l.includes('max s'));
    const header = lines[headerAt]!.trim().split(/\s{2,}/);
    const row = lines[headerAt + 1]!.trim().split(/\s{2,}/);
    expect(row.length).toBe(header.length);
    const name = row[0]!;
    const receptorIds = (summary.receptors as Array<{ id: string }>).map((r) => r.id);
    let compared = 0;
    header.forEach((h, k) => {
      let key: string | null = null;
      if (h === 'max s') key = `${name}.maxDrawdown`;
      else if (h.startsWith('s '))
        key = receptorIds.includes(h.slice(2)) ? `${name}.receptor.${h.slice(2)}` : `${name}.observation.${h.slice(2)}`;
      else if (h.startsWith('withdrawal')) key = `${name}.withdrawal`;
      else if (h === 'discrepancy %') key = `${name}.discrepancyPercent`;
      else if (h.endsWith(' %')) key = `${name}.source.${h.slice(0, -2)}.percent`;
      if (!key) return;
      const inReport = shown(key);
      const inPrint = row[k]!;
      expect(agrees(inReport, parseShown(inPrint), halfUnit(inPrint)), `${h}: printed ${inPrint}, report ${inReport}`).toBe(true);
      compared++;
    });
    expect(compared).toBe(header.length - 1);
    const boreAt = lines.findIndex((l) => l.includes('well-bore head'));
    for (let k = boreAt + 1; k < lines.length && /^\s{2}\S/.test(lines[k]!) && !lines[k]!.includes(':'); k++) {
      const [variant, well, , head, drawdown] = lines[k]!.trim().split(/\s{2,}/);
      expect(agrees(shown(`${variant}.well.${well}.wellboreHead`), parseShown(head!), halfUnit(head!))).toBe(true);
      expect(agrees(shown(`${variant}.well.${well}.wellboreDrawdown`), parseShown(drawdown!), halfUnit(drawdown!))).toBe(true);
    }
  });

  it('labels cell-head and well-bore drawdown apart, and carries warnings and the caution', () => {
    expect(html).toContain('Cell-head drawdown (m)');
    expect(html).toContain('Well-bore drawdown (m)');
    for (const w of summary.warnings) expect(html).toContain(w);
    expect(html).toContain(summary.caution);
    // The two differ at PW-1 (the cell head fell less than the head in the bore).
    const cell = parseShown(shown('expanded.well.PW-1.cellDrawdown'));
    const bore = parseShown(shown('expanded.well.PW-1.wellboreDrawdown'));
    expect(bore).toBeGreaterThan(cell + 0.05);
  });
});

describe('comparison report: inputs, calibration plot, sources chart', () => {
  it('lists the inputs used: conductivity range and geometric mean, boundary groups with cells and heads', () => {
    const { model, system } = comparison.baseline;
    let logSum = 0;
    let n = 0;
    for (let p = 0; p < system.active.length; p++)
      if (system.active[p]) {
        logSum += Math.log(model.conductivity[p]!);
        n++;
      }
    const mean = Math.exp(logSum / n);
    const text = /geometric mean ([\d.]+) m\/d/.exec(html);
    expect(text).not.toBeNull();
    expect(Math.abs(Number(text![1]) - mean)).toBeLessThan(halfUnit(text![1]!) + 1e-12);
    // Fixed-head groups counted from the prescribed cells, head-dependent entries from their own cells.
    for (const name of ['downstream-edge', 'gravel-pit']) {
      const cells = Number(cells_(`input.boundary.${name}.cells`).replace(/,/g, ''));
      const group = system.groups.indexOf(name);
      let count = 0;
      for (let p = 0; p < system.fixedGroup.length; p++) if (system.fixedGroup[p] === group) count++;
      expect(cells, name).toBe(count);
    }
    for (const name of ['river', 'field-drains']) {
      const cells = Number(cells_(`input.boundary.${name}.cells`).replace(/,/g, ''));
      expect(cells, name).toBe(system.terms.find((t) => t.label === name)!.cells.length);
    }
    // The east edge is fixed at 99 m in the scenario: both ends of its head range.
    expect(html).toMatch(
      /<th scope="row">downstream-edge<\/th><td[^>]*>[\d,]+<\/td><td class="num">99\.000<\/td><td class="num">99\.000<\/td>/,
    );
  });

  it('draws observed against simulated heads with the 1:1 line beside the statistics, and a sources chart per variant', () => {
    expect((html.match(/class="observed-simulated"/g) ?? []).length).toBe(2); // baseline and the variant
    expect(html).toContain('class="one-to-one"');
    expect(html).toContain('Calibration statistics');
    expect((html.match(/class="sources-chart"/g) ?? []).length).toBe(1);
  });
});

function cells_(key: string): string {
  return cells.get(key) ?? '';
}

describe('drawdown noise', () => {
  it('zeroBelow sets values under the level to 0 and keeps larger ones and NaN', () => {
    const field = Float64Array.from([-3.7e-13, 6.5e-13, 2e-6, -0.5, NaN, 0]);
    expect(zeroBelow(field, 1e-9)).toBe(2);
    expect([...field]).toEqual([0, 0, 2e-6, -0.5, NaN, 0]);
  });

  it('a variant that changes only the solver (same wells, other method) shows no drawdown anywhere and no contour', async () => {
    // The two solves differ only by their stopping errors: every difference must fall under the noise level.
    const { model, raw } = await loadScenario('data/valley.json');
    raw.variants = [{ name: 'other-solver', solver: { method: 'pcg-ic0', tolerance: 1e-10, maxIterations: 20000 } } as never];
    const variants = await resolveVariants(model, raw);
    const c = await compareScenario({ model, raw }, {});
    const v = c.variants[0]!;
    expect(variants[0]!.model.solver.method).toBe('pcg-ic0');
    expect(v.noiseLevel).toBeGreaterThan(0);
    expect(v.noiseLevel).toBeLessThan(1e-6);
    for (const s of v.drawdown!) if (Number.isFinite(s)) expect(s).toBe(0);
    expect(v.maxRise).toBe(0);
    for (const r of v.receptors) expect(r.drawdown).toBe(0);
    const { files } = comparisonFiles(c);
    const contours = JSON.parse(String(files.find((f) => f.name === 'other-solver/drawdown-contours.geojson')!.bytes)) as {
      features: unknown[];
    };
    expect(contours.features).toHaveLength(0);
  }, 60_000);

  it('drawdownNoiseLevel grows with the solves\u2019 residuals and with the size of the heads', () => {
    const head = Float64Array.from([100, 110, NaN]);
    const tight = drawdownNoiseLevel([{ relativeResidual: 1e-12, head, datum: 105 }]);
    const loose = drawdownNoiseLevel([{ relativeResidual: 1e-8, head, datum: 105 }]);
    // 100 x 1e-8 x 5 m = 5e-6 m, plus 1000 machine epsilons of 110 m (2.4e-11 m).
    expect(loose).toBeCloseTo(5e-6 + 1000 * Number.EPSILON * 110, 15);
    expect(tight).toBeLessThan(loose);
  });
});

describe('docs/compare.md', () => {
  it("shows the printed table of today's output (PIEZOMAP_UPDATE_DOCS=1 rewrites it)", () => {
    const lines = printed.split('\n');
    const from = lines.findIndex((l) => l.startsWith('Drawdown ('));
    // Up to the warnings, the results line or the blank line before the caution: nothing that changes per run.
    const to = lines.findIndex((l, k) => k > from && (l === '' || l.startsWith('Results') || l.startsWith('warning')));
    const sample = lines.slice(from, to).join('\n');
    const doc = readFileSync('docs/compare.md', 'utf8');
    const block = /(\*\*Printed table\*\*[^\n]*\n\n```text\n)([\s\S]*?)(\n```)/;
    expect(doc).toMatch(block);
    if (process.env.PIEZOMAP_UPDATE_DOCS === '1')
      writeFileSync(
        'docs/compare.md',
        doc.replace(block, (_, a: string, _b: string, c: string) => a + sample + c),
      );
    else expect(block.exec(doc)![2]).toBe(sample);
  });
});
