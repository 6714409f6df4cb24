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
const cpu0 = process.cpuUsage();
t = performance.now();
const r = process.argv.includes("--stats") ? { label: new Int32Array(n), time: new Float64Array(n) } : endRasters(field, { exactTime: Number(process.env.XT ?? 3650), partsPerFace: Number(process.env.BINS ?? 4), exactCrossings: Number(process.env.XC ?? 16), potential: head });
const cpu = process.cpuUsage(cpu0);
console.log('rasters cached', ((performance.now() - t) / 1000).toFixed(3), 'cpu', ((cpu.user + cpu.system) / 1e6).toFixed(3));
if (process.argv.includes('--compare')) {
  t = performance.now();
  const e = endRasters(field, { exact: true });
  console.log('rasters exact', ((performance.now() - t) / 1000).toFixed(3));
  let diffLabel = 0, maxRel = 0, nt = 0, within = 0, timeDiff = 0;
  for (let p = 0; p < n; p++) {
    if (e.label[p] !== r.label[p]) diffLabel++;
    else if (e.label[p]! >= 0 && Number.isFinite(e.time[p]!)) {
      const rel = Math.abs(e.time[p]! - r.time[p]!) / e.time[p]!;
      if (e.time[p]! <= 3650) { within++; if (e.time[p] !== r.time[p]) timeDiff++; }
      maxRel = Math.max(maxRel, rel); nt++;
    }
  }
  let nearBoundary = 0, far = 0;
  const N = size;
  for (let p = 0; p < n; p++) {
    if (e.label[p] === r.label[p]) continue;
    const i = Math.floor(p / N), j = p % N;
    let near = false;
    for (let di = -1; di <= 1; di++) for (let dj = -1; dj <= 1; dj++) {
      const ii = i + di, jj = j + dj;
      if (ii < 0 || jj < 0 || ii >= N || jj >= N) continue;
      if (e.label[ii * N + jj] !== e.label[p]) near = true;
    }
    if (near) nearBoundary++; else far++;
  }
  const rels: number[] = [];
  for (let p = 0; p < n; p++) if (e.label[p] === r.label[p] && e.label[p]! >= 0 && e.time[p]! > 0) rels.push(Math.abs(e.time[p]! - r.time[p]!) / e.time[p]!);
  rels.sort((a, b) => a - b);
  console.log('label diffs next to a zone edge', nearBoundary, 'elsewhere', far, 'rel time diff p50/p90/p99/max', rels[rels.length >> 1], rels[Math.floor(rels.length * 0.9)], rels[Math.floor(rels.length * 0.99)], rels[rels.length - 1]);
  console.log('label differs', diffLabel, 'of', n, 'max rel time diff', maxRel, 'times<=3650', within, 'differing', timeDiff);
}
if (process.argv.includes('--stats')) {
  const { Tracker, FaceCache } = await import('../src/analysis/tracking/pollock.js');
  const cache = new FaceCache(field, { partsPerFace: Number(process.env.BINS ?? 4), exactTime: Number(process.env.XT ?? 3650), exactCrossings: Number(process.env.XC ?? 16) });
  const tr = new Tracker(field);
  const hist = new Float64Array(8);
  let cross = 0, adopted = 0, cnt = 0;
  const t0 = performance.now();
  const c0 = process.cpuUsage();
  const order = Int32Array.from({ length: n }, (_, i) => i);
  if (process.env.ORDER === 'head') order.sort((a, b) => (head[b]! || 0) - (head[a]! || 0));
  if (process.env.ORDER === 'up') order.sort((a, b) => (head[a]! || 0) - (head[b]! || 0));
  for (let k = 0; k < n; k++) {
    const p = order[k]!;
    if (!field.active[p]) continue;
    tr.track(p, 5, 5, 1, Infinity, null, cache);
    cross += tr.crossings; cnt++; if (tr.adopted) adopted++;
    hist[Math.min(7, Math.floor(Math.log10(tr.crossings + 1)))]! += 1;
  }
  console.log('stats: mean crossings', cross / cnt, 'adopted', adopted / cnt, 'hist log10', Array.from(hist), 'ns/step', ((performance.now() - t0) * 1e6) / cross, 'cpu s', process.cpuUsage(c0).user / 1e6);
}
