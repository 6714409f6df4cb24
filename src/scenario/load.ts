/**
 * Scenario loading: read the JSON, validate it (schema.ts), read every raster and CSV it names (paths relative to
 * the scenario file), check that all rasters share the conductivity raster's grid, reproject points given in
 * `pointCrs`, and return a ModelInput. Variants are merged into the baseline's JSON (mergeVariant) and resolved
 * the same way (resolveScenario).
 *
 * Decisions (documented for users in the README's scenario tour):
 * - Recharge raster cells without data count as 0 recharge; a warning gives the count on active cells.
 * - A thickness raster's cells without data or <= 0 are inactive; a warning gives the count where K had data.
 * - A well with rate 0 (e.g. switched off by a variant) is left out of the model.
 * - The `pointCrs` of the (merged) scenario applies to all of its points, inherited ones included.
 */
import { readFile, stat } from 'node:fs/promises';
import { basename, dirname, extname, resolve } from 'node:path';
import { cellAt, crsLabel, gridBounds, gridDifference, type Grid } from '../grid.js';
import { describeThrown, inputError, PiezomapError } from '../errors.js';
import { readRaster, readRasterHeader } from '../raster/read.js';
import { checkRasterMemory, rasterBudget, type RasterFootprint } from '../memory.js';
import type { RasterData } from '../raster/types.js';
import { describeExpectedUnit, unitMatches, type Quantity, type ValueUnits } from '../raster/units.js';
import { linearUnitOf, makeTransform, parseEpsg, type PointTransform } from '../crs.js';
import {
  parseScenarioJson,
  solverSchema,
  type EnsembleJson,
  type FixedHeadEntry,
  type FixedHeadShapeEntry,
  type ReceptorEntry,
  type ScenarioJson,
  type WellChange,
  type WellEntry,
  type WellLayers,
} from './schema.js';
import { wellLayers } from './merge.js';
import { readShapes, reprojectShapes, type ShapeCollection } from './geojson.js';
import { checkLineLengths, markShapeCells, shapeFixedHeads } from './shapes.js';
import { numberProperty, readPointFeatures, type PointFeature } from './pointFeatures.js';
import { CsvSyntaxError, findJsonSyntaxError, parseCsv } from './text.js';
import { checkMagnitudes } from './magnitudes.js';
import type {
  ConditioningPoint,
  EnsembleInput,
  FixedHeadInput,
  ModelInput,
  ObservationInput,
  ReceptorInput,
  TrackingSettings,
  WellInput,
} from './types.js';
import { fieldAt } from '../field.js';
import { loadHeadDependent, loadLeakage } from './loadHeadDependent.js';

export type { ScenarioJson, VariantJson } from './schema.js';
export { mergeVariant } from './merge.js';

const SCHEMA_HINT = 'the keys and their forms are listed in the README, section "Scenario file"';

/** Read, validate and resolve a scenario file. `raw` is the validated JSON (with its variants, for `compare`). */
export async function loadScenario(path: string): Promise<{ model: ModelInput; raw: ScenarioJson }> {
  const absolute = resolve(path);
  let text: string;
  try {
    text = await readFile(absolute, 'utf8');
  } catch (thrown) {
    throw fileProblem(thrown, path, absolute, 'scenario file');
  }
  const json = parseJsonText(text, path, absolute);
  const parsed = parseScenarioJson(json, path);
  if (!parsed.ok) {
    throw inputError(parsed.message, { file: absolute, hint: SCHEMA_HINT });
  }
  const model = await resolveScenario(parsed.scenario, dirname(absolute), path);
  return { model, raw: parsed.scenario };
}

/**
 * Read everything a validated scenario names and build the ModelInput.
 * `baseDir`: folder that relative paths start from. `scenarioPath`: the scenario file as the user named it
 * (for messages), or '<inline>'.
 */
