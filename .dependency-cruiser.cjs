/**
 * The import rules of src/, checked by `npm run depcheck` (part of `npm test`): no import cycles, and no module
 * importing a module of a higher layer. The layer order is written here once (DEVELOPERS.md shows the same list);
 * a module may import its own layer and any lower one.
 */
const LAYERS = [
  // lowest first
  { name: 'base', path: '^src/(errors|grid|field|caution|version|random|memory|crs)\\.ts$' },
  { name: 'solvers', path: '^src/solvers/' },
  { name: 'executor', path: '^src/executor/' },
  { name: 'raster', path: '^src/raster/' },
  { name: 'scenario', path: '^src/scenario/' },
  { name: 'discretisation', path: '^src/discretisation/' },
  { name: 'analysis', path: '^src/(analysis/|ensemble/(field|conditioning|stats|types)\\.ts$)' },
  { name: 'results', path: '^src/compare/types\\.ts$' },
  { name: 'report', path: '^src/report/' },
  { name: 'output', path: '^src/(output/|ensemble/(files|report)\\.ts$)' },
  { name: 'run', path: '^src/(pipeline\\.ts|compare/run\\.ts|ensemble/(run|realisation|pool|ensembleWorker|shard)\\.ts)$' },
  { name: 'cli', path: '^src/(cli/|index\\.ts$)' },
];

const layerRules = LAYERS.slice(0, -1).map((layer, i) => ({
  name: `layer-${layer.name}`,
  comment: `${layer.name} may import only ${LAYERS.slice(0, i + 1).map((l) => l.name).join(', ')}`,
  severity: 'error',
  from: { path: layer.path },
  to: { path: LAYERS.slice(i + 1).map((l) => l.path) },
}));

/** @type {import('dependency-cruiser').IConfiguration} */
module.exports = {
  forbidden: [
    {
      name: 'no-cycles',
      comment: 'an import cycle ties modules together so that neither can be understood or tested alone',
      severity: 'error',
      from: { path: '^src/' },
      to: { circular: true },
    },
    {
      name: 'in-a-layer',
      comment: 'every module of src/ belongs to a layer: add new top-level files to LAYERS',
      severity: 'error',
      from: { path: '^src/', pathNot: LAYERS.map((l) => l.path) },
      to: {},
    },
    ...layerRules,
  ],
  options: {
    doNotFollow: { path: 'node_modules' },
    includeOnly: '^src/',
    tsPreCompilationDeps: true,
    tsConfig: { fileName: 'tsconfig.json' },
    enhancedResolveOptions: { exportsFields: ['exports'], conditionNames: ['import', 'require', 'node', 'default', 'types'] },
  },
};
