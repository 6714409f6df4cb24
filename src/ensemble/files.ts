/**
 * The files of an ensemble, as bytes: per run folder (baseline/, NAME/ as `compare` lays them out) head-mean.tif,
 * head-sd.tif, head-pNN.tif, and per variant drawdown-mean.tif, drawdown-sd.tif, drawdown-pNN.tif and
 * drawdown-exceedance-T.tif; with tracking, capture-probability-WELL-T.tif and capture-probability-WELL-steady.tif
 * per withdrawal well of the run; PNG maps of the mean and standard deviation of head, of each exceedance
 * probability and of each well's steady capture probability; ensemble.csv (one row per realisation and run);
 * report.html; summary.json (last). And a shard's files: its records as Float32 values (realisations.f32), its
 * capture counts (capture.i32) and a summary.json holding the setup and each record's point values, from which
 * `ensemble merge` reads exactly the values a one-machine run holds.
 *
 * Everything here is a pure function of the setup and an `EnsembleSource` (the values in realisation order), so a
 * one-machine run (records in memory) and a merge of shards (values read from the shard files block by block) give
 * identical bytes; only summary.json's `run` section (timings, hosts, workers, shards) differs. Per-cell statistics
 * are computed a block of rows at a time: a merge holds one block of every realisation's values, never all of them.
 */
import { CAUTION } from '../caution.js';
import { inputError } from '../errors.js';
import { csvRow } from '../output/csv.js';
import { RESULT_MARKER, type OutputFile } from '../output/resultFolder.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
import { VERSION } from '../version.js';
import { cellAt, cellHeight, cellWidth } from '../grid.js';
import { ensembleMapPng, type EnsembleMapContext, type EnsembleMapKind } from '../report/ensembleMap.js';
import { cellStatistics, pointStatistics, type CellStatistics, type PointStatistics } from './stats.js';
import type { EnsembleRunInfo, EnsembleSetup, EnsembleSummaryJson, RealisationPoints, RealisationRecord, RunPoints } from './types.js';
import { ensembleReportHtml, type EnsembleMapFile } from './report.js';

export const SHARD_VALUES = 'realisations.f32';
export const SHARD_CAPTURE = 'capture.i32';
export const ENSEMBLE_CSV = 'ensemble.csv';
export const ENSEMBLE_REPORT = 'report.html';

/** How a number is written in a file name (as JSON writes it: 5, 2.5, 0.5). */
export function numberLabel(v: number): string {
  return String(v);
}

export type { EnsembleRunInfo, EnsembleSummaryJson, PointSummary } from './types.js';

function pct(stats: PointStatistics, percentiles: readonly number[]): Record<string, number | null> {
  return Object.fromEntries(percentiles.map((p, k) => [`p${numberLabel(p)}`, stats.percentiles[k]!]));
}

/** Check that the records are exactly realisations 0..R-1 in order, each with every run. */
function checkComplete(setup: EnsembleSetup, records: readonly RealisationPoints[]): void {
  if (records.length !== setup.realisations)
    throw inputError(`ensemble: ${records.length} of ${setup.realisations} realisations are present`, { key: 'ensemble.realisations' });
  records.forEach((r, i) => {
    if (r.index !== i || r.runs.length !== setup.runs.length) throw inputError(`ensemble: realisation ${i} is missing or incomplete`);
  });
}

/**
 * Where the per-cell values come from: the records of a one-machine run in memory, or the shard files of a merge.
 * Fields are numbered as in realisations.f32: 0..runs-1 the head of each run, then the drawdown of each variant.
 */
export interface EnsembleSource {
  setup: EnsembleSetup;
  /** Flags and point values of every realisation, in index order. */
  points: readonly RealisationPoints[];
  /**
   * Rows [r0, r1) of field `field` of every realisation (in order) that `include` marks, else null. The arrays may
   * be reused by the next call.
   */
  readBlock(field: number, r0: number, r1: number, include: readonly boolean[]): Array<Float32Array | null>;
  /** The capture counts of a run (see `captureCounts`), or null without capture. */
  captureCounts(run: number): Int32Array | null;
}

/** Bytes of per-realisation values one block may hold by default (the merge's memory beyond the output fields). */
export const DEFAULT_BLOCK_BYTES = 64 * 1024 * 1024;

