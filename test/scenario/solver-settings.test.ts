/**
 * Solver settings are validated once: a command-line override is checked by the same schema as the scenario's
 * `solver` key it overrides, with the same words, and refused with exit status 2 like the JSON value
 * (../shared/spec/interface.md: 2 = bad input or usage). Issue 9, item 9: `--tolerance 5` used to be accepted.
 */
import { describe, expect, it } from 'vitest';
import { PiezomapError, exitCodeFor } from '../../src/errors.js';
import { parseScenarioJson } from '../../src/scenario/schema.js';
import { parseSolverOption, resolveSolverSettings } from '../../src/scenario/solverSettings.js';

const scenarioDefaults = { method: 'auto', tolerance: 1e-8, maxIterations: 20000 };

function jsonProblem(solver: Record<string, unknown>): string {
  const parsed = parseScenarioJson(
    { aquifer: { conductivity: 'k.tif', thickness: 1 }, fixedHeads: [{ edge: 'west', head: 1 }], solver },
    'scenario.json',
    10,
  );
  expect(parsed.ok).toBe(false);
  return parsed.ok ? '' : parsed.message;
}

function optionProblem(run: () => unknown): PiezomapError {
  try {
    run();
  } catch (thrown) {
    expect(thrown).toBeInstanceOf(PiezomapError);
    return thrown as PiezomapError;
  }
  throw new Error('expected a refusal');
}

describe('solver settings, one validation for the command line and the scenario', () => {
  const cases: Array<[key: 'tolerance' | 'maxIterations' | 'relaxation', flag: string, text: string, value: number]> = [
    ['tolerance', '--tolerance', '5', 5],
    ['tolerance', '--tolerance', '0', 0],
    ['maxIterations', '--max-iterations', '1.5', 1.5],
    ['relaxation', '--relaxation', '2', 2],
  ];
  for (const [key, flag, text, value] of cases) {
    it(`${flag} ${text} is refused with exit 2 and the words of solver.${key}: ${value} in JSON`, () => {
      const json = jsonProblem({ [key]: value });
      const option = optionProblem(() => parseSolverOption(key, text));
      expect(exitCodeFor(option)).toBe(2);
      // Same complaint after the label: "scenario.json: solver.tolerance: must be < 1 (got 5)" / "--tolerance: must be < 1 (got 5)".
      const reason = json.slice(json.indexOf(`solver.${key}: `) + `solver.${key}: `.length);
      expect(option.message).toBe(`${flag}: ${reason}`);
      // The library path (RunOptions overrides) refuses it the same way.
      expect(optionProblem(() => resolveSolverSettings(scenarioDefaults, { [key]: value })).message).toBe(option.message);
    });
  }

  it('accepts values inside the ranges and applies them over the scenario', () => {
    expect(parseSolverOption('tolerance', '1e-9')).toBe(1e-9);
    expect(parseSolverOption('maxIterations', '4321')).toBe(4321);
    expect(resolveSolverSettings(scenarioDefaults, { tolerance: 1e-6, method: 'sor', relaxation: 1.5 })).toEqual({
      method: 'sor',
      tolerance: 1e-6,
      maxIterations: 20000,
      relaxation: 1.5,
    });
  });

  it('refuses text that is not a number, and a method the registry does not know, from either source', () => {
    expect(exitCodeFor(optionProblem(() => parseSolverOption('tolerance', 'abc')))).toBe(2);
    expect(optionProblem(() => parseSolverOption('tolerance', 'abc')).message).toBe('--tolerance: expected a number, got "abc"');
    expect(exitCodeFor(optionProblem(() => parseSolverOption('tolerance', '')))).toBe(2);
    expect(optionProblem(() => parseSolverOption('method', 'magic')).message).toBe('unknown solver method "magic"');
    const fromScenario = optionProblem(() => resolveSolverSettings({ ...scenarioDefaults, method: 'magic' }));
    expect(fromScenario.message).toBe('unknown solver method "magic"');
    expect(exitCodeFor(fromScenario)).toBe(2);
  });
});
