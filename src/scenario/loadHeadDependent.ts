/**
 * Resolving `headDependent` entries and `leakage` (../shared/spec/interface.md, "Extensions") into cells, stages,
 * conductances and bottoms, with their input checks. The file reading is the loader's (load.ts), passed in as
 * `ExchangeLoader`; this module holds the rules.
 *
 * Decisions (README, "Head-dependent boundaries"):
 * - Raster entries: the cells with a finite stage/level. A conductance or bottom raster must have a finite value
 *   >= 0 (conductance) on every such cell, else the cell is named.
 * - Edge entries: the active cells of the outer column/row, as for fixed heads.
 * - A river bed bottom above its stage: a warning (the reach is perched); there the bottom is taken at the stage,
 *   so that the river never takes water out of an aquifer whose head is below its bed.
 * - A drain level below the aquifer bottom (where `aquifer.bottom` is given): a warning (the drain never runs).
 * - Names: unique among fixed-head groups, head-dependent entries, the leakage term, `wells` and `recharge`.
 */
import type { Grid } from '../grid.js';
import { inputError } from '../errors.js';
import { fieldAt } from '../field.js';
import type { RasterData } from '../raster/types.js';
import type { ShapeCollection } from './geojson.js';
import type { HeadDependentEntry, LeakageEntry } from './schema.js';
import type { FixedHeadInput, HeadDependentInput, LeakageInput } from './types.js';
import { exchangeCells } from './exchangeShapes.js';
import { CARRIED_RANGE, HEAD_LIMIT } from './magnitudes.js';

/** What this module needs of the loader (load.ts). */
export interface ExchangeLoader {
  readonly label: string;
  raster(key: string, given: string, reference: RasterData | null): Promise<RasterData>;
  shapes(key: string, given: string, grid: Grid): Promise<{ collection: ShapeCollection; where: string; file: string }>;
  warn(text: string): void;
  warnOutside(where: string, outside: string[], total: number, consequence: string): void;
}

const RESERVED = new Set(['wells', 'recharge', 'total']);

function cellText(grid: Grid, p: number): string {
  return `row ${Math.floor(p / grid.nx)}, col ${p % grid.nx}`;
}

export async function loadHeadDependent(
  loader: ExchangeLoader,
  entries: HeadDependentEntry[] | undefined,
  reference: RasterData,
  fixedHeads: FixedHeadInput[],
  aquiferBottom: Float64Array | number | undefined,
): Promise<HeadDependentInput[]> {
  if (!entries) return [];
  const grid = reference.grid;
  const names = new Map<string, string>(fixedHeads.map((g) => [g.name, g.source]));
  const out: HeadDependentInput[] = [];
  for (let index = 0; index < entries.length; index++) {
    const entry = entries[index]!;
    const source = `headDependent[${index}]`;
    const earlier = names.get(entry.name);
    if (earlier !== undefined || RESERVED.has(entry.name)) {
      throw inputError(
        `${loader.label}: ${source}.name: "${entry.name}" is already ${earlier ? `the name of ${earlier}` : 'a budget term'}`,
        {
          key: `${source}.name`,
          hint: 'each entry names one term of the water budget: give it a name of its own',
        },
      );
    }
    names.set(entry.name, source);
    const resolved = await resolveEntry(loader, entry, source, reference);
    checkEntry(loader, resolved, grid, aquiferBottom);
    out.push(resolved);
  }
  return out;
}

