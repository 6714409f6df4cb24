/**
 * Memory budget of a run, checked before anything large is allocated, so that a grid too large for the machine is
 * refused with a clear message instead of ending in an out-of-memory crash part-way through.
 *
 * The limit is 80 % of the machine's memory (or of the container's, when Node reports a cgroup limit), or
 * PIEZOMAP_MEMORY_LIMIT_MB when set (for tests, shared machines and batch queues).
 */
import { totalmem } from 'node:os';
import { inputError } from './errors.js';
import type { Grid } from './grid.js';

/** Environment variable that sets the memory limit in MiB. */
export const MEMORY_LIMIT_ENV = 'PIEZOMAP_MEMORY_LIMIT_MB';

/**
 * Bytes per cell of everything but the solver: the input rasters as doubles, the assembled system (conductances,
 * bands, masks, sources, right-hand side, region labels; the worker shares the bands since they are in shared memory,
 * which the calibration below predates), the solution and head, and
 * the products (flux rasters, contours, the map, encoded GeoTIFFs). Calibrated on a 700 x 700 solve (measured peak
 * resident memory 295 MiB with pcg-multigrid and 262 MiB with cg, including the runtime), then rounded up.
 * The solver's own workspace comes from its registry entry (bytesPerCell).
 */
export const BASE_BYTES_PER_CELL = 360;

/**
 * Bytes per cell that `compare` holds per variant until its files are written: head, drawdown, right-hand side and
 * terms, budget inputs and the variant's share of the encoded outputs. From a measurement: 30 variants at 1500^2
 * peaked at 3.6 GB, about 53 bytes per cell and variant; rounded up.
 */
export const COMPARE_VARIANT_BYTES_PER_CELL = 64;

/**
 * Particle tracking (scenario key `tracking`) on top of a solve, per cell: face flows (16), face velocities (32),
 * stop labels and stop cells (12), net exchange (8), end rasters (12), capture rasters (13), the written rasters
 * (16) and their encoding; counted from the arrays, rounded up.
 */
export const TRACKING_BYTES_PER_CELL = 128;

/** Bytes per cell more for a variant that cannot share the baseline's operator: its own conductances, bands and masks. */
export const COMPARE_FRESH_VARIANT_BYTES_PER_CELL = 120;

/** The Node runtime and the loaded modules, before any grid-sized array (measured about 80 MiB). */
export const FIXED_OVERHEAD_BYTES = 96 * 2 ** 20;

export interface MemoryLimit {
  bytes: number;
  /** Where the limit comes from, for messages. */
  source: string;
}

/** The memory one run may use. An unusable PIEZOMAP_MEMORY_LIMIT_MB is a usage error naming the variable. */
export function memoryLimit(env: NodeJS.ProcessEnv = process.env): MemoryLimit {
  const given = env[MEMORY_LIMIT_ENV];
  if (given !== undefined && given.trim() !== '') {
    const mb = Number(given);
    if (!Number.isFinite(mb) || mb <= 0) {
      throw inputError(`${MEMORY_LIMIT_ENV}="${given}" is not a positive number of MiB`, {
        hint: `unset it or give a number, e.g. ${MEMORY_LIMIT_ENV}=4096`,
      });
    }
    return { bytes: mb * 1024 * 1024, source: `${MEMORY_LIMIT_ENV}=${given}` };
  }
  // process.constrainedMemory(): the cgroup limit when there is one (0 or undefined otherwise; Node >= 19.6).
  const constrained = (process as { constrainedMemory?: () => number | undefined }).constrainedMemory?.() ?? 0;
  const machine = constrained > 0 && constrained < totalmem() ? constrained : totalmem();
  return { bytes: 0.8 * machine, source: `80 % of this machine's ${formatBytes(machine)}` };
}

/** Estimated peak bytes of a run on `cells` cells whose solver needs `solverBytesPerCell` more per cell. */
export function estimateRunBytes(cells: number, solverBytesPerCell: number): number {
  return FIXED_OVERHEAD_BYTES + cells * (BASE_BYTES_PER_CELL + solverBytesPerCell);
}

export interface SolverFootprint {
  method: string;
  bytesPerCell: number;
}

/**
 * Refuse a run that would not fit the memory limit, before assembling it. `leaner`: a method needing less memory,
 * suggested in the hint when given.
 */
