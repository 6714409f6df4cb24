/**
 * Point lists of a scenario: wells (inline, CSV or GeoJSON, merged over variant layers by id), observations,
 * receptors and the ensemble's measured conductivities, each projected from `pointCrs` (or a GeoJSON file's own
 * CRS) into the rasters' CRS. A CSV or GeoJSON problem is an input error naming the file, line or feature and key.
 * File access goes through the scenario loader (load.ts), which records every file read as an input of the run.
 */
import { crsLabel, type Grid } from '../grid.js';
import { inputError, PiezomapError } from '../errors.js';
import { makeTransform, parseEpsg, type PointTransform } from '../crs.js';
import type { EnsembleJson, ReceptorEntry, ScenarioJson, WellChange, WellEntry, WellLayers } from './schema.js';
import { wellLayers } from './merge.js';
import { numberProperty, readPointFeatures, type PointFeature } from './pointFeatures.js';
import { CsvSyntaxError, parseCsv, parseJsonText } from './text.js';
import type { ConditioningPoint, EnsembleInput, ObservationInput, ReceptorInput, WellInput } from './types.js';

/** What point loading needs from the scenario loader: messages' label, paths, warnings, and reading a named file. */
export interface PointIo {
  readonly label: string;
  path(given: string): string;
  warn(text: string): void;
  readText(key: string, given: string, kind: 'GeoJSON' | 'CSV'): Promise<{ absolute: string; text: string }>;
}

/** One CSV record: `source` names the file and line for messages; `file` is the absolute path. */
type PointRecord = { source: string; file: string; values: Map<string, string> };

/** Reads and projects the point lists of one scenario onto `grid` (the conductivity raster's, from `conductivityPath`). */
export class PointLoader {
  constructor(
    private readonly io: PointIo,
    private readonly grid: Grid,
    private readonly conductivityPath: string,
  ) {}

  /** The transform from `pointCrs` to the raster CRS, or null when points are already in the raster CRS. */
  pointTransform(pointCrs: string | undefined, grid: Grid, conductivityPath: string, key = 'pointCrs'): PointTransform | null {
    if (pointCrs === undefined) return null;
    const from = parseEpsg(pointCrs);
    if (from === null) throw inputError(`${this.io.label}: ${key}: "${pointCrs}" is not an EPSG code such as "EPSG:4326"`, { key });
    const to = grid.crs?.epsg ?? null;
    if (to === null) {
      throw inputError(
        `${this.io.label}: ${key} is ${pointCrs}, but aquifer.conductivity "${conductivityPath}" has no EPSG code (${crsLabel(grid.crs)} CRS), so points cannot be reprojected into it`,
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
          `${this.io.label}: ${key}: reprojecting points from EPSG:${from} to the rasters' EPSG:${to}: ${thrown.message}`,
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
          `${this.io.label}: ${source}: well "${id}" is new here, so it needs ${missing.join(', ')} (no earlier well has this id)`,
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
      if (repeated !== undefined) throw inputError(`${this.io.label}: ensemble.${key} lists ${repeated} twice`, { key: `ensemble.${key}` });
    }
    const lengths = spec.logConductivity.correlationLength;
    const conditioning: ConditioningPoint[] = [];
    if (spec.conditioning !== undefined) {
      for (const record of await this.pointCsv('ensemble.conditioning', spec.conditioning, ['id', 'x', 'y', 'k'], [])) {
        const id = record.values.get('id')!;
        const k = csvNumber(record, 'k');
        if (!(k > 0) || !Number.isFinite(k)) {
          throw inputError(`${this.io.label}: ensemble.conditioning ${record.source} (id "${id}"): k = ${k} is not a conductivity > 0`, {
            key: 'ensemble.conditioning',
            file: this.io.path(spec.conditioning),
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

  /** Point features of a GeoJSON file, reprojected from WGS 84 (or its legacy `crs`) into the raster CRS. */
  async pointGeoJson(
    key: string,
    given: string,
    what: string,
  ): Promise<Array<{ feature: PointFeature; source: string; x: number; y: number }>> {
    const { absolute, text } = await this.io.readText(key, given, 'GeoJSON');
    const json = parseJsonText(text, given, absolute);
    let collection;
    try {
      collection = readPointFeatures(json, given, what);
    } catch (thrown) {
      if (thrown instanceof PiezomapError)
        throw new PiezomapError(thrown.code, `${this.io.label}: ${key}: ${thrown.message}`, { ...thrown.detail, file: absolute, key });
      throw thrown;
    }
    const transform = this.pointTransform(`EPSG:${collection.epsg}`, this.grid, this.conductivityPath, `${key} "${given}"`);
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
      if (thrown instanceof PiezomapError) throw new PiezomapError(thrown.code, `${this.io.label}: ${thrown.message}`, thrown.detail);
      throw thrown;
    }
  }

  /**
   * Records of a point CSV: header with the required columns (any order, any case), one record per line.
   * Unknown columns are ignored with a warning; a record with the wrong number of fields, an empty id or a
   * duplicate id is an error naming the file and line.
   */
  async pointCsv(key: string, given: string, required: string[], optional: string[]): Promise<PointRecord[]> {
    const { absolute, text } = await this.io.readText(key, given, 'CSV');
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
    if (ignored.length) this.io.warn(`${name}: column(s) ${ignored.map((c) => `"${c}"`).join(', ')} ignored`);

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
