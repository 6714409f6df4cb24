/**
 * Plain-text formats of the scenario: CSV point lists (RFC 4180: quoted fields, "" escapes, CRLF, a leading BOM)
 * and JSON syntax errors located by line and column (JSON, RFC 8259), and JSON text parsed with those errors as
 * input errors. Pure functions; load.ts does the file I/O.
 */
import { describeThrown, inputError } from '../errors.js';

export interface CsvRecord {
  /** 1-based line where the record starts (a quoted field may span lines). */
  line: number;
  fields: string[];
}

export class CsvSyntaxError extends Error {
  constructor(
    message: string,
    readonly line: number,
  ) {
    super(message);
  }
}

/** Split CSV text into records. Blank lines are skipped; fields are returned as written (not trimmed). */
export function parseCsv(text: string): CsvRecord[] {
  const records: CsvRecord[] = [];
  const n = text.length;
  let i = text.charCodeAt(0) === 0xfeff ? 1 : 0;
  let line = 1;
  while (i < n) {
    const startLine = line;
    const fields: string[] = [];
    let endOfRecord = false;
    while (!endOfRecord) {
      let field = '';
      if (text[i] === '"') {
        const quoteLine = line;
        i++;
        for (;;) {
          if (i >= n) throw new CsvSyntaxError(`a quoted field opened on line ${quoteLine} is never closed`, quoteLine);
          const ch = text[i]!;
          if (ch === '"') {
            if (text[i + 1] === '"') {
              field += '"';
              i += 2;
              continue;
            }
            i++;
            break;
          }
          if (ch === '\n') line++;
          field += ch;
          i++;
        }
        // Only spaces may follow a closing quote before the separator.
        while (i < n && (text[i] === ' ' || text[i] === '\t')) i++;
        if (i < n && text[i] !== ',' && text[i] !== '\n' && text[i] !== '\r') {
          throw new CsvSyntaxError(`unexpected text after a closing quote on line ${line}`, line);
        }
      } else {
        const start = i;
        while (i < n && text[i] !== ',' && text[i] !== '\n' && text[i] !== '\r') i++;
        field = text.slice(start, i);
        if (field.includes('"')) throw new CsvSyntaxError(`a quote inside an unquoted field on line ${line}`, line);
      }
      fields.push(field);
      if (i >= n) {
        endOfRecord = true;
      } else if (text[i] === ',') {
        i++;
      } else {
        // \r\n, \n or a lone \r ends the record.
        if (text[i] === '\r' && text[i + 1] === '\n') i++;
        i++;
        line++;
        endOfRecord = true;
      }
    }
    const blank = fields.length === 1 && fields[0]!.trim() === '';
    if (!blank) records.push({ line: startLine, fields });
  }
  return records;
}

export interface JsonSyntaxProblem {
  /** 1-based. */
  line: number;
  column: number;
  problem: string;
  /** What to do about it, when the problem is not plain syntax (e.g. nesting too deep). */
  hint?: string;
}

/**
 * Deepest nesting of objects and lists accepted: a scenario needs about 5 levels and a GeoJSON MultiPolygon
 * about 8. Deeper text is refused before anything walks it recursively: JSON.parse accepts 200 000 levels, and
 * the recursive walks after it (this scanner, the schema check) then overflowed the stack.
 */
export const MAX_JSON_DEPTH = 100;

/**
 * Where JSON text first breaks the grammar and why, in words a user can act on, or null when it is valid JSON.
 * (JSON.parse's messages differ between Node versions and do not always give a position.)
 * With `duplicateKeys`, a key repeated within one object counts as a problem too (RFC 8259 section 4 leaves
 * that case's meaning open; JSON.parse keeps the last value).
 */
export function findJsonSyntaxError(text: string, options: { duplicateKeys?: boolean } = {}): JsonSyntaxProblem | null {
  const scanner = new JsonScanner(text, options.duplicateKeys ?? false);
  try {
    scanner.document();
    return null;
  } catch (thrown) {
    if (!(thrown instanceof JsonStop)) throw thrown;
    const { line, column } = lineColumn(text, thrown.offset);
    return { line, column, problem: thrown.message, ...(thrown.hint ? { hint: thrown.hint } : {}) };
  }
}