export interface EnsembleFileOptions {
  /** Rows per block of the per-cell statistics (default: as many as fit DEFAULT_BLOCK_BYTES, at least one). */
  blockRows?: number;
}

/** A source over records held in memory (a one-machine run). */
export function recordSource(setup: EnsembleSetup, records: readonly RealisationRecord[]): EnsembleSource {
  const nx = setup.grid.nx;
  const runs = setup.runs.length;
  return {
    setup,
    points: records,
    readBlock(field, r0, r1, include) {
      return records.map((rec, i) => {
        if (!include[i]) return null;
        const values = field < runs ? rec.runs[field]!.head : rec.runs[field - runs + 1]!.drawdown;
        return values ? values.subarray(r0 * nx, r1 * nx) : null;
      });
    },
    captureCounts: (run) => captureCounts(setup, run, records),
  };
}

/**
 * Capture counts of one run: per well k of the run's list, per zone j (0..T-1 the capture times, T the steady zone)
 * and cell p, the number of realisations whose zone holds the cell, at [(k * (T + 1) + j) * cells + p]. Sums, so
 * shards add up to the one-machine counts exactly. Null when the setup has no capture.
 */
export function captureCounts(setup: EnsembleSetup, run: number, records: readonly RealisationRecord[]): Int32Array | null {
  if (!setup.capture) return null;
  const cells = setup.grid.nx * setup.grid.ny;
  const zones = setup.capture.times.length + 1;
  const counts = new Int32Array(setup.capture.wells[run]!.length * zones * cells);
  for (const rec of records) {
    const codes = rec.runs[run]!.capture;
    if (!rec.runs[run]!.converged || !codes) continue;
    for (let p = 0; p < cells; p++) {
      const code = codes[p]!;
      if (code < 0) continue;
      // Zones nest: within time c means within every later time and in the steady zone.
      const k = Math.floor(code / zones);
      for (let j = code - k * zones; j < zones; j++) counts[(k * zones + j) * cells + p]!++;
    }
  }
  return counts;
}

/** The name stem of capture zone j of a well: the capture time as JSON writes it, or "steady". */
function zoneLabel(setup: EnsembleSetup, j: number): string {
  const times = setup.capture!.times;
  return j < times.length ? numberLabel(times[j]!) : 'steady';
}

/** Per-cell statistics of one field, a block of rows at a time. */
function fieldStatistics(
  source: EnsembleSource,
  field: number,
  include: readonly boolean[],
  thresholds: readonly number[],
  blockRows: number,
): CellStatistics {
  const { grid, percentiles } = source.setup;
  const { nx, ny } = grid;
  const cells = nx * ny;
  const out: CellStatistics = {
    count: new Int32Array(cells),
    mean: new Float64Array(cells),
    sd: new Float64Array(cells),
    percentiles: percentiles.map(() => new Float64Array(cells)),
    exceedance: thresholds.map(() => new Float64Array(cells)),
  };
  for (let r0 = 0; r0 < ny; r0 += blockRows) {
    const r1 = Math.min(ny, r0 + blockRows);
    const block = cellStatistics(source.readBlock(field, r0, r1, include), (r1 - r0) * nx, percentiles, thresholds);
    const at = r0 * nx;
    out.count.set(block.count, at);
    out.mean.set(block.mean, at);
    out.sd.set(block.sd, at);
    block.percentiles.forEach((f, q) => out.percentiles[q]!.set(f, at));
    block.exceedance.forEach((f, t) => out.exceedance[t]!.set(f, at));
  }
  return out;
}

