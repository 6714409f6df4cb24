/**
 * Long point lists through the outputs: 200 000 wells (more than a function call takes as arguments in V8, about
 * 120 000 with the default stack; common practice knowledge, from memory) must be summarised, printed and mapped
 * without a stack overflow. Before: "Maximum call stack size exceeded" from Math.max(...rows) after the results
 * were written, and the map's "SVG nodes limit reached".
 */
import { describe, expect, it } from 'vitest';
import { solveModel } from '../../src/pipeline.js';
import { resultBundle } from '../../src/output/solveFiles.js';
import { buildSummary, formatSummary, MAX_PRINTED_ROWS } from '../../src/output/summary.js';
import { fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';

describe('outputs of a run with 200 000 wells', () => {
  it('builds the result files, the summary and the printed summary; the printout lists 50 wells and counts the rest', () => {
    const grid = testGrid(12, 8, 100);
    const wells = [];
    for (let i = 0; i < 200_000; i++) wells.push(well(grid, `W${i}`, i % 8, 1 + (i % 10), -1e-4));
    const model = makeModel(grid, {
      conductivity: new Float64Array(96).fill(5),
      thickness: 20,
      fixedHeads: [fixedColumn(grid, 0, 50, 'west'), fixedColumn(grid, 11, 45, 'east')],
      wells,
      solver: { method: 'auto', tolerance: 1e-10, maxIterations: 500 },
    });
    const result = solveModel(model);
    // Mass balance, as a check that every well counted: total withdrawal 200 000 x 1e-4 = 20 (spec: water budget).
    const wellTerm = result.budget.terms.find((t) => t.term === 'wells')!;
    expect(wellTerm.outflow).toBeCloseTo(20, 9);
    // Without maps here: the map of many points has its own test (test/report/map-dense.test.ts).
    const bundle = resultBundle(result, '', { maps: false });
    expect(bundle.files.map((f) => f.name)).toContain('head.tif');
    const summary = buildSummary(
      result,
      bundle.files.map((f) => f.name),
      'test',
    );
    expect(summary.wells).toHaveLength(200_000);
    const text = formatSummary(summary, null);
    expect(text).toContain(`... and ${(200_000 - MAX_PRINTED_ROWS).toLocaleString('en-US')} more wells (all in summary.json)`);
    expect(text).toContain(' W49 ');
    expect(text).not.toContain(' W50 ');
  });
});