export async function resolveScenario(raw: ScenarioJson, baseDir: string, scenarioPath: string): Promise<ModelInput> {
  const inline = scenarioPath === '<inline>';
  const loader = new Loader(baseDir, inline ? '<inline scenario>' : scenarioPath);
  if (!inline) loader.inputFiles.add(resolve(scenarioPath));

  const units = { length: raw.units?.length ?? 'm', time: raw.units?.time ?? 'd' } as const;
  loader.units = units;

  // Every raster's size from its header, checked together against the memory budget before any is decoded.
  await loader.checkRasterMemory(raw);

  // The conductivity raster defines the grid and the CRS.
  const conductivityPath = raw.aquifer.conductivity;
  const conductivityRaster = await loader.raster('aquifer.conductivity', conductivityPath, null);
  const grid = conductivityRaster.grid;
  loader.checkGridIsProjected(conductivityPath, grid, units.length);
  const conductivity = conductivityRaster.values;

  const aquiferType = raw.aquifer.type ?? 'confined';
  // Unconfined and convertible aquifers: top and bottom read here, as they decide which cells are active.
  const waterTable = aquiferType === 'confined' ? null : await loader.waterTableGeometry(raw.aquifer, conductivity, conductivityRaster);
  let thickness: Float64Array | number;
  if (waterTable !== null) {
    thickness = waterTable.thickness;
  } else if (typeof raw.aquifer.thickness === 'number') {
    thickness = raw.aquifer.thickness;
  } else if (raw.aquifer.thickness === undefined) {
    throw inputError(`${loader.label}: aquifer.thickness is required for a confined aquifer`, { key: 'aquifer.thickness' });
  } else {
    const raster = await loader.raster('aquifer.thickness', raw.aquifer.thickness, conductivityRaster);
    thickness = raster.values;
    let lost = 0;
    for (let p = 0; p < thickness.length; p++) {
      const b = thickness[p]!;
      if (isActiveValue(conductivity[p]!) && !(b > 0)) lost++;
    }
    if (lost > 0) {
      loader.warn(
        `aquifer.thickness "${raw.aquifer.thickness}": ${lost} cell(s) with a conductivity have no thickness > 0 there and are inactive`,
      );
    }
  }
  if (raw.aquifer.inactiveShapes?.length) await loader.inactiveShapes(raw.aquifer.inactiveShapes, grid, conductivity);
  const activeCells = countActive(conductivity, thickness);
  if (activeCells === 0) {
    throw inputError(
      `${loader.label}: aquifer.conductivity "${conductivityPath}" has no active cell (every cell is nodata, NaN or <= 0${typeof thickness === 'number' ? '' : ', or has no thickness'})`,
      { file: loader.path(conductivityPath), key: 'aquifer.conductivity', hint: 'check the raster and its nodata value (gdalinfo -stats)' },
    );
  }

  const fixedHeads = await loader.fixedHeads(raw.fixedHeads, conductivityRaster);

  let recharge: Float64Array | number;
  if (typeof raw.recharge === 'string') {
    const given = raw.recharge;
    const values = (await loader.raster('recharge', given, conductivityRaster)).values;
    let missing = 0;
    for (let p = 0; p < values.length; p++) {
      if (Number.isNaN(values[p]!)) {
        if (isActive(conductivity, thickness, p)) missing++;
        values[p] = 0;
      }
    }
    if (missing > 0) loader.warn(`recharge "${given}": ${missing} active cell(s) have no data; their recharge is taken as 0`);
    recharge = values;
  } else {
    recharge = raw.recharge ?? 0;
  }

  let porosity: Float64Array | number | undefined;
  if (typeof raw.aquifer.porosity === 'string') {
    const raster = await loader.raster('aquifer.porosity', raw.aquifer.porosity, conductivityRaster);
    porosity = raster.values;
    let missing = 0;
    for (let p = 0; p < porosity.length; p++) {
      const n = porosity[p]!;
      if (!isActive(conductivity, thickness, p)) continue;
      if (Number.isNaN(n)) missing++;
      else if (!(n > 0 && n <= 1)) {
        throw inputError(
          `${loader.label}: aquifer.porosity "${raw.aquifer.porosity}": value ${n} at row ${Math.floor(p / grid.nx)}, col ${p % grid.nx} is not a porosity in (0, 1]`,
          {
            file: raw.aquifer.porosity,
            key: 'aquifer.porosity',
            hint: 'give porosity as a fraction (0.25, not 25); use nodata where it is unknown',
          },
        );
      }
    }
    if (missing > 0)
      loader.warn(`aquifer.porosity "${raw.aquifer.porosity}": ${missing} active cell(s) have no porosity; no velocity is given there`);
  } else {
    porosity = raw.aquifer.porosity;
  }

  // Optional elevations for the sanity warnings: numbers, or rasters on the conductivity grid (nodata = not known).
  const elevations: { aquiferTop?: Float64Array | number; aquiferBottom?: Float64Array | number; groundSurface?: Float64Array | number } =
    {};
  const elevationKeys = [
    ['aquiferTop', 'aquifer.top', raw.aquifer.top],
    ['aquiferBottom', 'aquifer.bottom', raw.aquifer.bottom],
    ['groundSurface', 'groundSurface', raw.groundSurface],
  ] as const;
  for (const [field, key, given] of elevationKeys) {
    if (waterTable !== null && field !== 'groundSurface') {
      const value = field === 'aquiferTop' ? waterTable.top : waterTable.bottom;
      if (value !== undefined) elevations[field] = value;
    } else if (typeof given === 'number') elevations[field] = given;
    else if (typeof given === 'string') elevations[field] = (await loader.raster(key, given, conductivityRaster)).values;
  }

  const headDependent = await loadHeadDependent(loader, raw.headDependent, conductivityRaster, fixedHeads, elevations.aquiferBottom);
  const leakage = await loadLeakage(loader, raw.leakage, conductivityRaster, [...fixedHeads, ...headDependent]);

  const transform = loader.pointTransform(raw.pointCrs, grid, conductivityPath);
  loader.pointFrame = { grid, conductivityPath };
  const wells = await loader.wells(raw.wells, transform);
  const observations = await loader.observations(raw.observations, transform);
  const receptors = await loader.receptors(raw.receptors, transform, grid, conductivityPath);
  const tracking = raw.tracking
    ? resolveTracking(raw, loader.label, porosity, transform, grid, conductivity, thickness, (t, x, y, what) =>
        loader.projectPoint(t, x, y, what),
      )
    : undefined;
  const ensemble = raw.ensemble ? await loader.ensemble(raw.ensemble, transform) : undefined;

  const solver = raw.solver ?? solverSchema.parse({});
  const title = raw.title ?? (inline ? 'Untitled scenario' : basename(scenarioPath, extname(scenarioPath)));

  const model: ModelInput = {
    title,
    units,
    scenarioPath: inline ? '<inline>' : resolve(scenarioPath),
    grid,
    conductivity,
    thickness,
    anisotropy: raw.aquifer.anisotropy,
    ...(porosity === undefined ? {} : { porosity }),
    ...(elevations.aquiferTop === undefined ? {} : { aquiferTop: elevations.aquiferTop }),
    ...(elevations.aquiferBottom === undefined ? {} : { aquiferBottom: elevations.aquiferBottom }),
    ...(elevations.groundSurface === undefined ? {} : { groundSurface: elevations.groundSurface }),
    fixedHeads,
    recharge,
    ...(headDependent.length ? { headDependent } : {}),
    ...(leakage ? { leakage } : {}),
    wells,
    observations,
    receptors,
    ...(tracking ? { tracking } : {}),
    solver: { ...solver },
    ...(aquiferType === 'confined' ? {} : { aquiferType }),
    ...(waterTable?.initialHead === undefined ? {} : { initialHead: waterTable.initialHead }),
    ...(ensemble ? { ensemble } : {}),
    inputFiles: [...loader.inputFiles],
    warnings: loader.warnings,
  };
  checkMagnitudes(model, loader.label, {
    conductivity: conductivityPath,
    ...(raw.aquifer.thickness === undefined ? {} : { thickness: raw.aquifer.thickness }),
    ...(raw.recharge === undefined ? {} : { recharge: raw.recharge }),
  });
  return model;
}

/**
 * The `tracking` key resolved: porosity is required (and must cover every active cell), points are taken in
 * pointCrs like the other point lists and must lie on active cells of the grid. Each problem names its key.
 */
