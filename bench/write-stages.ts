/**
 * Where the writing time goes (`npm run bench -- --write-stages --sizes 1024,2048`): the benchmark case written as
 * GeoTIFF + scenario, loaded and solved as `piezomap solve` does (not timed here), then, in this process:
 * the CPU time of each product on its own (flux, the four GeoTIFFs, contours, the map), and the whole set of result
 * files built one after another (resultBundle), concurrently (resultBundleConcurrent, rasters compressed on the
 * thread pool) and on the write pool (resultBundleOnPool, as `piezomap solve` builds them: rasters, contour levels and
 * the map in worker threads), each with its wall time, the process CPU time and the main thread's CPU time (Linux /proc). On a
 * loaded machine wall times mean little; the main thread's CPU time is the critical path of the concurrent writer
 * (what it would take on idle cores), the process CPU time its total work.
 */
import { existsSync, readFileSync } from 'node:fs';
import { loadavg } from 'node:os';
import { join } from 'node:path';
import { darcyFlux } from '../src/analysis/flux.js';
import { workerExecutor } from '../src/executor/worker.js';
import { resultRasterOptions } from '../src/output/rasterOptions.js';
import { contourFiles, solveProducts } from '../src/output/products.js';
import { resultBundle, resultBundleConcurrent, resultBundleOnPool } from '../src/output/solveFiles.js';
import { startWritePool } from '../src/output/writePool.js';
import { solveModelWith } from '../src/pipeline.js';
import { encodeFloat32GeoTiff } from '../src/raster/write.js';
import { loadScenario } from '../src/scenario/load.js';
import { writeCase } from './write-case.js';

const CLOCK_TICK = 0.01; // USER_HZ = 100 on Linux

/** CPU seconds of the main thread so far (its thread id is the process id), or null off Linux. */
function mainThreadCpu(): number | null {
  const file = `/proc/self/task/${process.pid}/stat`;
  if (!existsSync(file)) return null;
  const fields = readFileSync(file, 'utf8').split(') ')[1]!.split(' ');
  return (Number(fields[11]) + Number(fields[12])) * CLOCK_TICK;
}

const processCpu = () => {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1e6;
};

interface Measure {
  wall: number;
  cpu: number;
  mainCpu: number | null;
}

async function measure(run: () => unknown): Promise<Measure> {
  const w = performance.now();
  const c = processCpu();
  const m = mainThreadCpu();
  await run();
  const m2 = mainThreadCpu();
  return { wall: (performance.now() - w) / 1000, cpu: processCpu() - c, mainCpu: m === null || m2 === null ? null : m2 - m };
}

export async function runWriteStages(sizes: number[], out: string): Promise<void> {
  const lines = ['| N | part | wall s | CPU s (process) | CPU s (main thread) | load |', '|---|---|---|---|---|---|'];
  for (const size of sizes) {
    const dir = join(out, 'cases', `smooth-${size}`);
    if (!existsSync(join(dir, 'scenario.json'))) await writeCase(size, dir, 'smooth', true);
    const { model } = await loadScenario(join(dir, 'scenario.json'));
    const result = await solveModelWith(model, workerExecutor);
    const row = (part: string, m: Measure) =>
      lines.push(
        `| ${size} | ${part} | ${m.wall.toFixed(2)} | ${m.cpu.toFixed(2)} | ${m.mainCpu === null ? '-' : m.mainCpu.toFixed(2)} | ${loadavg()[0]!.toFixed(1)} |`,
      );
    // warm-up: the first build compiles the code paths
    solveProducts(result, {}, '');
    const { grid } = model;
    const flux = darcyFlux({
      grid,
      head: result.head,
      eastConductance: result.system.conductanceEast,
      southConductance: result.system.conductanceSouth,
      thickness: model.thickness,
    });
    row(
      'Darcy flux (3 rasters of values)',
      await measure(() =>
        darcyFlux({
          grid,
          head: result.head,
          eastConductance: result.system.conductanceEast,
          southConductance: result.system.conductanceSouth,
          thickness: model.thickness,
        }),
      ),
    );
    row(
      '4 GeoTIFFs (head, flux x, y, magnitude) as result rasters (DEFLATE run-length only, tiles 256)',
      await measure(() =>
        [result.head, flux.qx, flux.qy, flux.magnitude].map((v) => encodeFloat32GeoTiff(grid, v, resultRasterOptions('bench'))),
      ),
    );
    row(
      '4 GeoTIFFs (head, flux x, y, magnitude), DEFLATE level 4 (the earlier setting)',
      await measure(() =>
        [result.head, flux.qx, flux.qy, flux.magnitude].map((v) => encodeFloat32GeoTiff(grid, v, { nodata: -9999, compressionLevel: 4 })),
      ),
    );
    row('head contours (GeoJSON)', await measure(() => contourFiles(grid, result.head, 'head', model.units.length, {}, '')));
    // the pool as `piezomap solve` has it: started early, its workers warmed up and idle when the products start
    const pool = startWritePool();
    await new Promise((resolve) => setTimeout(resolve, 1000));
    for (let i = 0; i < 2; i++) {
      row('all files, one after another (resultBundle)', await measure(() => resultBundle(result, '', {})));
      row('all files, rasters concurrently (resultBundleConcurrent)', await measure(() => resultBundleConcurrent(result, '', {})));
      if (pool)
        row(
          `all files on the write pool, ${pool.threads} workers (resultBundleOnPool)`,
          await measure(() => resultBundleOnPool(result, '', {}, pool)),
        );
    }
    await pool?.close();
  }
  for (const l of lines) console.log(l);
}
