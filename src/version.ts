import { createRequire } from 'node:module';

const require = createRequire(import.meta.url);
/** The package version, read from package.json (works from src/ under vitest and from dist/src/). */
export const VERSION: string = (() => {
  for (const candidate of ['../package.json', '../../package.json']) {
    try {
      const pkg = require(candidate) as { name?: string; version?: string };
      if (pkg.name === 'piezomap' && pkg.version) return pkg.version;
    } catch {
      // try the next location
    }
  }
  return '0.0.0';
})();