/** 1-based line and column of a character offset (a BOM is not a column). */
export function lineColumn(text: string, offset: number): { line: number; column: number } {
  let line = 1;
  let lineStart = text.charCodeAt(0) === 0xfeff ? 1 : 0;
  const end = Math.min(offset, text.length);
  for (let i = 0; i < end; i++) {
    if (text.charCodeAt(i) === 10) {
      line++;
      lineStart = i + 1;
    }
  }
  return { line, column: end - lineStart + 1 };
}

class JsonStop extends Error {
  constructor(
    message: string,
    readonly offset: number,
    readonly hint?: string,
  ) {
    super(message);
  }
}

class JsonScanner {
  private i = 0;
  /** Objects and lists open at the current position. */
  private depth = 0;

  constructor(
    private readonly text: string,
    private readonly duplicateKeys: boolean,
  ) {
    if (text.charCodeAt(0) === 0xfeff) this.i = 1;
  }

  document(): void {
    this.space();
    if (this.i >= this.text.length) this.stop('the file is empty (expected a JSON object)');
    this.value();
    this.space();
    if (this.i < this.text.length) this.stop(`unexpected ${this.shown()} after the end of the JSON value`);
  }

  private value(): void {
    const ch = this.text[this.i];
    if (ch === undefined) this.stop('the file ends in the middle of the JSON (a value is missing)');
    if (ch === '{' || ch === '[') {
      if (this.depth >= MAX_JSON_DEPTH) {
        throw new JsonStop(
          `objects and lists are nested more than ${MAX_JSON_DEPTH} levels deep here`,
          this.i,
          'a scenario needs about 5 levels and GeoJSON about 8: check how the file was generated',
        );
      }
      this.depth++;
      if (ch === '{') this.object();
      else this.array();
      this.depth--;
      return;
    }
    if (ch === '"') {
      this.string();
      return;
    }
    if (ch === '-' || (ch >= '0' && ch <= '9')) {
      this.number();
      return;
    }
    if (ch === "'") this.stop('strings need double quotes ("), not single quotes');
    for (const word of ['true', 'false', 'null']) {
      if (this.text.startsWith(word, this.i)) {
        this.i += word.length;
        return;
      }
    }
    if (ch === '/') this.stop('comments are not allowed in JSON');
    if (ch === '}' || ch === ']') this.stop(`a value is missing before "${ch}"`);
    if (ch === ',') this.stop('a value is missing before ","');
    this.stop(`unexpected ${this.shown()} (expected a value: number, "string", true, false, null, { or [)`);
  }

  private object(): void {
    this.i++;
    this.space();
    if (this.text[this.i] === '}') {
      this.i++;
      return;
    }
    const keys = new Set<string>();
    for (;;) {
      this.space();
      const ch = this.text[this.i];
      if (ch === '}') this.stop('trailing comma before "}"', this.lastComma);
      if (ch !== '"') {
        if (ch === undefined) this.stop('the file ends inside an object (missing "}")');
        this.stop(ch === "'" ? 'keys need double quotes ("), not single quotes' : `expected a key in double quotes, found ${this.shown()}`);
      }
      const keyStart = this.i;
      this.string();
      // JSON.parse keeps the last of two equal keys silently; in a scenario that hides an edit, so it is an error.
      if (this.duplicateKeys) {
        const key = JSON.parse(this.text.slice(keyStart, this.i)) as string;
        if (keys.has(key)) this.stop(`the key ${JSON.stringify(key)} appears twice in the same object`, keyStart);
        keys.add(key);
      }
      this.space();
      if (this.text[this.i] !== ':') this.stop(`expected ":" after a key, found ${this.shown()}`);
      this.i++;
      this.space();
      this.value();
      this.space();
      const next = this.text[this.i];
      if (next === ',') {
        this.lastComma = this.i;
        this.i++;
        continue;
      }
      if (next === '}') {
        this.i++;
        return;
      }
      if (next === undefined) this.stop('the file ends inside an object (missing "}")');
      this.stop(`expected "," or "}" after a value, found ${this.shown()}`);
    }
  }

