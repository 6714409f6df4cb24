/**
 * The one CSV cell function every CSV writer uses (budget.csv, convergence.csv, comparison.csv).
 *
 * Text cells are neutralised against formula injection as the OWASP "CSV Injection" guidance recommends: a cell
 * that begins with `=`, `+`, `-`, `@`, tab (0x09) or carriage return (0x0D) would be read by a spreadsheet as a
 * formula, so it gets a leading single quote (shown as text, the quote itself hidden by most spreadsheets) and the
 * field is wrapped in double quotes with inner quotes doubled. A leading NUL is treated the same way (it is in the
 * OWASP ASVS list). Other text is quoted only where RFC 4180 needs it (comma, quote, line break) or where a reader
 * splitting on `;` (a common spreadsheet setting) would split it. Numbers stay numbers: a negative number keeps its
 * minus sign; a number that is not finite becomes an empty cell.
 */
const FORMULA_START = /^[=+\-@\t\r\0]/;
const NEEDS_QUOTES = /[",;\r\n\t]/;

export function csvCell(value: string | number | null | undefined): string {
  if (value === null || value === undefined) return '';
  if (typeof value === 'number') return Number.isFinite(value) ? String(value) : '';
  if (FORMULA_START.test(value)) return `"'${value.replace(/"/g, '""')}"`;
  return NEEDS_QUOTES.test(value) ? `"${value.replace(/"/g, '""')}"` : value;
}

/** One CSV line from its cells. */
export function csvRow(cells: ReadonlyArray<string | number | null | undefined>): string {
  return cells.map(csvCell).join(',');
}