function resolveTracking(
  raw: ScenarioJson,
  label: string,
  porosity: Float64Array | number | undefined,
  transform: PointTransform | null,
  grid: Grid,
  conductivity: Float64Array,
  thickness: Float64Array | number,
  project: (transform: PointTransform | null, x: number, y: number, what: string) => { x: number; y: number },
): TrackingSettings {
  const spec = raw.tracking!;
  if (!(grid.transform[1] > 0 && grid.transform[5] < 0)) {
    // The tracking engine's frame is north-up; refused here rather than after a long solve.
    throw inputError(
      `${label}: tracking needs a north-up grid (positive pixel width, negative pixel height); this grid's geotransform is [${grid.transform.join(', ')}]`,
      {
        key: 'tracking',
        hint: 'warp the rasters to a north-up grid (e.g. gdalwarp) before tracking, or drop "tracking"',
      },
    );
  }
  if (porosity === undefined) {
    throw inputError(`${label}: tracking needs aquifer.porosity (the effective porosity turns Darcy flux into particle velocity)`, {
      key: 'aquifer.porosity',
      hint: 'add "porosity": 0.2 (a fraction in (0, 1]) or a GeoTIFF path to "aquifer", or drop "tracking"',
    });
  }
  if (typeof porosity !== 'number') {
    for (let p = 0; p < porosity.length; p++) {
      if (isActive(conductivity, thickness, p) && !(porosity[p]! > 0 && porosity[p]! <= 1)) {
        throw inputError(
          `${label}: tracking needs aquifer.porosity on every active cell; it has none at row ${Math.floor(p / grid.nx)}, col ${p % grid.nx}`,
          {
            key: 'aquifer.porosity',
            cell: { row: Math.floor(p / grid.nx), col: p % grid.nx },
            hint: 'fill the porosity raster on the active area (nodata only where the aquifer is inactive)',
          },
        );
      }
    }
  }
  const points = spec.points.map((entry, index) => {
    const source = `tracking.points[${index}]`;
    const point = project(transform, entry.x, entry.y, `tracking point "${entry.id}" (${source})`);
    const cell = cellAt(grid, point.x, point.y);
    if (!cell) {
      throw inputError(`${label}: ${source}: tracking point "${entry.id}" at x=${entry.x}, y=${entry.y} lies outside the grid`, {
        key: source,
        hint: 'check the coordinates and pointCrs: points are in the raster CRS unless pointCrs names another',
      });
    }
    if (!isActive(conductivity, thickness, cell.row * grid.nx + cell.col)) {
      throw inputError(`${label}: ${source}: tracking point "${entry.id}" lies in an inactive cell (row ${cell.row}, col ${cell.col})`, {
        key: source,
        cell,
        hint: 'move the point into the active aquifer',
      });
    }
    return { id: entry.id, x: point.x, y: point.y, source };
  });
  const settings: TrackingSettings = {
    captureTimes: [...new Set(spec.captureTimes)].sort((a, b) => a - b),
    particlesPerWell: spec.particlesPerWell,
    points,
  };
  if (spec.maxTime !== undefined) settings.maxTime = spec.maxTime;
  return settings;
}

/** What the values of a raster key measure, for checking a unit the raster declares. */
function quantityOf(key: string): Quantity {
  if (key === 'aquifer.conductivity' || key === 'recharge') return 'velocity';
  if (key === 'aquifer.porosity') return 'fraction';
  if (key.endsWith('.conductance')) return 'area-rate';
  if (key === 'leakage.leakance') return 'rate';
  return 'length'; // thickness, top, bottom, ground surface, fixed heads
}

/** Index of the first +-Infinity in `values`, or -1. */
function firstInfinite(values: Float64Array): number {
  for (let p = 0; p < values.length; p++) {
    const v = values[p]!;
    if (v === Infinity || v === -Infinity) return p;
  }
  return -1;
}

/** Conductivity (or thickness) value that makes a cell active: finite and > 0 (NaN compares false). */
function isActiveValue(value: number): boolean {
  return value > 0 && value < Infinity;
}

function isActive(conductivity: Float64Array, thickness: Float64Array | number, p: number): boolean {
  return isActiveValue(conductivity[p]!) && isActiveValue(fieldAt(thickness, p));
}

function countActive(conductivity: Float64Array, thickness: Float64Array | number): number {
  let count = 0;
  for (let p = 0; p < conductivity.length; p++) if (isActive(conductivity, thickness, p)) count++;
  return count;
}

/** JSON text to a value; a syntax error names the file, line and column. */
function parseJsonText(text: string, label: string, absolute: string): unknown {
  let value: unknown;
  try {
    value = JSON.parse(text.charCodeAt(0) === 0xfeff ? text.slice(1) : text);
  } catch (thrown) {
    const problem = findJsonSyntaxError(text);
    const where = problem ? ` line ${problem.line}, column ${problem.column}` : '';
    const what = problem ? problem.problem : describeThrown(thrown);
    throw inputError(`${label}${where}: invalid JSON: ${what}`, {
      file: absolute,
      hint: problem?.hint ?? 'fix the JSON syntax (a JSON validator or editor will point at the same place)',
    });
  }
  const duplicate = findJsonSyntaxError(text, { duplicateKeys: true });
  if (duplicate) {
    throw inputError(`${label} line ${duplicate.line}, column ${duplicate.column}: ${duplicate.problem}`, {
      file: absolute,
      hint: duplicate.hint ?? 'keep one of them: otherwise the last one would silently win',
    });
  }
  return value;
}

function fileProblem(thrown: unknown, given: string, absolute: string, what: string, key?: string): PiezomapError {
  const code = (thrown as { code?: string } | null)?.code;
  const detail = { file: absolute, ...(key ? { key } : {}) };
  if (code === 'ENOENT') {
    return inputError(`${what} not found: "${given}" (looked for ${absolute})`, {
      ...detail,
      hint: key ? 'paths in a scenario are relative to the folder of the scenario file' : 'check the path',
    });
  }
  if (code === 'EISDIR') return inputError(`${what} "${given}" is a folder, not a file (${absolute})`, detail);
  if (code === 'EACCES' || code === 'EPERM')
    return inputError(`${what} "${given}" cannot be read: permission denied (${absolute})`, detail);
  return inputError(`${what} "${given}" cannot be read (${absolute}): ${describeThrown(thrown)}`, detail);
}

/** One CSV record: `source` names the file and line for messages; `file` is the absolute path. */
type PointRecord = { source: string; file: string; values: Map<string, string> };

/** The I/O of one resolve: paths, files read, warnings. */
class Loader {
  readonly inputFiles = new Set<string>();
  readonly warnings: string[] = [];

  constructor(
    readonly baseDir: string,
    readonly label: string,
  ) {}

  path(given: string): string {
    return resolve(this.baseDir, given);
  }

  warn(text: string): void {
    this.warnings.push(text);
  }

