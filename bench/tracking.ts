/**
 * Tracking benchmark: capture zones of the 10 wells of the benchmark case (bench/case.ts), porosity 0.2,
 * capture times 365 and 3650 days, 36 backward pathlines per well, the steady zones.
 *
 *   npm run bench-tracking -- [--size 1024] [--workers 2] [--compare]
 *
 * Prints wall and CPU seconds (all threads) of each stage (the head solve is not counted: it is the solver benchmark's).
 * --compare also tracks every cell exactly (no FaceCache; several times slower) and prints how many cells
 * differ in their capturing well and how far the estimated travel times beyond the exact horizon are off.
 */
import { assembleSystem, headsFromSolution } from '../src/discretisation/assemble.js';
import { chooseAutoMethod, createSolver } from '../src/solvers/registry.js';
import { buildTrackingField } from '../src/analysis/tracking/field.js';
import { trackingInputFromSystem } from '../src/analysis/tracking/fromSystem.js';
import { endRasters } from '../src/analysis/tracking/rasters.js';
import { endRastersInWorkers } from '../src/analysis/tracking/workers.js';
import { captureZones } from '../src/analysis/tracking/capture.js';
import { benchCase, THICKNESS } from './case.js';

const args = process.argv.slice(2);
const sizeAt = args.indexOf('--size');
const size = sizeAt >= 0 ? Number(args[sizeAt + 1]) : 1024;
const workersAt = args.indexOf('--workers');
const workers = workersAt >= 0 ? Number(args[workersAt + 1]) : 2;
const captureTimes = [365, 3650];

const { model } = benchCase(size);
const system = assembleSystem(model);
const solver = createSolver(chooseAutoMethod(system.operator), system.operator, {});
const x = new Float64Array(system.operator.n);
const stats = solver.solve(system.rhs, x, { tolerance: 1e-10, maxIterations: 1000 });
if (!stats.converged) throw new Error(`benchmark head solve did not converge (${stats.stopReason})`);
const head = headsFromSolution(system, x);

function stage<T>(name: string, run: () => T): T {
  const c = process.cpuUsage();
  const t = performance.now();
  const value = run();
  const cpu = process.cpuUsage(c);
  console.log(
    `${name.padEnd(34)} wall ${((performance.now() - t) / 1000).toFixed(2).padStart(7)} s   cpu ${((cpu.user + cpu.system) / 1e6).toFixed(2).padStart(7)} s`,
  );
  return value;
}

async function stageAsync<T>(name: string, run: () => Promise<T>): Promise<T> {
  const c = process.cpuUsage();
  const t = performance.now();
  const value = await run();
  const cpu = process.cpuUsage(c);
  console.log(
    `${name.padEnd(34)} wall ${((performance.now() - t) / 1000).toFixed(2).padStart(7)} s   cpu ${((cpu.user + cpu.system) / 1e6).toFixed(2).padStart(7)} s`,
  );
  return value;
}

const n = size * size;
const total = { c: process.cpuUsage(), t: performance.now() };
const field = stage('face flows + tracking field', () => {
  const input = trackingInputFromSystem(system, head, { wells: model.wells, thickness: THICKNESS, porosity: 0.2 });
  return { input, field: buildTrackingField(input), stopLabel: input.stopLabel };
});
const ends = await stageAsync(`end rasters, ${workers} worker(s)`, () =>
  endRastersInWorkers(field.input, { exactTime: captureTimes[1], potential: head }, workers),
);
const capture = stage('zones + 360 backward pathlines', () =>
  captureZones(field.field, field.stopLabel, { captureTimes, particlesPerWell: 36, rasters: { potential: head } }, ends),
);
const cpu = process.cpuUsage(total.c);
console.log(
  `${'capture zones of 10 wells, total'.padEnd(34)} wall ${((performance.now() - total.t) / 1000).toFixed(2).padStart(7)} s   cpu ${((cpu.user + cpu.system) / 1e6).toFixed(2).padStart(7)} s   (${size}x${size})`,
);
for (const w of capture.wells) {
  const areas = capture.zones
    .filter((z) => z.properties.well === w.id)
    .map((z) => `${z.properties.time ?? 'steady'}: ${(z.properties.area / 1e6).toFixed(3)} km2`);
  console.log(
    `  ${w.id.padEnd(4)} ${String(w.capturedCells).padStart(7)} cells${w.refined ? ' (sub-cell seeds)' : ''}   ${areas.join('   ')}`,
  );
}

if (args.includes('--compare')) {
  const exact = stage('end rasters, exact (no FaceCache)', () => endRasters(field.field, { exact: true }));
  let differ = 0;
  let timeChecked = 0;
  let timeDiffer = 0;
  const relative: number[] = [];
  for (let p = 0; p < n; p++) {
    if (exact.label[p] !== ends.label[p]) differ++;
    else if (exact.label[p]! >= 0) {
      if (exact.time[p]! <= captureTimes[1]!) {
        timeChecked++;
        if (exact.time[p] !== ends.time[p]) timeDiffer++;
      } else relative.push(Math.abs(ends.time[p]! - exact.time[p]!) / exact.time[p]!);
    }
  }
  relative.sort((a, b) => a - b);
  const at = (f: number) => (relative[Math.floor(f * (relative.length - 1))] ?? NaN).toExponential(1);
  console.log(`cells whose end differs from exact tracking: ${differ} of ${n} (${((100 * differ) / n).toFixed(2)} %)`);
  console.log(
    `times <= ${captureTimes[1]}: ${timeChecked} cells, ${timeDiffer} differ; beyond: relative error median ${at(0.5)}, 90 % ${at(0.9)}, 99 % ${at(0.99)}`,
  );
}