async function resolveEntry(
  loader: ExchangeLoader,
  entry: HeadDependentEntry,
  source: string,
  reference: RasterData,
): Promise<HeadDependentInput> {
  const grid = reference.grid;
  const base = { name: entry.name, kind: entry.kind, source } as const;
  let cells: Int32Array;
  let heads: Float64Array;
  let weight: Float64Array | null = null;
  let bottom: Float64Array | null = null;
  let reach: Int32Array | null = null;
  let reachNames: string[] = [];
  let activeOnly = false;
  if (entry.raster !== undefined) {
    const values = (await loader.raster(`${source}.raster`, entry.raster, reference)).values;
    let count = 0;
    for (let p = 0; p < values.length; p++) if (Number.isFinite(values[p]!)) count++;
    cells = new Int32Array(count);
    heads = new Float64Array(count);
    for (let p = 0, k = 0; p < values.length; p++) {
      if (Number.isFinite(values[p]!)) {
        cells[k] = p;
        heads[k++] = values[p]!;
      }
    }
    if (count === 0) loader.warn(`${source} ("${entry.name}"): "${entry.raster}" has no cell with data, so the entry exchanges no water`);
  } else if (entry.edge !== undefined) {
    cells = edgeCells(grid, entry.edge);
    heads = new Float64Array(cells.length).fill(entry.head!);
    activeOnly = true;
  } else {
    const key = `${source}.shape`;
    const { collection, where } = await loader.shapes(key, entry.shape!, grid);
    const byLeakance = entry.leakance !== undefined;
    const shapes = exchangeCells(
      grid,
      collection,
      entry.head !== undefined ? { head: entry.head } : { headProperty: entry.headProperty! },
      entry.bottomProperty ?? null,
      byLeakance ? (entry.width ?? NaN) : 1,
      byLeakance,
      where,
    );
    if (byLeakance && shapes.hasLines && entry.width === undefined) {
      throw inputError(
        `${loader.label}: ${source}: "${entry.shape}" has lines, so "leakance" needs "width" (the wetted width of the bed)`,
        {
          key: `${source}.width`,
          hint: 'conductance of a line cell = leakance x length in the cell x width',
        },
      );
    }
    loader.warnOutside(where, shapes.outside, collection.features.length, 'the entry exchanges no water');
    cells = shapes.cells;
    heads = shapes.heads;
    bottom = shapes.bottoms;
    weight = byLeakance ? shapes.weight : null;
    if (collection.features.length > 1) {
      reach = shapes.reach;
      reachNames = shapes.reachNames;
    }
  }
  // Conductance per cell.
  const conductance = new Float64Array(cells.length);
  if (weight) {
    for (let k = 0; k < cells.length; k++) conductance[k] = entry.leakance! * weight[k]!;
  } else if (typeof entry.conductance === 'number') {
    conductance.fill(entry.conductance);
  } else {
    const key = `${source}.conductance`;
    const values = (await loader.raster(key, entry.conductance!, reference)).values;
    for (let k = 0; k < cells.length; k++) {
      const c = values[cells[k]!]!;
      if (!(Number.isFinite(c) && c >= 0)) {
        throw inputError(
          `${loader.label}: ${key} "${entry.conductance}": ${c < 0 ? `negative conductance ${Number(c.toPrecision(6))}` : 'no conductance'} at ${cellText(grid, cells[k]!)}, a cell of "${entry.name}"`,
          {
            key,
            cell: { row: Math.floor(cells[k]! / grid.nx), col: cells[k]! % grid.nx },
            hint: 'a conductance is >= 0 (length²/time) on every cell of the entry',
          },
        );
      }
      conductance[k] = c;
    }
  }
  // River bed bottom.
  if (entry.bottom !== undefined) {
    bottom = new Float64Array(cells.length);
    if (typeof entry.bottom === 'number') {
      bottom.fill(entry.bottom);
    } else {
      const key = `${source}.bottom`;
      const values = (await loader.raster(key, entry.bottom, reference)).values;
      for (let k = 0; k < cells.length; k++) bottom[k] = values[cells[k]!]!;
    }
  }
  return { ...base, cells, heads, conductance, bottom, reach, reachNames, ...(activeOnly ? { activeOnly } : {}) };
}

/** Magnitudes the arithmetic carries (magnitudes.ts): heads within ±1e15, a non-zero conductance within 1e-100..1e100. */
function checkMagnitude(loader: ExchangeLoader, key: string, what: string, value: number, grid: Grid, p: number, head: boolean): void {
  const bad = head ? Math.abs(value) > HEAD_LIMIT : value !== 0 && !(value >= CARRIED_RANGE.min && value <= CARRIED_RANGE.max);
  if (!bad) return;
  throw inputError(
    `${loader.label}: ${key}: ${what} ${value.toExponential(3)} at ${cellText(grid, p)} ${head ? 'exceeds 1e15' : 'lies outside 1e-100 to 1e100'}, the range the flow arithmetic carries`,
    {
      key,
      cell: { row: Math.floor(p / grid.nx), col: p % grid.nx },
      hint: 'check the units and the nodata value',
    },
  );
}

/** The warnings of an entry: perched river reaches, drains below the aquifer bottom. */
function checkEntry(loader: ExchangeLoader, entry: HeadDependentInput, grid: Grid, aquiferBottom: Float64Array | number | undefined): void {
  const { cells, heads, bottom } = entry;
  for (let k = 0; k < cells.length; k++) {
    checkMagnitude(loader, entry.source, entry.kind === 'drain' ? 'level' : 'stage', heads[k]!, grid, cells[k]!, true);
    if (bottom && Number.isFinite(bottom[k]!)) checkMagnitude(loader, entry.source, 'bed bottom', bottom[k]!, grid, cells[k]!, true);
    checkMagnitude(loader, entry.source, 'conductance', entry.conductance[k]!, grid, cells[k]!, false);
  }
  if (entry.kind === 'river' && bottom) {
    let perched = 0;
    let first = -1;
    for (let k = 0; k < cells.length; k++) {
      if (bottom[k]! > heads[k]!) {
        if (first < 0) first = cells[k]!;
        perched++;
        bottom[k] = heads[k]!;
      }
    }
    if (perched > 0) {
      loader.warn(
        `${entry.source} ("${entry.name}"): the bed bottom lies above the river stage at ${perched} cell(s) (first at ${cellText(grid, first)}): the reach is perched there; its bottom is taken at the stage (no loss once the aquifer head is below it)`,
      );
    }
  }
  if (entry.kind === 'drain' && aquiferBottom !== undefined) {
    let below = 0;
    let first = -1;
    for (let k = 0; k < cells.length; k++) {
      if (heads[k]! < fieldAt(aquiferBottom, cells[k]!)) {
        if (first < 0) first = cells[k]!;
        below++;
      }
    }
    if (below > 0) {
      loader.warn(
        `${entry.source} ("${entry.name}"): the drain level lies below aquifer.bottom at ${below} cell(s) (first at ${cellText(grid, first)}): check the levels`,
      );
    }
  }
}