export function checkMemoryBudget(
  grid: Grid,
  solver: SolverFootprint,
  leaner: SolverFootprint | null = null,
  limit: MemoryLimit = memoryLimit(),
  held: { bytesPerCell: number; what: string; hint?: string } | null = null,
): void {
  const cells = grid.nx * grid.ny;
  const heldBytes = held ? held.bytesPerCell : 0;
  const needed = estimateRunBytes(cells, solver.bytesPerCell + heldBytes);
  if (needed <= limit.bytes) return;
  const cellsThatFit = Math.max(
    1,
    Math.floor((limit.bytes - FIXED_OVERHEAD_BYTES) / (BASE_BYTES_PER_CELL + solver.bytesPerCell + heldBytes)),
  );
  const factor = Math.ceil(Math.sqrt(cells / cellsThatFit) * 10) / 10;
  const alternative =
    leaner && leaner.bytesPerCell < solver.bytesPerCell && estimateRunBytes(cells, leaner.bytesPerCell + heldBytes) <= limit.bytes
      ? `; solver "${leaner.method}" needs less (about ${formatBytes(estimateRunBytes(cells, leaner.bytesPerCell + heldBytes))}) but converges more slowly`
      : '';
  const hint =
    limit.bytes <= FIXED_OVERHEAD_BYTES
      ? `the limit is below the ${formatBytes(FIXED_OVERHEAD_BYTES)} the program itself takes: raise it`
      : `coarsen the rasters about ${factor}x per side (gdalwarp -tr) or clip them to the model area${alternative}` +
        (held && held.bytesPerCell > 0 ? (held.hint ?? ', or compare fewer variants per run') : '');
  throw inputError(
    `the run needs about ${formatBytes(needed)} (${grid.nx} x ${grid.ny} cells, solver ${solver.method}${held && held.bytesPerCell > 0 ? `, ${held.what}` : ''}) but the memory limit is ${formatBytes(limit.bytes)} (${limit.source})`,
    { hint },
  );
}

/** Share of the memory limit that a scenario's rasters may take together once decoded; the rest is for the run. */
export const RASTER_SHARE = 0.5;

/** Bytes the rasters of a run may take: what the loader lets the reader use (the reader's `maxBytes`). */
export function rasterBudget(limit: MemoryLimit = memoryLimit()): number {
  return limit.bytes * RASTER_SHARE;
}

/** One raster a scenario key names, sized from its header (src/raster/read.ts, readRasterHeader). */
export interface RasterFootprint {
  /** Scenario key and the path as given, for messages. */
  key: string;
  given: string;
  width: number;
  height: number;
  /** The band as doubles, held for the whole run. */
  valueBytes: number;
  /** The peak while it is read: the values, the file's bytes and one decoded block. */
  readBytes: number;
}

/**
 * Refuse a scenario whose rasters do not fit together, before any is decoded: every key's raster is held as doubles
 * (a file named by several keys is read once per key), and one is being read at a time on top of those.
 * The budget is the raster share of the limit (`rasterBudget`).
 */
export function checkRasterMemory(rasters: RasterFootprint[], limit: MemoryLimit = memoryLimit()): void {
  let held = 0;
  let reading = 0;
  for (const r of rasters) {
    held += r.valueBytes;
    reading = Math.max(reading, r.readBytes - r.valueBytes);
  }
  const needed = held + reading;
  const budget = rasterBudget(limit);
  if (needed <= budget) return;
  const largest = [...rasters].sort((a, b) => b.valueBytes - a.valueBytes);
  const listed = largest.slice(0, 4).map((r) => `${r.key} "${r.given}" ${r.width} x ${r.height} (${formatBytes(r.valueBytes)})`);
  if (largest.length > 4) listed.push(`${largest.length - 4} more`);
  const repeated = new Set(rasters.map((r) => r.given)).size < rasters.length;
  throw inputError(
    `the scenario's ${rasters.length === 1 ? 'raster needs' : `${rasters.length} rasters need`} about ${formatBytes(needed)} once read (${listed.join(', ')}), more than half of the memory a run may use (limit ${formatBytes(limit.bytes)}, ${limit.source}); nothing was decoded`,
    {
      file: largest[0]?.given,
      key: largest[0]?.key,
      hint: `clip the rasters to the model area or coarsen them (gdalwarp -te / -tr)${repeated ? '; a file named by several keys is read once for each' : ''}`,
    },
  );
}

export function formatBytes(n: number): string {
  if (n >= 2 ** 30) return `${(n / 2 ** 30).toFixed(1)} GiB`;
  if (n >= 2 ** 20) return `${(n / 2 ** 20).toFixed(1)} MiB`;
  return `${Math.max(1, Math.round(n / 1024))} KiB`;
}