  /**
   * Top, bottom and starting heads of an unconfined or convertible aquifer (../shared/spec/interface.md), and the
   * thickness that marks its active cells: top - bottom where a top is given, 1 where only a bottom is (the
   * transmissivity of such aquifers comes from the heads: src/discretisation/aquifer.ts). A cell with a
   * conductivity but no bottom is inactive (warned); a top not above the bottom is an input error naming the cell.
   */
  async waterTableGeometry(
    aquifer: ScenarioJson['aquifer'],
    conductivity: Float64Array,
    reference: RasterData,
  ): Promise<{ thickness: Float64Array; bottom: Float64Array | number; top?: Float64Array | number; initialHead?: Float64Array | number }> {
    const field = async (key: string, given: number | string | undefined) =>
      given === undefined ? undefined : typeof given === 'number' ? given : (await this.raster(key, given, reference)).values;
    const bottom = (await field('aquifer.bottom', aquifer.bottom))!;
    const top = await field('aquifer.top', aquifer.top);
    const initialHead = await field('aquifer.initialHead', aquifer.initialHead);
    const n = conductivity.length;
    const nx = reference.grid.nx;
    const thickness = new Float64Array(n).fill(NaN);
    let noBottom = 0;
    let noTop = 0;
    for (let p = 0; p < n; p++) {
      if (!isActiveValue(conductivity[p]!)) continue;
      const z = fieldAt(bottom, p);
      const t = top === undefined ? NaN : fieldAt(top, p);
      if (!Number.isFinite(z)) {
        noBottom++;
        continue;
      }
      if (aquifer.type === 'convertible' && !Number.isFinite(t)) {
        noTop++;
        continue;
      }
      if (Number.isFinite(t) && !(t > z)) {
        throw inputError(`${this.label}: aquifer.top ${t} is not above aquifer.bottom ${z} at row ${Math.floor(p / nx)}, col ${p % nx}`, {
          key: 'aquifer.top',
          cell: { row: Math.floor(p / nx), col: p % nx },
          hint: 'top and bottom are elevations in length units; check that they were not swapped',
        });
      }
      if (initialHead !== undefined && !Number.isFinite(fieldAt(initialHead, p))) {
        throw inputError(`${this.label}: aquifer.initialHead has no value at row ${Math.floor(p / nx)}, col ${p % nx}, an active cell`, {
          key: 'aquifer.initialHead',
          cell: { row: Math.floor(p / nx), col: p % nx },
          hint: 'give a starting head on every active cell, or leave initialHead out for the default',
        });
      }
      thickness[p] = Number.isFinite(t) ? t - z : 1;
    }
    if (noBottom > 0) this.warn(`aquifer.bottom: ${noBottom} cell(s) with a conductivity have no bottom elevation there and are inactive`);
    if (noTop > 0)
      this.warn(
        `aquifer.top: ${noTop} cell(s) with a conductivity have no top elevation there and are inactive (a convertible aquifer needs both)`,
      );
    return { thickness, bottom, ...(top === undefined ? {} : { top }), ...(initialHead === undefined ? {} : { initialHead }) };
  }

  /** The scenario's units, which raster values are taken in. */
  units: ValueUnits = { length: 'm', time: 'd' };

  /** The conductivity raster as the scenario names it: every other raster must share its grid. */
  private reference: { key: string; given: string } | null = null;

  /** Read a raster a key names; with `reference` (the conductivity raster), it must lie on the same grid. */
  async raster(key: string, given: string, reference: RasterData | null): Promise<RasterData> {
    const absolute = this.path(given);
    await this.requireFile(key, given, absolute, 'raster');
    let raster: RasterData;
    try {
      raster = await readRaster(absolute, { label: `${key} "${given}"`, maxBytes: rasterBudget() });
    } catch (thrown) {
      // The reader names the raster by the label given; add the scenario file, the path and the key.
      if (thrown instanceof PiezomapError)
        throw new PiezomapError(thrown.code, `${this.label}: ${thrown.message}`, { ...thrown.detail, file: absolute, key });
      throw inputError(`${this.label}: ${key}: "${given}" cannot be read as a GeoTIFF: ${describeThrown(thrown)}`, { file: absolute, key });
    }
    this.inputFiles.add(absolute);
    // A declared unit must be the one the key's values are taken in: piezomap converts no units.
    const quantity = quantityOf(key);
    if (raster.unit !== null && !unitMatches(raster.unit, quantity, this.units)) {
      const expected = describeExpectedUnit(quantity, this.units);
      throw inputError(
        `${this.label}: ${key} "${given}" declares its values in "${raster.unit}", but ${key} is taken in ${expected} (units in the scenario); piezomap converts no units`,
        {
          file: absolute,
          key,
          hint: `convert the values to ${expected} and declare that unit (e.g. gdal_calc.py, then gdal_edit.py -units), or set "units" in the scenario to match`,
        },
      );
    }
    // Several bands: which one holds the values cannot be guessed, and a wrong guess gives a plausible-looking result.
    if (raster.bandCount > 1) {
      throw inputError(`${this.label}: ${key} "${given}" has ${raster.bandCount} bands; piezomap reads single-band rasters only`, {
        file: absolute,
        key,
        hint: `extract the band that holds the values, e.g. gdal_translate -b 2 ${given} single-band.tif`,
      });
    }
    // Infinity is no nodata marker (GDAL would not mask it either): it would reach the equations as a value.
    const infinite = firstInfinite(raster.values);
    if (infinite >= 0) {
      const cell = { row: Math.floor(infinite / raster.grid.nx), col: infinite % raster.grid.nx };
      throw inputError(`${this.label}: ${key} "${given}" holds an infinite value at row ${cell.row}, col ${cell.col}`, {
        file: absolute,
        key,
        cell,
        hint: 'mark cells without data with the nodata value (gdalinfo -stats shows the range; gdal_calc.py can replace them)',
      });
    }
    if (!reference) {
      this.reference = { key, given };
    } else {
      const difference = gridDifference(reference.grid, raster.grid);
      if (difference !== null) {
        const named = this.reference ?? { key: 'the reference raster', given: basename(reference.path) };
        throw inputError(
          `${this.label}: ${key} "${given}" is not on the grid of ${named.key} "${named.given}": ${difference} (${named.given} vs ${given})`,
          { file: absolute, key, hint: resampleHint(reference.grid, given) },
        );
      }
    }
    return raster;
  }

  /** The rasters the scenario names, sized from their headers and checked together against the memory budget. */
  async checkRasterMemory(raw: ScenarioJson): Promise<void> {
    const named: Array<[string, string | number | undefined]> = [
      ['aquifer.conductivity', raw.aquifer.conductivity],
      ['aquifer.thickness', raw.aquifer.thickness],
      ['aquifer.porosity', raw.aquifer.porosity],
      ['aquifer.top', raw.aquifer.top],
      ['aquifer.bottom', raw.aquifer.bottom],
      ['aquifer.initialHead', raw.aquifer.initialHead],
      ['groundSurface', raw.groundSurface],
      ['recharge', raw.recharge],
      ...raw.fixedHeads.map((entry, i): [string, string | undefined] => [
        `fixedHeads[${i}].raster`,
        'raster' in entry ? entry.raster : undefined,
      ]),
      ...(raw.headDependent ?? []).flatMap(
        (entry, i): Array<[string, string | number | undefined]> => [
          [`headDependent[${i}].raster`, entry.raster],
          [`headDependent[${i}].conductance`, entry.conductance],
          [`headDependent[${i}].bottom`, entry.bottom],
        ],
      ),
      ['leakage.sourceHead', raw.leakage?.sourceHead],
      ['leakage.leakance', raw.leakage?.leakance],
    ];
    const footprints: RasterFootprint[] = [];
    for (const [key, given] of named) {
      if (typeof given !== 'string') continue;
      const absolute = this.path(given);
      await this.requireFile(key, given, absolute, 'raster');
      try {
        const header = await readRasterHeader(absolute, { label: `${key} "${given}"` });
        footprints.push({
          key,
          given,
          width: header.width,
          height: header.height,
          valueBytes: header.valueBytes,
          readBytes: header.readBytes,
        });
      } catch (thrown) {
        if (thrown instanceof PiezomapError)
          throw new PiezomapError(thrown.code, `${this.label}: ${thrown.message}`, { ...thrown.detail, file: absolute, key });
        throw thrown;
      }
    }
    try {
      checkRasterMemory(footprints);
    } catch (thrown) {
      if (thrown instanceof PiezomapError)
        throw new PiezomapError(thrown.code, `${this.label}: ${thrown.message}`, {
          ...thrown.detail,
          file: thrown.detail.file && this.path(thrown.detail.file),
        });
      throw thrown;
    }
  }

