/**
 * zod issues as short lines a user can act on: `scenario.json: wells[1].rate: expected a number, got a string`.
 * The text is our own (zod's default messages are generic); the key path is always named.
 */
import type * as z from 'zod';

type Issue = z.core.$ZodIssue;
type PathSegment = PropertyKey;

/** Format every issue (one or more lines each), keep at most `maxLines` lines, and count the rest. */
export function describeIssues(issues: readonly Issue[], input: unknown, label: string, maxLines: number): { text: string; count: number } {
  const lines: string[] = [];
  for (const issue of issues) {
    for (const line of issueLines(issue, input)) lines.push(`${label}: ${line}`);
  }
  const unique = [...new Set(lines)];
  if (unique.length <= maxLines) return { text: unique.join('\n'), count: unique.length };
  const kept = unique.slice(0, maxLines - 1);
  kept.push(`${label}: ... and ${unique.length - kept.length} more problems`);
  return { text: kept.join('\n'), count: unique.length };
}

/** `aquifer.conductivity`, `wells[1].rate`, `["odd key"]`; the empty path is the top level. */
export function formatKeyPath(path: readonly PathSegment[]): string {
  let text = '';
  for (const segment of path) {
    if (typeof segment === 'number') text += `[${segment}]`;
    else if (typeof segment === 'string' && /^[A-Za-z_$][\w$]*$/.test(segment)) text += text ? `.${segment}` : segment;
    else text += `[${JSON.stringify(String(segment))}]`;
  }
  return text;
}

function issueLines(issue: Issue, input: unknown): string[] {
  const where = formatKeyPath(issue.path);
  const at = (text: string): string => (where ? `${where}: ${text}` : `top level: ${text}`);
  const present = valueAt(input, issue.path);
  switch (issue.code) {
    case 'unrecognized_keys': {
      // schema.ts writes one line per key, in the order of issue.keys.
      const texts = issue.message.split('\n');
      return issue.keys.map((key, index) => {
        const keyPath = formatKeyPath([...issue.path, key]);
        const text = texts.length === issue.keys.length ? texts[index]! : 'unknown key';
        return `${keyPath}: ${text}`;
      });
    }
    case 'invalid_type': {
      if (!present.found) return [at(`required key is missing (expected ${article(issue.expected)})`)];
      return [at(`expected ${article(issue.expected)}, got ${describeValue(present.value)}`)];
    }
    case 'too_small':
      if (isCustomMessage(issue.message)) return [at(issue.message)];
      return [at(boundText(issue.origin, 'min', issue.minimum, issue.inclusive ?? false, present.value))];
    case 'too_big':
      if (isCustomMessage(issue.message)) return [at(issue.message)];
      return [at(boundText(issue.origin, 'max', issue.maximum, issue.inclusive ?? false, present.value))];
    case 'invalid_value': {
      const allowed = issue.values.map((value) => JSON.stringify(value)).join(', ');
      const got = present.found ? `, got ${describeValue(present.value)}` : '';
      return [at(`expected one of ${allowed}${got}`)];
    }
    case 'custom':
      if (!present.found && issue.message.startsWith('expected ')) {
        return [at(`required key is missing (${issue.message})`)];
      }
      if (present.found && issue.message.startsWith('expected ')) {
        return [at(`${issue.message}, got ${describeValue(present.value)}`)];
      }
      return [at(issue.message)];
    case 'invalid_format':
      return [at(isCustomMessage(issue.message) ? issue.message : `has the wrong form (${issue.format})`)];
    case 'invalid_union':
      return [at(isCustomMessage(issue.message) ? issue.message : 'is not any of the accepted forms')];
    default:
      return [at(issue.message)];
  }
}

/** zod's own messages start like this; ours (set in schema.ts) do not. */
function isCustomMessage(message: string): boolean {
  return !/^(Too small|Too big|Invalid)/.test(message);
}

function boundText(origin: string, side: 'min' | 'max', bound: number | bigint, inclusive: boolean, value: unknown): string {
  const got = typeof value === 'number' ? ` (got ${value})` : '';
  if (origin === 'array' || origin === 'set') {
    return side === 'min' ? `needs at least ${bound} ${Number(bound) === 1 ? 'entry' : 'entries'}` : `allows at most ${bound} entries`;
  }
  if (origin === 'string') {
    if (side === 'min' && Number(bound) === 1) return 'must not be empty';
    return side === 'min' ? `must have at least ${bound} characters` : `must have at most ${bound} characters`;
  }
  const op = side === 'min' ? (inclusive ? '>=' : '>') : inclusive ? '<=' : '<';
  return `must be ${op} ${bound}${got}`;
}

function article(expected: string): string {
  switch (expected) {
    case 'number':
      return 'a number';
    case 'int':
      return 'a whole number';
    case 'string':
      return 'a string';
    case 'boolean':
      return 'true or false';
    case 'object':
      return 'an object { ... }';
    case 'array':
      return 'a list [ ... ]';
    default:
      return expected;
  }
}

function describeValue(value: unknown): string {
  if (value === null) return 'null';
  if (Array.isArray(value)) return 'a list';
  switch (typeof value) {
    case 'number':
      return `${value}`;
    case 'string': {
      const shown = value.length > 40 ? `${value.slice(0, 37)}...` : value;
      return `the string ${JSON.stringify(shown)}`;
    }
    case 'boolean':
      return `${value}`;
    case 'object':
      return 'an object';
    default:
      return typeof value;
  }
}

/** The value at a key path in the raw JSON, and whether the key is there at all. */
function valueAt(input: unknown, path: readonly PathSegment[]): { found: boolean; value: unknown } {
  let current: unknown = input;
  for (const segment of path) {
    if (current === null || typeof current !== 'object') return { found: false, value: undefined };
    if (!Object.hasOwn(current, segment)) return { found: false, value: undefined };
    current = (current as Record<PropertyKey, unknown>)[segment];
  }
  return { found: current !== undefined, value: current };
}
