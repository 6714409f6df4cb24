/**
 * `npm run depcheck`: the import rules of src/ (.dependency-cruiser.cjs: no cycles, layers one way), checked with
 * dependency-cruiser's API. The API rather than its command line, because the command line refuses Node 20, which
 * this project supports (package.json engines); the API runs on it. Prints every violation; exit 1 when any.
 * `--graph` prints the module graph as "from -> to" lines (for reviews).
 */
import { createRequire } from 'node:module';
import { cruise } from 'dependency-cruiser';
import extractTSConfig from 'dependency-cruiser/config-utl/extract-ts-config';

const require = createRequire(import.meta.url);
const config = require(process.env.DEPCHECK_CONFIG ?? '../.dependency-cruiser.cjs');

const tsConfig = extractTSConfig('tsconfig.json');
const result = await cruise(
  ['src'],
  { ...config.options, ruleSet: { forbidden: config.forbidden }, validate: true, outputType: 'json' },
  { extensions: ['.ts', '.js', '.mjs', '.cjs', '.d.ts', '.json'] },
  { tsConfig },
);
const output = typeof result.output === 'string' ? JSON.parse(result.output) : result.output;
if (process.argv.includes('--graph')) {
  for (const m of output.modules)
    for (const d of m.dependencies) if (d.resolved.startsWith('src/')) console.log(`${m.source} -> ${d.resolved}`);
}
const violations = output.summary.violations;
for (const v of violations) {
  const cycle = v.cycle ? ` (cycle: ${v.cycle.map((c) => c.name ?? c).join(' -> ')})` : '';
  console.log(`${v.rule.severity} ${v.rule.name}: ${v.from} -> ${v.to}${cycle}`);
}
console.log(
  `depcheck: ${output.summary.totalCruised} modules, ${output.summary.totalDependenciesCruised} imports, ${violations.length} violation(s)`,
);
process.exit(output.summary.error > 0 ? 1 : 0);
