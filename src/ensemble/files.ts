/**
 * The files of an ensemble, as bytes: per run folder (baseline/, NAME/ as `compare` lays them out) head-mean.tif,
 * head-sd.tif, head-pNN.tif, and per variant drawdown-mean.tif, drawdown-sd.tif, drawdown-pNN.tif and
 * drawdown-exceedance-T.tif; ensemble.csv (one row per realisation and run); summary.json (last). And a shard's
 * files: its records as Float32 values (realisations.f32) and a summary.json holding the setup and each record's
 * point values, from which `ensemble merge` rebuilds exactly the records a one-machine run holds.
 *
 * Everything here is a pure function of the setup and the records in realisation order, so a one-machine run and a
 * merge of shards give identical bytes; only summary.json's `run` section (timings, hosts, workers, shards) differs.
 */
import { CAUTION } from '../caution.js';
import { inputError } from '../errors.js';
import { csvRow } from '../output/csv.js';
import { RESULT_MARKER, type OutputFile } from '../output/resultFolder.js';
import { encodeFloat32GeoTiff } from '../raster/write.js';
import { VERSION } from '../version.js';
import { cellStatistics, pointStatistics, type PointStatistics } from './stats.js';
import type { EnsembleRunInfo, EnsembleSetup, EnsembleSummaryJson, RealisationRecord, RunRecord } from './types.js';
import { ensembleReportHtml } from './report.js';

export const SHARD_VALUES = 'realisations.f32';
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
function checkComplete(setup: EnsembleSetup, records: readonly RealisationRecord[]): void {
  if (records.length !== setup.realisations)
    throw inputError(`ensemble: ${records.length} of ${setup.realisations} realisations are present`, { key: 'ensemble.realisations' });
  records.forEach((r, i) => {
    if (r.index !== i || r.runs.length !== setup.runs.length) throw inputError(`ensemble: realisation ${i} is missing or incomplete`);
  });
}

/** Every result file of an ensemble, and its summary (written last as summary.json). */
export function ensembleFiles(
  setup: EnsembleSetup,
  records: readonly RealisationRecord[],
  runInfo: EnsembleRunInfo,
): { files: OutputFile[]; summary: EnsembleSummaryJson } {
  checkComplete(setup, records);
  const { grid, percentiles, drawdownThresholds: thresholds } = setup;
  const cells = grid.nx * grid.ny;
  const files: OutputFile[] = [];
  const raster = (name: string, values: Float64Array, what: string) => {
    const description = `piezomap ${VERSION} ensemble of ${setup.realisations} realisations, ${what}: ${setup.title}. ${CAUTION}`;
    files.push({ name, bytes: encodeFloat32GeoTiff(grid, values, { nodata: -9999, description }) });
  };
  const L = setup.units.length;
  const runs: EnsembleSummaryJson['runs'] = [];
  setup.runs.forEach((name, r) => {
    const folder = `${name}/`;
    const run = records.map((rec) => rec.runs[r]!);
    const heads = cellStatistics(
      run.map((x) => (x.converged ? x.head : null)),
      cells,
      percentiles,
      [],
    );
    raster(`${folder}head-mean.tif`, heads.mean, `mean head (${L})`);
    raster(`${folder}head-sd.tif`, heads.sd, `standard deviation of head (${L})`);
    percentiles.forEach((p, k) =>
      raster(`${folder}head-p${numberLabel(p)}.tif`, heads.percentiles[k]!, `${numberLabel(p)}th percentile of head (${L})`),
    );
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
      const paired = (x: RunRecord, i: number) => x.converged && base[i]!.converged;
      const dd = cellStatistics(
        run.map((x, i) => (paired(x, i) ? x.drawdown : null)),
        cells,
        percentiles,
        thresholds,
      );
      raster(`${folder}drawdown-mean.tif`, dd.mean, `mean drawdown (${L}, baseline head - variant head, positive = lowered)`);
      raster(`${folder}drawdown-sd.tif`, dd.sd, `standard deviation of drawdown (${L})`);
      percentiles.forEach((p, k) =>
        raster(`${folder}drawdown-p${numberLabel(p)}.tif`, dd.percentiles[k]!, `${numberLabel(p)}th percentile of drawdown (${L})`),
      );
      thresholds.forEach((t, k) =>
        raster(
          `${folder}drawdown-exceedance-${numberLabel(t)}.tif`,
          dd.exceedance[k]!,
          `probability (0-1) that drawdown exceeds ${numberLabel(t)} ${L}`,
        ),
      );
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
    runs,
    files: [...files.map((f) => f.name), ENSEMBLE_REPORT, RESULT_MARKER],
    warnings,
    run: runInfo,
  };
  // The report shows no timings (the run section), so a merge writes the same bytes.
  files.push({ name: ENSEMBLE_REPORT, bytes: ensembleReportHtml(setup, records, { ...summary, run: { hosts: [], seconds: {} } }) });
  files.push({ name: RESULT_MARKER, bytes: JSON.stringify(summary, null, 2) + '\n' });
  return { files, summary };
}

/** ensemble.csv: realisation, run, converged, then the head at every point column. */
export function ensembleCsv(setup: EnsembleSetup, records: readonly RealisationRecord[]): string {
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
function fieldsPerRealisation(setup: EnsembleSetup): number {
  return setup.runs.length + setup.runs.length - 1;
}

/** A shard's files: realisations.f32 (little-endian Float32, NaN where a field is absent) and summary.json. */
export function shardFiles(
  setup: EnsembleSetup,
  shard: { k: number; n: number },
  range: [number, number],
  records: readonly RealisationRecord[],
  runInfo: EnsembleRunInfo,
): OutputFile[] {
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
  const bytes = new Uint8Array(values.buffer);
  if (new Uint8Array(new Uint16Array([1]).buffer)[0] !== 1) throw new Error('big-endian machines are not supported for shard files');
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
  return [
    { name: SHARD_VALUES, bytes },
    { name: RESULT_MARKER, bytes: JSON.stringify(summary) + '\n' },
  ];
}

/** The records of a shard from its summary and realisations.f32 bytes. */
export function shardRecords(summary: ShardSummaryJson, bytes: Uint8Array, label: string): RealisationRecord[] {
  const setup = summary.setup;
  const cells = setup.grid.nx * setup.grid.ny;
  const per = fieldsPerRealisation(setup);
  const expected = summary.records.length * per * cells * 4;
  if (bytes.byteLength !== expected) {
    throw inputError(
      `${label}/${SHARD_VALUES}: ${bytes.byteLength} bytes, expected ${expected} for ${summary.records.length} realisation(s)`,
      { hint: 'the shard folder is damaged or incomplete: run that shard again' },
    );
  }
  const copy = new Uint8Array(bytes); // aligned
  const values = new Float32Array(copy.buffer, 0, expected / 4);
  return summary.records.map((rec, i) => ({
    index: rec.index,
    runs: rec.runs.map((r, j) => {
      const head = values.slice((i * per + j) * cells, (i * per + j + 1) * cells);
      const dd = j > 0 ? values.slice((i * per + setup.runs.length + j - 1) * cells, (i * per + setup.runs.length + j) * cells) : null;
      return {
        converged: r.converged,
        reason: r.reason,
        head: r.converged ? head : null,
        drawdown: r.converged ? dd : null,
        points: r.points,
      };
    }),
  }));
}