function edgeCells(grid: Grid, edge: 'west' | 'east' | 'north' | 'south'): Int32Array {
  const { nx, ny } = grid;
  const northRow = grid.transform[5] < 0 ? 0 : ny - 1;
  const westCol = grid.transform[1] > 0 ? 0 : nx - 1;
  if (edge === 'west' || edge === 'east') {
    const col = edge === 'west' ? westCol : nx - 1 - westCol;
    return Int32Array.from({ length: ny }, (_, row) => row * nx + col);
  }
  const row = edge === 'north' ? northRow : ny - 1 - northRow;
  return Int32Array.from({ length: nx }, (_, col) => row * nx + col);
}

export async function loadLeakage(
  loader: ExchangeLoader,
  entry: LeakageEntry | undefined,
  reference: RasterData,
  used: ReadonlyArray<{ name: string; source: string }>,
): Promise<LeakageInput | undefined> {
  if (!entry) return undefined;
  const name = entry.name ?? 'leakage';
  const clash = used.find((u) => u.name === name);
  if (clash || RESERVED.has(name)) {
    throw inputError(`${loader.label}: leakage.name: "${name}" is already ${clash ? `the name of ${clash.source}` : 'a budget term'}`, {
      key: 'leakage.name',
      hint: 'give the leakage term a name of its own ("name")',
    });
  }
  const field = async (key: 'sourceHead' | 'leakance'): Promise<Float64Array | number> => {
    const given = entry[key];
    if (typeof given === 'number') return given;
    const values = (await loader.raster(`leakage.${key}`, given, reference)).values;
    if (key === 'leakance') {
      for (let p = 0; p < values.length; p++) {
        if (values[p]! < 0) {
          throw inputError(
            `${loader.label}: leakage.leakance "${given}": negative leakance ${Number(values[p]!.toPrecision(6))} at ${cellText(reference.grid, p)}`,
            {
              key: 'leakage.leakance',
              cell: { row: Math.floor(p / reference.grid.nx), col: p % reference.grid.nx },
              hint: "a leakance K'/b' is >= 0 (1/time); use nodata where there is no leakage",
            },
          );
        }
      }
    }
    return values;
  };
  const result = { name, sourceHead: await field('sourceHead'), leakance: await field('leakance') };
  const [, pw, , , , ph] = reference.grid.transform;
  const area = Math.abs(pw * ph);
  for (let p = 0; p < reference.grid.nx * reference.grid.ny; p++) {
    const hs = fieldAt(result.sourceHead, p);
    const l = fieldAt(result.leakance, p);
    if (Number.isFinite(hs)) checkMagnitude(loader, 'leakage.sourceHead', 'source head', hs, reference.grid, p, true);
    if (Number.isFinite(l) && l > 0) checkMagnitude(loader, 'leakage.leakance', 'leakance × cell area', l * area, reference.grid, p, false);
    if (typeof result.sourceHead === 'number' && typeof result.leakance === 'number') break;
  }
  return result;
}

/** Why two models' head-dependent boundaries or leakage differ (for compare's operator sharing), or null. */
export function exchangeDifference(
  a: { headDependent?: HeadDependentInput[]; leakage?: LeakageInput },
  b: { headDependent?: HeadDependentInput[]; leakage?: LeakageInput },
): string | null {
  const x = a.headDependent ?? [];
  const y = b.headDependent ?? [];
  const same = (p: ArrayLike<number> | number | null, q: ArrayLike<number> | number | null) => {
    if (p === q) return true;
    if (p === null || q === null || typeof p === 'number' || typeof q === 'number') return false;
    if (p.length !== q.length) return false;
    for (let k = 0; k < p.length; k++) if (p[k] !== q[k] && !(p[k] !== p[k] && q[k] !== q[k])) return false;
    return true;
  };
  if (x.length !== y.length) return 'headDependent differs';
  for (let i = 0; i < x.length; i++) {
    const p = x[i]!;
    const q = y[i]!;
    if (
      p.name !== q.name ||
      p.kind !== q.kind ||
      !same(p.cells, q.cells) ||
      !same(p.heads, q.heads) ||
      !same(p.conductance, q.conductance) ||
      !same(p.bottom, q.bottom)
    ) {
      return 'headDependent differs';
    }
  }
  const la = a.leakage;
  const lb = b.leakage;
  if ((la === undefined) !== (lb === undefined)) return 'leakage differs';
  if (la && lb && (la.name !== lb.name || !same(la.sourceHead, lb.sourceHead) || !same(la.leakance, lb.leakance))) return 'leakage differs';
  return null;
}