/** Every result file of an ensemble, and its summary (written last as summary.json). */
export function ensembleFiles(
  source: EnsembleSource,
  runInfo: EnsembleRunInfo,
  options: EnsembleFileOptions = {},
): { files: OutputFile[]; summary: EnsembleSummaryJson } {
  const { setup, points: records } = source;
  checkComplete(setup, records);
  const { grid, percentiles, drawdownThresholds: thresholds } = setup;
  const cells = grid.nx * grid.ny;
  const included = Math.max(1, setup.realisations);
  const blockRows = Math.max(1, Math.min(grid.ny, options.blockRows ?? Math.floor(DEFAULT_BLOCK_BYTES / (included * grid.nx * 4))));
  const files: OutputFile[] = [];
  const maps: EnsembleMapFile[] = [];
  const raster = (name: string, values: Float64Array, what: string) => {
    const description = `piezomap ${VERSION} ensemble of ${setup.realisations} realisations, ${what}: ${setup.title}. ${CAUTION}`;
    files.push({ name, bytes: encodeFloat32GeoTiff(grid, values, { nodata: -9999, description }) });
  };
  const map = (name: string, values: Float64Array, kind: EnsembleMapKind, caption: string, run: number) => {
    const drawn = ensembleMapPng(mapContext(setup, run), values, kind, caption);
    files.push({ name, bytes: drawn });
    maps.push({ file: name, caption, png: drawn });
  };
  const L = setup.units.length;
  const cellArea = cellWidth(grid) * cellHeight(grid);
  const runs: EnsembleSummaryJson['runs'] = [];
  const nRuns = setup.runs.length;
  setup.runs.forEach((name, r) => {
    const folder = `${name}/`;
    const run = records.map((rec) => rec.runs[r]!);
    const converged = run.map((x) => x.converged);
    const heads = fieldStatistics(source, r, converged, [], blockRows);
    raster(`${folder}head-mean.tif`, heads.mean, `mean head (${L})`);
    raster(`${folder}head-sd.tif`, heads.sd, `standard deviation of head (${L})`);
    percentiles.forEach((p, k) =>
      raster(`${folder}head-p${numberLabel(p)}.tif`, heads.percentiles[k]!, `${numberLabel(p)}th percentile of head (${L})`),
    );
    map(`${folder}head-mean-map.png`, heads.mean, { quantity: 'head' }, `${name}: mean head (${L})`, r);
    map(`${folder}head-sd-map.png`, heads.sd, { quantity: 'sd' }, `${name}: standard deviation of head (${L})`, r);
    const summary: EnsembleSummaryJson['runs'][number] = {
      name,
      converged: run.filter((x) => x.converged).length,
      notConverged: run.flatMap((x, i) => (x.converged ? [] : [{ realisation: i, reason: x.reason ?? 'not solved' }])),
      headAtPoints: setup.columns.map((c, k) => {
        const s = pointStatistics(
          run.map((x) => (x.converged ? x.points[k]! : null)),
          percentiles,
          [],
        );
        return { id: c.id, kind: c.kind, count: s.count, mean: s.mean, sd: s.sd, percentiles: pct(s, percentiles) };
      }),
    };
    if (r > 0) {
      const base = records.map((rec) => rec.runs[0]!);
      const paired = (x: RunPoints, i: number) => x.converged && base[i]!.converged;
      const dd = fieldStatistics(source, nRuns + r - 1, run.map(paired), thresholds, blockRows);
      raster(`${folder}drawdown-mean.tif`, dd.mean, `mean drawdown (${L}, baseline head - variant head, positive = lowered)`);
      raster(`${folder}drawdown-sd.tif`, dd.sd, `standard deviation of drawdown (${L})`);
      percentiles.forEach((p, k) =>
        raster(`${folder}drawdown-p${numberLabel(p)}.tif`, dd.percentiles[k]!, `${numberLabel(p)}th percentile of drawdown (${L})`),
      );
      thresholds.forEach((t, k) => {
        raster(
          `${folder}drawdown-exceedance-${numberLabel(t)}.tif`,
          dd.exceedance[k]!,
          `probability (0-1) that drawdown exceeds ${numberLabel(t)} ${L}`,
        );
        map(
          `${folder}drawdown-exceedance-${numberLabel(t)}-map.png`,
          dd.exceedance[k]!,
          { quantity: 'probability' },
          `${name}: probability that drawdown exceeds ${numberLabel(t)} ${L}`,
          r,
        );
      });
      summary.drawdownAtPoints = setup.columns.map((c, k) => {
        const values = run.map((x, i) => {
          const b = base[i]!.points[k];
          const v = x.points[k];
          return paired(x, i) && b !== null && b !== undefined && v !== null && v !== undefined ? b - v : null;
        });
        const s = pointStatistics(values, percentiles, thresholds);
        return {
          id: c.id,
          kind: c.kind,
          count: s.count,
          mean: s.mean,
          sd: s.sd,
          percentiles: pct(s, percentiles),
          exceedance: thresholds.map((t, j) => ({ threshold: t, probability: s.exceedance[j]! })),
        };
      });
    }
    const counts = source.captureCounts(r);
    if (setup.capture && counts) {
      const wells = setup.capture.wells[r]!;
      const zones = setup.capture.times.length + 1;
      const n = summary.converged;
      const receptorCells = setup.columns
        .filter((c) => c.kind === 'receptor')
        .map((c) => ({ id: c.id, cell: cellAt(grid, c.x, c.y) }))
        .map(({ id, cell }) => ({ id, p: cell ? cell.row * grid.nx + cell.col : -1 }));
      summary.captureProbability = wells.map((well, k) => {
        const timed: Float64Array[] = [];
        return {
          well: well.id,
          zones: Array.from({ length: zones }, (_, j) => {
            const label = zoneLabel(setup, j);
            const file = `${folder}capture-probability-${well.stem}-${label}.tif`;
            const probability = new Float64Array(cells);
            let expected = 0;
            let above50 = 0;
            let above90 = 0;
            const offset = (k * zones + j) * cells;
            for (let p = 0; p < cells; p++) {
              // Cells with no head in any realisation (inactive) are nodata, as in head-mean.tif.
              if (n === 0 || heads.count[p] === 0) {
                probability[p] = NaN;
                continue;
              }
              const v = counts[offset + p]! / n;
              probability[p] = v;
              expected += v;
              if (v >= 0.5) above50++;
              if (v >= 0.9) above90++;
            }
            const when = j < zones - 1 ? `within ${label} ${setup.units.time}` : 'steady zone';
            raster(file, probability, `probability (0-1) that the cell lies in the capture zone of well ${well.id} (${when})`);
            if (j < zones - 1) timed.push(probability);
            else
              map(
                `${folder}capture-probability-${well.stem}-${label}-map.png`,
                probability,
                {
                  quantity: 'probability',
                  well: well.id,
                  outlines: timed.map((values, t) => ({
                    values,
                    label: `P = 0.5 within ${zoneLabel(setup, t)} ${setup.units.time}`,
                  })),
                },
                `${name}: probability of capture by well ${well.id} (steady zone)`,
                r,
              );
            return {
              time: j < zones - 1 ? setup.capture!.times[j]! : null,
              file,
              expectedArea: expected * cellArea,
              areaP50: above50 * cellArea,
              areaP90: above90 * cellArea,
              receptors: receptorCells.map(({ id, p }) => ({ id, probability: p >= 0 && n > 0 ? counts[offset + p]! / n : null })),
            };
          }),
        };
      });
    }
    runs.push(summary);
  });
  files.push({ name: ENSEMBLE_CSV, bytes: ensembleCsv(setup, records) });
  const warnings = [...setup.warnings];
  for (const run of runs) {
    if (run.notConverged.length)
      warnings.push(
        `${run.name}: ${run.notConverged.length} of ${setup.realisations} realisation(s) gave no sound result and are left out of its statistics (listed under runs.notConverged)`,
      );
  }
  const summary: EnsembleSummaryJson = {
    piezomap: VERSION,
    command: 'ensemble',
    caution: CAUTION,
    title: setup.title,
    scenario: setup.scenario,
    units: setup.units,
    realisations: setup.realisations,
    seed: setup.seed,
    logConductivity: setup.logConductivity,
    conditioning: setup.conditioning,
    embedding: setup.embedding,
    percentiles,
    drawdownThresholds: thresholds,
    percentileMethod:
      'exact: per-cell values of every realisation sorted, linear interpolation between order statistics (Hyndman & Fan 1996, definition 7)',
    ...(setup.capture ? { captureTimes: setup.capture.times } : {}),
    runs,
    files: [...files.map((f) => f.name), ENSEMBLE_REPORT, RESULT_MARKER],
    warnings,
    run: runInfo,
  };
  // The report shows no timings (the run section), so a merge writes the same bytes.
  files.push({
    name: ENSEMBLE_REPORT,
    bytes: ensembleReportHtml(setup, records, { ...summary, run: { hosts: [], seconds: {} } }, maps),
  });
  files.push({ name: RESULT_MARKER, bytes: JSON.stringify(summary, null, 2) + '\n' });
  return { files, summary };
}