  async requireFile(key: string, given: string, absolute: string, what: string): Promise<void> {
    try {
      const info = await stat(absolute);
      if (info.isDirectory()) throw Object.assign(new Error('is a directory'), { code: 'EISDIR' });
    } catch (thrown) {
      const problem = fileProblem(thrown, given, absolute, `${what} file`, key);
      throw new PiezomapError('input', `${this.label}: ${key}: ${problem.message}`, problem.detail);
    }
  }

  checkGridIsProjected(given: string, grid: Grid, lengthUnit: 'm' | 'ft'): void {
    if (grid.crs?.geographic) {
      throw inputError(
        `${this.label}: aquifer.conductivity "${given}" is in a geographic CRS (${crsLabel(grid.crs)}): its cell sizes are degrees, not lengths`,
        {
          file: this.path(given),
          key: 'aquifer.conductivity',
          hint: 'reproject the rasters to a projected CRS in metres or feet, e.g. gdalwarp -t_srs EPSG:326zz (WGS 84 / UTM zone zz north)',
        },
      );
    }
    const epsg = grid.crs?.epsg;
    const unit = grid.crs?.linearUnit ?? (epsg != null ? linearUnitOf(epsg) : undefined);
    if (unit) {
      const metres = /met(er|re)/i.test(unit);
      const feet = /(foot|feet|\bft\b)/i.test(unit);
      if ((metres && lengthUnit === 'ft') || (feet && lengthUnit === 'm')) {
        this.warn(
          `units.length is "${lengthUnit}" but the CRS of "${given}" measures in ${unit}: cell sizes are taken in ${unit}; keep the other inputs consistent`,
        );
      }
    }
  }

  async fixedHeads(entries: FixedHeadEntry[], reference: RasterData): Promise<FixedHeadInput[]> {
    const groups: FixedHeadInput[] = [];
    const names = new Map<string, string>();
    for (let index = 0; index < entries.length; index++) {
      const entry = entries[index]!;
      const source = `fixedHeads[${index}]`;
      const group =
        'raster' in entry
          ? await this.fixedHeadRaster(entry.raster, entry.name, source, reference)
          : 'shape' in entry
            ? await this.fixedHeadShape(entry, source, reference.grid)
            : this.fixedHeadEdge(entry.edge, entry.head, entry.name, source, reference.grid);
      const earlier = names.get(group.name);
      if (earlier !== undefined) {
        throw inputError(`${this.label}: ${source}: the fixed-head group name "${group.name}" is already used by ${earlier}`, {
          key: source,
          hint: 'each entry names one term of the water budget: give one of them a different "name"',
        });
      }
      names.set(group.name, source);
      groups.push(group);
    }
    return groups;
  }

  private async fixedHeadRaster(given: string, name: string | undefined, source: string, reference: RasterData): Promise<FixedHeadInput> {
    const raster = await this.raster(`${source}.raster`, given, reference);
    const values = raster.values;
    let count = 0;
    for (let p = 0; p < values.length; p++) if (Number.isFinite(values[p]!)) count++;
    const cells = new Int32Array(count);
    const heads = new Float64Array(count);
    let k = 0;
    for (let p = 0; p < values.length; p++) {
      const h = values[p]!;
      if (Number.isFinite(h)) {
        cells[k] = p;
        heads[k] = h;
        k++;
      }
    }
    if (count === 0) this.warn(`${source}: "${given}" has no cell with data, so it fixes no head`);
    return { name: name ?? basename(given, extname(given)), source, cells, heads };
  }

  private fixedHeadEdge(
    edge: 'west' | 'east' | 'north' | 'south',
    head: number,
    name: string | undefined,
    source: string,
    grid: Grid,
  ): FixedHeadInput {
    const { nx, ny } = grid;
    // Outer row/column by map direction, so that grids stored south-up or east-to-west are handled too.
    const northRow = grid.transform[5] < 0 ? 0 : ny - 1;
    const westCol = grid.transform[1] > 0 ? 0 : nx - 1;
    const vertical = edge === 'west' || edge === 'east';
    const count = vertical ? ny : nx;
    const cells = new Int32Array(count);
    if (vertical) {
      const col = edge === 'west' ? westCol : nx - 1 - westCol;
      for (let row = 0; row < ny; row++) cells[row] = row * nx + col;
    } else {
      const row = edge === 'north' ? northRow : ny - 1 - northRow;
      for (let col = 0; col < nx; col++) cells[col] = row * nx + col;
    }
    return { name: name ?? edge, source, cells, heads: new Float64Array(count).fill(head), activeOnly: true };
  }

  /** A GeoJSON shape entry (docs/scenario-shapes.md): polygons fix the cells whose centre lies inside, lines the cells they cross. */
  private async fixedHeadShape(entry: FixedHeadShapeEntry, source: string, grid: Grid): Promise<FixedHeadInput> {
    const key = `${source}.shape`;
    const { collection, where, file } = await this.shapes(key, entry.shape, grid);
    const spec = entry.head !== undefined ? { head: entry.head } : { headProperty: entry.headProperty! };
    let result: ReturnType<typeof shapeFixedHeads>;
    try {
      result = shapeFixedHeads(grid, collection, spec, where);
    } catch (thrown) {
      // Geometry was checked when read: what fails here is a feature's head.
      throw withPlace(thrown, file, entry.head !== undefined ? key : `${source}.headProperty`);
    }
    this.warnOutside(where, result.outside, collection.features.length, 'it fixes no head');
    return { name: entry.name ?? basename(entry.shape, extname(entry.shape)), source, cells: result.cells, heads: result.heads };
  }

