import { createRequire } from 'node:module';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const require = createRequire(import.meta.url);

/**
 * The bundled demo scenario, data/valley.json inside the installed package, so that scripts in a project that
 * depends on piezomap can run it without knowing where npm put the package. Works from src/ (vitest, tsx) and
 * from dist/src/ (the built package).
 */
export function demoScenarioPath(): string {
  return join(packageRoot(), 'data', 'valley.json');
}

/** The folder holding piezomap's own package.json: one level up from src/, two from dist/src/. */
function packageRoot(): string {
  const here = dirname(fileURLToPath(import.meta.url));
  const candidates = [resolve(here, '..'), resolve(here, '../..')];
  for (const root of candidates) {
    try {
      const pkg = require(join(root, 'package.json')) as { name?: unknown };
      if (pkg.name === 'piezomap') return root;
    } catch {
      // not this level; try the next
    }
  }
  // Not inside a piezomap package (files copied out of it): the layout of the built package is the best guess, and
  // loading the scenario will then name the missing file.
  return candidates[1]!;
}