/** What the maps of run `run` draw besides the values: grid, units, title, that run's wells and the receptors. */
function mapContext(setup: EnsembleSetup, run: number): EnsembleMapContext {
  return {
    grid: setup.grid,
    units: setup.units,
    title: setup.runTitles[run] ?? setup.title,
    realisations: setup.realisations,
    wells: setup.runWells[run]!,
    receptors: setup.columns.filter((c) => c.kind === 'receptor'),
    caution: CAUTION,
    footnote: `piezomap ${VERSION} ensemble`,
  };
}

/** ensemble.csv: realisation, run, converged, then the head at every point column. */
export function ensembleCsv(setup: EnsembleSetup, records: readonly RealisationPoints[]): string {
  const lines = [csvRow(['realisation', 'run', 'converged', ...setup.columns.map((c) => c.id)])];
  for (const rec of records) {
    rec.runs.forEach((run, r) => {
      lines.push(
        csvRow([rec.index, setup.runs[r]!, run.converged ? 'true' : 'false', ...run.points.map((v) => (run.converged ? v : null))]),
      );
    });
  }
  return lines.join('\n') + '\n';
}

/** A shard's summary.json: the setup, which realisations it holds, and each record's flags and point values. */
export interface ShardSummaryJson {
  piezomap: string;
  command: 'ensemble-shard';
  caution: string;
  shard: { k: number; n: number };
  /** First and one past the last realisation index. */
  range: [number, number];
  setup: EnsembleSetup;
  records: Array<{ index: number; runs: Array<{ converged: boolean; reason: string | null; points: Array<number | null> }> }>;
  run: EnsembleRunInfo;
}