  /** Make the cells that `aquifer.inactiveShapes` cover inactive (conductivity NaN), in place. */
  async inactiveShapes(files: string[], grid: Grid, conductivity: Float64Array): Promise<void> {
    const mask = new Uint8Array(conductivity.length);
    for (let i = 0; i < files.length; i++) {
      const key = `aquifer.inactiveShapes[${i}]`;
      const { collection, where, file } = await this.shapes(key, files[i]!, grid);
      let outside: string[];
      try {
        outside = markShapeCells(grid, collection, mask, where);
      } catch (thrown) {
        throw withPlace(thrown, file, key);
      }
      this.warnOutside(where, outside, collection.features.length, 'it makes no cell inactive');
    }
    for (let p = 0; p < mask.length; p++) if (mask[p]) conductivity[p] = NaN;
  }

  /** The text of a file a key names (GeoJSON or CSV), recorded as an input; missing or unreadable files are named. */
  private async readText(key: string, given: string, kind: 'GeoJSON' | 'CSV'): Promise<{ absolute: string; text: string }> {
    const absolute = this.path(given);
    await this.requireFile(key, given, absolute, kind);
    let text: string;
    try {
      text = await readFile(absolute, 'utf8');
    } catch (thrown) {
      throw fileProblem(thrown, given, absolute, `${kind} file`, key);
    }
    this.inputFiles.add(absolute);
    return { absolute, text };
  }

  /** Read a GeoJSON file a key names, check it and reproject it into the raster CRS. */
  async shapes(key: string, given: string, grid: Grid): Promise<{ collection: ShapeCollection; where: string; file: string }> {
    const { absolute, text } = await this.readText(key, given, 'GeoJSON');
    const where = `${this.label}: ${key} "${given}"`;
    try {
      const collection = readShapes(parseJsonText(text, where, absolute), where);
      const to = grid.crs?.epsg ?? null;
      if (to === null) {
        throw inputError(
          `${where} is in EPSG:${collection.epsg}, but the rasters have no EPSG code (${crsLabel(grid.crs)} CRS), so the shapes cannot be reprojected into them`,
          {
            hint: 'assign the rasters an EPSG code (gdal_edit.py -a_srs EPSG:nnnn)',
          },
        );
      }
      let transform: PointTransform | null = null;
      if (collection.epsg !== to) {
        try {
          transform = makeTransform(collection.epsg, to);
        } catch (thrown) {
          if (thrown instanceof PiezomapError)
            throw inputError(
              `${where}: reprojecting from EPSG:${collection.epsg} to the rasters' EPSG:${to}: ${thrown.message}`,
              thrown.detail,
            );
          throw thrown;
        }
      }
      reprojectShapes(collection, transform, where);
      checkLineLengths(collection, where);
      return { collection, where, file: absolute };
    } catch (thrown) {
      throw withPlace(thrown, absolute, key);
    }
  }

  warnOutside(where: string, outside: string[], total: number, consequence: string): void {
    if (outside.length === 0) return;
    if (outside.length === total) {
      this.warn(
        `${where}: no feature covers a cell of the grid (all lie outside it, or are too small to hold a cell centre), so ${consequence}`,
      );
      return;
    }
    const listed = outside.length > 5 ? `${outside.slice(0, 5).join(', ')} and ${outside.length - 5} more` : outside.join(', ');
    this.warn(
      `${where}: ${listed} cover${outside.length === 1 ? 's' : ''} no cell of the grid (outside it, or too small to hold a cell centre) and ${outside.length === 1 ? 'is' : 'are'} ignored`,
    );
  }

  /** The transform from `pointCrs` to the raster CRS, or null when points are already in the raster CRS. */
  pointTransform(pointCrs: string | undefined, grid: Grid, conductivityPath: string, key = 'pointCrs'): PointTransform | null {
    if (pointCrs === undefined) return null;
    const from = parseEpsg(pointCrs);
    if (from === null) throw inputError(`${this.label}: ${key}: "${pointCrs}" is not an EPSG code such as "EPSG:4326"`, { key });
    const to = grid.crs?.epsg ?? null;
    if (to === null) {
      throw inputError(
        `${this.label}: ${key} is ${pointCrs}, but aquifer.conductivity "${conductivityPath}" has no EPSG code (${crsLabel(grid.crs)} CRS), so points cannot be reprojected into it`,
        {
          key,
          hint: 'give the points in the raster CRS and drop "pointCrs", or assign the rasters an EPSG code (gdal_edit.py -a_srs EPSG:nnnn)',
        },
      );
    }
    if (from === to) return null;
    try {
      return makeTransform(from, to);
    } catch (thrown) {
      if (thrown instanceof PiezomapError) {
        throw new PiezomapError(
          thrown.code,
          `${this.label}: ${key}: reprojecting points from EPSG:${from} to the rasters' EPSG:${to}: ${thrown.message}`,
          { ...thrown.detail, key },
        );
      }
      throw thrown;
    }
  }

  async wells(spec: WellEntry[] | string | WellLayers | undefined, transform: PointTransform | null): Promise<WellInput[]> {
    // `projected`: the well's x, y are already in the raster CRS (GeoJSON points are reprojected when read).
    const byId = new Map<string, { change: Partial<WellChange>; source: string; projected: boolean }>();
    for (const layer of wellLayers(spec)) {
      const changes: { change: WellChange; source: string; projected?: boolean }[] =
        typeof layer.wells === 'string' && isGeoJsonPath(layer.wells)
          ? (await this.pointGeoJson(layer.source, layer.wells, 'well')).map(({ feature, source, x, y }) => ({
              change: wellFromFeature(feature, source, x, y),
              source,
              projected: true,
            }))
          : typeof layer.wells === 'string'
            ? (await this.pointCsv(`${layer.source}`, layer.wells, ['id', 'x', 'y', 'rate'], ['radius', 'minimumhead'])).map((record) => ({
                change: wellFromRecord(record),
                source: record.source,
              }))
            : layer.wells.map((change, index) => ({ change, source: `${layer.source}[${index}]` }));
      for (const { change, source, projected } of changes) {
        const existing = byId.get(change.id);
        const mergedChange: Partial<WellChange> = { ...(existing?.change ?? {}) };
        for (const [key, value] of Object.entries(change)) if (value !== undefined) (mergedChange as Record<string, unknown>)[key] = value;
        const moved = change.x !== undefined || change.y !== undefined;
        byId.set(change.id, { change: mergedChange, source, projected: moved ? Boolean(projected) : (existing?.projected ?? false) });
      }
    }
    const wells: WellInput[] = [];
    for (const [id, { change, source, projected }] of byId) {
      const missing = (['x', 'y', 'rate'] as const).filter((key) => change[key] === undefined);
      if (missing.length) {
        throw inputError(
          `${this.label}: ${source}: well "${id}" is new here, so it needs ${missing.join(', ')} (no earlier well has this id)`,
          {
            key: source,
            hint: 'a variant changes a baseline well by giving its id; check the id for typos',
          },
        );
      }
      if (change.rate === 0) continue;
      const point = projected ? { x: change.x!, y: change.y! } : this.project(transform, change.x!, change.y!, `well "${id}" (${source})`);
      const well: WellInput = { id, x: point.x, y: point.y, rate: change.rate!, source };
      if (change.radius !== undefined) well.radius = change.radius;
      if (change.minimumHead !== undefined) well.minimumHead = change.minimumHead;
      wells.push(well);
    }
    return wells;
  }