  private lastComma = 0;

  private array(): void {
    this.i++;
    this.space();
    if (this.text[this.i] === ']') {
      this.i++;
      return;
    }
    for (;;) {
      this.space();
      if (this.text[this.i] === ']') this.stop('trailing comma before "]"', this.lastComma);
      this.value();
      this.space();
      const next = this.text[this.i];
      if (next === ',') {
        this.lastComma = this.i;
        this.i++;
        continue;
      }
      if (next === ']') {
        this.i++;
        return;
      }
      if (next === undefined) this.stop('the file ends inside a list (missing "]")');
      this.stop(`expected "," or "]" after a value, found ${this.shown()}`);
    }
  }

  private string(): void {
    const start = this.i;
    this.i++;
    for (;;) {
      const code = this.text.charCodeAt(this.i);
      if (Number.isNaN(code)) this.stop('a string is never closed (missing ")', start);
      if (code === 0x22) {
        this.i++;
        return;
      }
      if (code < 0x20) this.stop('line break or control character inside a string (missing closing "?)');
      if (code === 0x5c) {
        const escaped = this.text[this.i + 1];
        if (escaped === 'u') {
          if (!/^[0-9a-fA-F]{4}$/.test(this.text.slice(this.i + 2, this.i + 6))) this.stop('bad \\u escape (needs 4 hex digits)');
          this.i += 6;
          continue;
        }
        if (escaped === undefined || !'"\\/bfnrt'.includes(escaped)) {
          this.stop('bad escape in a string (write a backslash as \\\\, e.g. in Windows paths, or use /)');
        }
        this.i += 2;
        continue;
      }
      this.i++;
    }
  }

  private number(): void {
    const match = /^-?(0|[1-9]\d*)(\.\d+)?([eE][+-]?\d+)?/.exec(this.text.slice(this.i, this.i + 400));
    if (!match) this.stop(`malformed number starting with ${this.shown()}`);
    this.i += match[0].length;
    const next = this.text[this.i];
    if (next !== undefined && /[0-9.eE]/.test(next)) this.stop('malformed number (leading zero, or misplaced "." or exponent)');
  }

  private space(): void {
    const text = this.text;
    while (this.i < text.length) {
      const ch = text.charCodeAt(this.i);
      if (ch !== 0x20 && ch !== 0x09 && ch !== 0x0a && ch !== 0x0d) return;
      this.i++;
    }
  }

  /** What stands at the current position, for messages: a string, a word or number, or one character. */
  private shown(): string {
    const rest = this.text.slice(this.i, this.i + 40);
    if (rest === '') return 'the end of the file';
    const quoted = /^"[^"\\\r\n]{0,24}"/.exec(rest);
    if (quoted) return `the string ${quoted[0]}`;
    const word = /^[\w.+-]{1,24}/.exec(rest);
    return `"${word ? word[0] : rest[0]}"`;
  }

  private stop(message: string, offset: number = this.i): never {
    throw new JsonStop(message, offset);
  }
}

/** JSON text to a value; a syntax error names the file, line and column. */
export function parseJsonText(text: string, label: string, absolute: string): unknown {
  let value: unknown;
  try {
    value = JSON.parse(text.charCodeAt(0) === 0xfeff ? text.slice(1) : text);
  } catch (thrown) {
    const problem = findJsonSyntaxError(text);
    const where = problem ? ` line ${problem.line}, column ${problem.column}` : '';
    const what = problem ? problem.problem : describeThrown(thrown);
    throw inputError(`${label}${where}: invalid JSON: ${what}`, {
      file: absolute,
      hint: problem?.hint ?? 'fix the JSON syntax (a JSON validator or editor will point at the same place)',
    });
  }
  const duplicate = findJsonSyntaxError(text, { duplicateKeys: true });
  if (duplicate) {
    throw inputError(`${label} line ${duplicate.line}, column ${duplicate.column}: ${duplicate.problem}`, {
      file: absolute,
      hint: duplicate.hint ?? 'keep one of them: otherwise the last one would silently win',
    });
  }
  return value;
}