/** Fields per realisation in realisations.f32: every run's head, then every variant's drawdown. */
export function fieldsPerRealisation(setup: EnsembleSetup): number {
  return setup.runs.length + setup.runs.length - 1;
}

/** Int32 values of capture.i32 for one run: wells x (capture times + 1) x cells (0 without capture). */
export function captureLength(setup: EnsembleSetup, run: number): number {
  if (!setup.capture) return 0;
  return setup.capture.wells[run]!.length * (setup.capture.times.length + 1) * setup.grid.nx * setup.grid.ny;
}

function littleEndian(): void {
  if (new Uint8Array(new Uint16Array([1]).buffer)[0] !== 1) throw new Error('big-endian machines are not supported for shard files');
}

/**
 * A shard's files: realisations.f32 (little-endian Float32, realisation by realisation, field by field, NaN where
 * a field is absent), capture.i32 (with capture: the shard's capture counts, run by run, little-endian Int32) and
 * summary.json.
 */
export function shardFiles(
  setup: EnsembleSetup,
  shard: { k: number; n: number },
  range: [number, number],
  records: readonly RealisationRecord[],
  runInfo: EnsembleRunInfo,
): OutputFile[] {
  littleEndian();
  const cells = setup.grid.nx * setup.grid.ny;
  const per = fieldsPerRealisation(setup);
  const values = new Float32Array(records.length * per * cells);
  records.forEach((rec, i) => {
    const fields = [...rec.runs.map((r) => r.head), ...rec.runs.slice(1).map((r) => r.drawdown)];
    fields.forEach((f, j) => {
      const offset = (i * per + j) * cells;
      if (f) values.set(f, offset);
      else values.fill(NaN, offset, offset + cells);
    });
  });
  const summary: ShardSummaryJson = {
    piezomap: VERSION,
    command: 'ensemble-shard',
    caution: CAUTION,
    shard,
    range,
    setup,
    records: records.map((rec) => ({
      index: rec.index,
      runs: rec.runs.map((r) => ({ converged: r.converged, reason: r.reason, points: r.points })),
    })),
    run: runInfo,
  };
  const files: OutputFile[] = [{ name: SHARD_VALUES, bytes: new Uint8Array(values.buffer) }];
  if (setup.capture) {
    const counts = new Int32Array(setup.runs.reduce((sum, _, r) => sum + captureLength(setup, r), 0));
    let at = 0;
    setup.runs.forEach((_, r) => {
      counts.set(captureCounts(setup, r, records)!, at);
      at += captureLength(setup, r);
    });
    files.push({ name: SHARD_CAPTURE, bytes: new Uint8Array(counts.buffer) });
  }
  files.push({ name: RESULT_MARKER, bytes: JSON.stringify(summary) + '\n' });
  return files;
}