  async observations(spec: ScenarioJson['observations'], transform: PointTransform | null): Promise<ObservationInput[]> {
    if (spec === undefined) return [];
    if (typeof spec === 'string' && isGeoJsonPath(spec)) {
      return (await this.pointGeoJson('observations', spec, 'observation')).map(({ feature, source, x, y }) => {
        const head = numberProperty(feature, source, 'head');
        if (head === undefined)
          throw inputError(`${source} (id "${feature.id}"): has no "head" property (the observed head)`, { key: 'observations' });
        return { id: feature.id, x, y, head, source };
      });
    }
    const entries =
      typeof spec === 'string'
        ? (await this.pointCsv('observations', spec, ['id', 'x', 'y', 'head'], [])).map((record) => ({
            id: record.values.get('id')!,
            x: csvNumber(record, 'x'),
            y: csvNumber(record, 'y'),
            head: csvNumber(record, 'head'),
            source: record.source,
          }))
        : spec.map((entry, index) => ({ ...entry, source: `observations[${index}]` }));
    return entries.map((entry) => {
      const point = this.project(transform, entry.x, entry.y, `observation "${entry.id}" (${entry.source})`);
      return { id: entry.id, x: point.x, y: point.y, head: entry.head, source: entry.source };
    });
  }

  /** Receptors: in pointCrs (or the raster CRS), unless an entry names its own `crs`. */
  async receptors(
    spec: ScenarioJson['receptors'],
    transform: PointTransform | null,
    grid: Grid,
    conductivityPath: string,
  ): Promise<ReceptorInput[]> {
    if (spec === undefined) return [];
    if (typeof spec === 'string' && isGeoJsonPath(spec)) {
      return (await this.pointGeoJson('receptors', spec, 'receptor')).map(({ feature, source, x, y }) => ({
        id: feature.id,
        x,
        y,
        source,
      }));
    }
    const entries: Array<ReceptorEntry & { source: string }> =
      typeof spec === 'string'
        ? (await this.pointCsv('receptors', spec, ['id', 'x', 'y'], ['crs'])).map((record) => {
            const crs = record.values.get('crs');
            return {
              id: record.values.get('id')!,
              x: csvNumber(record, 'x'),
              y: csvNumber(record, 'y'),
              ...(crs ? { crs } : {}),
              source: record.source,
            };
          })
        : spec.map((entry, index) => ({ ...entry, source: `receptors[${index}]` }));
    return entries.map((entry) => {
      const own = entry.crs === undefined ? transform : this.pointTransform(entry.crs, grid, conductivityPath, `${entry.source}.crs`);
      const point = this.project(own, entry.x, entry.y, `receptor "${entry.id}" (${entry.source})`);
      return { id: entry.id, x: point.x, y: point.y, source: entry.source };
    });
  }

  /** The `ensemble` key: repeated thresholds or percentiles refused, conditioning points (CSV id,x,y,k) read and projected. */
  async ensemble(spec: EnsembleJson, transform: PointTransform | null): Promise<EnsembleInput> {
    for (const key of ['drawdownThresholds', 'percentiles'] as const) {
      const values = spec[key];
      const repeated = values.find((v, i) => values.indexOf(v) !== i);
      if (repeated !== undefined) throw inputError(`${this.label}: ensemble.${key} lists ${repeated} twice`, { key: `ensemble.${key}` });
    }
    const lengths = spec.logConductivity.correlationLength;
    const conditioning: ConditioningPoint[] = [];
    if (spec.conditioning !== undefined) {
      for (const record of await this.pointCsv('ensemble.conditioning', spec.conditioning, ['id', 'x', 'y', 'k'], [])) {
        const id = record.values.get('id')!;
        const k = csvNumber(record, 'k');
        if (!(k > 0) || !Number.isFinite(k)) {
          throw inputError(`${this.label}: ensemble.conditioning ${record.source} (id "${id}"): k = ${k} is not a conductivity > 0`, {
            key: 'ensemble.conditioning',
            file: this.path(spec.conditioning),
          });
        }
        const point = this.project(
          transform,
          csvNumber(record, 'x'),
          csvNumber(record, 'y'),
          `measured conductivity "${id}" (${record.source})`,
        );
        conditioning.push({ id, x: point.x, y: point.y, k, source: record.source });
      }
    }
    return {
      realisations: spec.realisations,
      seed: spec.seed,
      sd: spec.logConductivity.sd,
      correlationLength: typeof lengths === 'number' ? [lengths, lengths] : [lengths[0], lengths[1]],
      model: spec.logConductivity.model,
      conditioning,
      ...(spec.conditioning !== undefined ? { conditioningFile: spec.conditioning } : {}),
      drawdownThresholds: [...spec.drawdownThresholds],
      percentiles: [...spec.percentiles],
      captureProbability: spec.captureProbability,
    };
  }

  /** Grid and conductivity path, for reprojecting GeoJSON points (set before the point lists are read). */
  pointFrame: { grid: Grid; conductivityPath: string } | null = null;

  /** Point features of a GeoJSON file, reprojected from WGS 84 (or its legacy `crs`) into the raster CRS. */
  async pointGeoJson(
    key: string,
    given: string,
    what: string,
  ): Promise<Array<{ feature: PointFeature; source: string; x: number; y: number }>> {
    const { absolute, text } = await this.readText(key, given, 'GeoJSON');
    const json = parseJsonText(text, given, absolute);
    let collection;
    try {
      collection = readPointFeatures(json, given, what);
    } catch (thrown) {
      if (thrown instanceof PiezomapError)
        throw new PiezomapError(thrown.code, `${this.label}: ${key}: ${thrown.message}`, { ...thrown.detail, file: absolute, key });
      throw thrown;
    }
    const frame = this.pointFrame!;
    const transform = this.pointTransform(`EPSG:${collection.epsg}`, frame.grid, frame.conductivityPath, `${key} "${given}"`);
    return collection.features.map((feature) => {
      const source = `${given} feature ${feature.index}`;
      const point = this.project(transform, feature.x, feature.y, `${what} "${feature.id}" (${source})`);
      return { feature, source, x: point.x, y: point.y };
    });
  }

  /** A point in pointCrs (or the raster CRS) in the raster CRS, for point lists resolved outside the loader. */
  projectPoint(transform: PointTransform | null, x: number, y: number, what: string): { x: number; y: number } {
    return this.project(transform, x, y, what);
  }

