/**
 * Solver settings, resolved and validated once: the scenario's `solver` key (already checked by its schema) with the
 * command line's overrides, each override checked by the same schema as the scenario key it overrides, and the
 * method checked against the solver registry. The CLI, the worker, `solve` and `compare` all use the result, so a
 * value refused in JSON is refused on the command line with the same words and the same exit status (2).
 */
import { PiezomapError } from '../errors.js';
import { solverMethodNames } from '../solvers/registry.js';
import { describeIssues } from './issues.js';
import { solverSchema } from './schema.js';
import type { SolverSettings } from './types.js';

export type SolverOverrides = Partial<SolverSettings>;

/** The command-line option of each setting. */
export const SOLVER_OPTION_FLAGS: Readonly<Record<keyof SolverSettings, string>> = {
  method: '--method',
  tolerance: '--tolerance',
  maxIterations: '--max-iterations',
  relaxation: '--relaxation',
  threads: '--threads',
};

function check(key: keyof SolverSettings, value: unknown, label: string): void {
  const result = solverSchema.shape[key].safeParse(value);
  if (!result.success) {
    const text = describeIssues(result.error.issues, value, label, 3).text.replace(`${label}: top level: `, `${label}: `);
    throw new PiezomapError('usage', text, { key: `solver.${key}` });
  }
  if (key === 'method' && !solverMethodNames().includes(value as string)) {
    throw new PiezomapError('usage', `unknown solver method "${String(value)}"`, {
      key: 'solver.method',
      hint: `choose one of: ${solverMethodNames().join(', ')}`,
    });
  }
}

/** A setting's value from command-line text, checked as the scenario key is. */
export function parseSolverOption(key: keyof SolverSettings, text: string): string | number {
  const flag = SOLVER_OPTION_FLAGS[key];
  const value = key === 'method' ? text : key === 'threads' && text.trim() === 'auto' ? 'auto' : text.trim() === '' ? NaN : Number(text);
  if (typeof value === 'number' && Number.isNaN(value)) {
    const expected = key === 'threads' ? 'a whole number or "auto"' : 'a number';
    throw new PiezomapError('usage', `${flag}: expected ${expected}, got "${text}"`, { key: `solver.${key}` });
  }
  check(key, value, flag);
  return value;
}

/** The settings a run uses: the scenario's, with every given override checked and applied. */
export function resolveSolverSettings(scenario: SolverSettings, overrides: SolverOverrides = {}): SolverSettings {
  const settings: SolverSettings = { ...scenario };
  for (const key of Object.keys(SOLVER_OPTION_FLAGS) as Array<keyof SolverSettings>) {
    const value = overrides[key];
    if (value === undefined) continue;
    check(key, value, SOLVER_OPTION_FLAGS[key]);
    (settings as unknown as Record<string, unknown>)[key] = value;
  }
  check('method', settings.method, 'solver.method');
  return settings;
}
