/** Writes the benchmark case as a Float32 GeoTIFF + scenario JSON so the same case can be solved through the CLI. */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { encodeFloat32GeoTiff } from '../src/raster/write.js';
import { benchCase, THICKNESS, type CaseField } from './case.js';

export async function writeCase(size: number, dir: string, field: CaseField = 'smooth', quiet = false): Promise<void> {
  const { model } = benchCase(size, undefined, field);
  mkdirSync(dir, { recursive: true });
  const tif = encodeFloat32GeoTiff(model.grid, model.conductivity, {
    description: `piezomap benchmark case ${size}x${size}${field === 'rough' ? ' (rough)' : ''}: conductivity m/d`,
  });
  writeFileSync(join(dir, 'conductivity.tif'), tif);
  const scenario = {
    title: `Benchmark case ${size}x${size}${field === 'rough' ? ', rough conductivity' : ''} (synthetic)`,
    units: { length: 'm', time: 'd' },
    aquifer: { conductivity: 'conductivity.tif', thickness: THICKNESS, anisotropy: 1 },
    fixedHeads: [
      { edge: 'west', head: 100 },
      { edge: 'east', head: 90 },
    ],
    recharge: 0,
    wells: model.wells.map((w) => ({ id: w.id, x: w.x, y: w.y, rate: w.rate })),
    solver: { method: 'auto', tolerance: 1e-10, maxIterations: 20000 },
  };
  writeFileSync(join(dir, 'scenario.json'), JSON.stringify(scenario, null, 2) + '\n');
  if (!quiet) console.log(`written ${join(dir, 'conductivity.tif')} and ${join(dir, 'scenario.json')}`);
}