  private project(transform: PointTransform | null, x: number, y: number, what: string): { x: number; y: number } {
    if (!transform) return { x, y };
    try {
      return transform.forward(x, y, what);
    } catch (thrown) {
      if (thrown instanceof PiezomapError) throw new PiezomapError(thrown.code, `${this.label}: ${thrown.message}`, thrown.detail);
      throw thrown;
    }
  }

  /**
   * Records of a point CSV: header with the required columns (any order, any case), one record per line.
   * Unknown columns are ignored with a warning; a record with the wrong number of fields, an empty id or a
   * duplicate id is an error naming the file and line.
   */
  async pointCsv(key: string, given: string, required: string[], optional: string[]): Promise<PointRecord[]> {
    const { absolute, text } = await this.readText(key, given, 'CSV');
    const name = given;
    let records;
    try {
      records = parseCsv(text);
    } catch (thrown) {
      if (thrown instanceof CsvSyntaxError) throw inputError(`${name} line ${thrown.line}: ${thrown.message}`, { file: absolute, key });
      throw thrown;
    }
    const expected = required.join(',');
    if (records.length === 0)
      throw inputError(`${name}: the file is empty (expected a header line "${expected}")`, { file: absolute, key });
    const header = records[0]!;
    const columns = header.fields.map((field) => field.trim().toLowerCase());
    if (columns.length === 1 && /[;\t]/.test(columns[0]!)) {
      throw inputError(`${name} line ${header.line}: the header "${header.fields[0]}" is not separated by commas`, {
        file: absolute,
        key,
        hint: `write the columns as "${expected}" with commas (and "." as the decimal point)`,
      });
    }
    const seen = new Set<string>();
    for (const column of columns) {
      if (seen.has(column))
        throw inputError(`${name} line ${header.line}: column "${column}" appears twice in the header`, { file: absolute, key });
      seen.add(column);
    }
    const missing = required.filter((column) => !seen.has(column));
    if (missing.length) {
      throw inputError(
        `${name} line ${header.line}: the header lacks the column(s) ${missing.map((c) => `"${c}"`).join(', ')} (found: ${columns.join(',')})`,
        {
          file: absolute,
          key,
          hint: `the header must be "${expected}"${optional.length ? ` (optional: ${optional.join(', ')})` : ''}`,
        },
      );
    }
    const ignored = columns.filter((column) => !required.includes(column) && !optional.includes(column));
    if (ignored.length) this.warn(`${name}: column(s) ${ignored.map((c) => `"${c}"`).join(', ')} ignored`);

    const result: PointRecord[] = [];
    const firstLine = new Map<string, number>();
    for (let r = 1; r < records.length; r++) {
      const record = records[r]!;
      if (record.fields.length !== columns.length) {
        throw inputError(`${name} line ${record.line}: ${record.fields.length} field(s) where the header has ${columns.length}`, {
          file: absolute,
          key,
          hint: 'quote a field that contains a comma ("like, this"); use "." as the decimal point',
        });
      }
      const values = new Map<string, string>();
      columns.forEach((column, c) => values.set(column, record.fields[c]!.trim()));
      const id = values.get('id')!;
      if (id === '') throw inputError(`${name} line ${record.line}: the id is empty`, { file: absolute, key });
      const earlier = firstLine.get(id);
      if (earlier !== undefined) {
        throw inputError(`${name} line ${record.line}: duplicate id "${id}" (also on line ${earlier})`, {
          file: absolute,
          key,
          hint: 'ids must be unique within a list',
        });
      }
      firstLine.set(id, record.line);
      result.push({ source: `${given} line ${record.line}`, file: absolute, values });
    }
    return result;
  }
}

/** Point lists given as GeoJSON files are told apart from CSV files by the extension. */
function isGeoJsonPath(given: string): boolean {
  return /\.(geo)?json$/i.test(given.trim());
}

function wellFromFeature(feature: PointFeature, source: string, x: number, y: number): WellChange {
  const well: WellChange = { id: feature.id, x, y };
  const rate = numberProperty(feature, source, 'rate');
  if (rate !== undefined) well.rate = rate;
  const radius = numberProperty(feature, source, 'radius');
  if (radius !== undefined) {
    if (!(radius > 0)) throw inputError(`${source} (id "${feature.id}"): radius ${radius} must be > 0 (or left out)`);
    well.radius = radius;
  }
  const minimumHead = numberProperty(feature, source, 'minimumHead');
  if (minimumHead !== undefined) well.minimumHead = minimumHead;
  return well;
}

function wellFromRecord(record: PointRecord): WellChange {
  const well: WellChange = {
    id: record.values.get('id')!,
    x: csvNumber(record, 'x'),
    y: csvNumber(record, 'y'),
    rate: csvNumber(record, 'rate'),
  };
  const radius = record.values.get('radius');
  if (radius !== undefined && radius !== '') {
    const value = csvNumber(record, 'radius');
    if (!(value > 0)) throw inputError(`${record.source}: radius ${value} must be > 0 (or left empty)`, { file: record.file });
    well.radius = value;
  }
  const minimumHead = record.values.get('minimumhead');
  if (minimumHead !== undefined && minimumHead !== '') well.minimumHead = csvNumber(record, 'minimumhead');
  return well;
}

/** A finite number from a CSV field, else an error naming the file, line and column. */
function csvNumber(record: PointRecord, column: string): number {
  const text = record.values.get(column) ?? '';
  // Number('') is 0 and Number('0x10') is 16: accept only decimal notation.
  const value = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(text) ? Number(text) : NaN;
  if (!Number.isFinite(value)) {
    const hint = /^[+-]?\d+,\d+$/.test(text) ? 'use "." as the decimal point (and quote nothing)' : undefined;
    throw inputError(`${record.source}: ${column} ${text === '' ? 'is empty' : `"${text}" is not a number`}`, {
      file: record.file,
      ...(hint ? { hint } : {}),
    });
  }
  return value;
}

/** A PiezomapError with the file and scenario key at fault added to its detail (other throws pass unchanged). */
function withPlace(thrown: unknown, file: string, key: string): unknown {
  if (thrown instanceof PiezomapError)
    return new PiezomapError(thrown.code, thrown.message, {
      ...thrown.detail,
      file: thrown.detail.file ?? file,
      key: thrown.detail.key ?? key,
    });
  return thrown;
}

/** A gdalwarp command that puts a raster on the reference grid. */
function resampleHint(reference: Grid, given: string): string {
  const b = gridBounds(reference);
  const srs = reference.crs?.epsg != null ? ` -t_srs EPSG:${reference.crs.epsg}` : '';
  return `resample it onto the conductivity grid, e.g. gdalwarp${srs} -te ${b.minX} ${b.minY} ${b.maxX} ${b.maxY} -ts ${reference.nx} ${reference.ny} ${given} resampled.tif`;
}
