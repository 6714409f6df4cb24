/**
 * Tracking benchmark: capture rasters and zones of the 10 wells of the benchmark case (bench/case.ts).
 *   npm run build && node dist/bench/tracking.js [--size 1024] [--workers 2]
 */
import { assembleSystem, headsFromSolution } from '../src/discretisation/assemble.js';
import { chooseAutoMethod, createSolver } from '../src/solvers/registry.js';
import { faceFlows } from '../src/analysis/flux.js';
import { buildTrackingField, type StopLabel, type TrackingInput } from '../src/analysis/tracking/field.js';
import { endRasters } from '../src/analysis/tracking/rasters.js';
import { benchCase } from './case.js';

const size = Number(process.argv[process.argv.indexOf('--size') + 1] ?? 1024) || 1024;
const { model } = benchCase(size);
const system = assembleSystem(model);
const solver = createSolver(chooseAutoMethod(system.operator), system.operator, {});
const x = new Float64Array(system.operator.n);
solver.solve(system.rhs, x, { tolerance: 1e-10, maxIterations: 1000 });
const head = headsFromSolution(system, x);
const flows = faceFlows(system.grid, head, system.conductanceEast, system.conductanceSouth);
const n = size * size;
const stopLabel = new Int32Array(n).fill(-1);
const labels: StopLabel[] = [];
system.groups.forEach((name) => labels.push({ kind: 'boundary', name }));
for (let p = 0; p < n; p++) if (system.fixed[p]) stopLabel[p] = system.fixedGroup[p]!;
model.wells.forEach((w, k) => {
  labels.push({ kind: 'well', name: w.id });
  stopLabel[system.wellCells[k]!] = labels.length - 1;
});
const input: TrackingInput = {
  nx: size, ny: size, dx: 10, dy: 10, faceEast: flows.east, faceSouth: flows.south, active: system.active,
  thickness: 20, porosity: 0.2, stopLabel, labels,
};
let t = performance.now();
const field = buildTrackingField(input);
console.log('field', ((performance.now() - t) / 1000).toFixed(3));
t = performance.now();
const r = process.argv.includes("--full") ? endRasters(field) : { label: new Int32Array(n) };
console.log('rasters', ((performance.now() - t) / 1000).toFixed(3));
const counts = new Map<number, number>();
for (let p = 0; p < n; p++) counts.set(r.label[p]!, (counts.get(r.label[p]!) ?? 0) + 1);
console.log([...counts].map(([l, c]) => `${l < 0 ? 'none' : labels[l]!.name}:${c}`).join(' '));
{
  const { Tracker } = await import('../src/analysis/tracking/pollock.js');
  const tr = new Tracker(field);
  let cross = 0, cnt = 0;
  const t1 = performance.now();
  for (let p = 0; p < n; p += 97) { if (!field.active[p]) continue; tr.track(p, 5, 5, 1); cross += tr.crossings; cnt++; }
  const s = (performance.now() - t1) / 1000;
  console.log('sample', cnt, 'mean crossings', cross / cnt, 'ns/step', (s * 1e9) / cross);
}
