/**
 * Capture-zone probability of an ensemble (docs/ensembles.md), the out-of-core merge and the ensemble maps, on a
 * small aquifer with two wells in the baseline and a third in a variant:
 *  - each probability raster equals the fraction counted by running the single-realisation `solve` tracking
 *    (src/pipeline.ts, Pollock tracking with pathlines) on every realisation's conductivity separately: an
 *    independent recomputation of the same definition (the zone of well W for time t holds the cells whose water
 *    reaches W within t: ../shared/spec/interface.md, "tracking");
 *  - with sd = 0 every probability is exactly 0 or 1 and equals the plain `solve`'s capture-well.tif and
 *    travel-time.tif;
 *  - eight shard folders merged a block of one row (and of three rows) at a time give the one-machine files byte
 *    for byte, and the merge never asks for more than one block of every realisation at once;
 *  - the PNG maps decode with pngjs (the PNG library the project uses) to the size the drawing declares, and a
 *    travel-time outline at P = 0.5 around a block of cells runs along its outer cell edges (linear interpolation
 *    between cell centres, as d3-contour's marching squares do).
 * Runs in this thread (inline), on a 20 x 14 grid, 8 realisations.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fromArrayBuffer } from 'geotiff';
import { PNG } from 'pngjs';
import { CAUTION } from '../../src/caution.js';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { loadScenario } from '../../src/scenario/load.js';
import { resolveVariants } from '../../src/compare/run.js';
import { solveModel } from '../../src/pipeline.js';
import { realisationConductivity } from '../../src/ensemble/realisation.js';
import { loadEnsemble, runEnsemble, shardRange, type EnsembleRun } from '../../src/ensemble/run.js';
import { ensembleFiles, recordSource, shardFiles, type EnsembleSource } from '../../src/ensemble/files.js';
import { readShards } from '../../src/ensemble/shard.js';
import type { EnsembleSummaryJson } from '../../src/ensemble/types.js';
import { ensembleMapSvg } from '../../src/report/ensembleMap.js';
import { main } from '../../src/cli/main.js';
import type { OutputFile } from '../../src/output/resultFolder.js';
import { seededRandom, testGrid } from '../helpers/model.js';

const NX = 20;
const NY = 14;
const DX = 100;
const TIMES = [2000, 15000];
let dir: string;

const centre = (row: number, col: number) => ({ x: 500000 + (col + 0.5) * DX, y: 4100000 - (row + 0.5) * DX });

function writeScenario(name: string, sd: number, realisations = 8): string {
  const path = join(dir, name);
  writeFileSync(
    path,
    JSON.stringify({
      title: 'capture probability test aquifer',
      aquifer: { conductivity: 'k.tif', thickness: 20, porosity: 0.2 },
      fixedHeads: [
        { edge: 'west', head: 50, name: 'river' },
        { edge: 'east', head: 47, name: 'outlet' },
      ],
      recharge: 0.0002,
      wells: [
        { id: 'PW-1', ...centre(4, 9), rate: -250 },
        { id: 'PW 2', ...centre(9, 12), rate: -200 },
      ],
      receptors: [{ id: 'R-1', ...centre(6, 13) }],
      solver: { method: 'auto', tolerance: 1e-10 },
      tracking: { captureTimes: TIMES },
      variants: [{ name: 'more', wells: [{ id: 'PW-3', ...centre(7, 6), rate: -300 }] }],
      ensemble: {
        realisations,
        seed: 11,
        logConductivity: { sd, correlationLength: [400, 300], model: 'exponential' },
        drawdownThresholds: [0.5],
        percentiles: [50],
      },
    }),
  );
  return path;
}

async function decodeTif(bytes: Uint8Array): Promise<Float32Array> {
  const tiff = await fromArrayBuffer(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength) as ArrayBuffer);
  return (await (await tiff.getImage()).readRasters({ interleave: true })) as unknown as Float32Array;
}

const byName = (files: OutputFile[]) => new Map(files.map((f) => [f.name, typeof f.bytes === 'string' ? Buffer.from(f.bytes) : f.bytes]));

let scenario: string;
let one: EnsembleRun;
let oneFiles: Map<string, Uint8Array>;
let oneSummary: EnsembleSummaryJson;

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-capture-'));
  const grid = testGrid(NX, NY, DX);
  const random = seededRandom(9);
  const k = new Float64Array(NX * NY);
  for (let p = 0; p < k.length; p++) k[p] = 8 * Math.exp(0.6 * (random() - 0.5));
  writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(grid, k));
  scenario = writeScenario('ens.json', 0.8);
  one = await runEnsemble(scenario, { inline: true });
  const out = ensembleFiles(recordSource(one.setup, one.records), one.runInfo);
  oneFiles = byName(out.files);
  oneSummary = out.summary;
});

afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('capture-zone probability', () => {
  it('equals the fraction of realisations whose own solve (with tracking) puts the cell in the zone', async () => {
    const { model, raw } = await loadScenario(scenario);
    const variants = await resolveVariants(model, raw);
    const { ctx } = await loadEnsemble(scenario);
    const runs = [{ name: 'baseline', model }, ...variants];
    let between = 0;
    for (const [r, run] of runs.entries()) {
      const wells = one.setup.capture!.wells[r]!;
      // counts[well][zone][cell], zones: the capture times, then steady.
      const counts = wells.map(() => TIMES.concat(Infinity).map(() => new Int32Array(NX * NY)));
      let n = 0;
      for (let i = 0; i < one.setup.realisations; i++) {
        const result = solveModel({ ...run.model, conductivity: realisationConductivity(ctx, i) });
        const capture = result.tracking!.capture;
        n++;
        for (let p = 0; p < NX * NY; p++) {
          const w = capture.capturingWell[p]!;
          if (w < 0) continue;
          const k = wells.findIndex((x) => x.id === capture.wells[w]!.id);
          expect(k, capture.wells[w]!.id).toBeGreaterThanOrEqual(0);
          TIMES.concat(Infinity).forEach((t, z) => {
            if (capture.travelTime[p]! <= t) counts[k]![z]![p]!++;
          });
        }
      }
      const summaryRun = oneSummary.runs[r]!;
      expect(summaryRun.captureProbability!.map((c) => c.well)).toEqual(wells.map((w) => w.id));
      for (const [k, well] of wells.entries()) {
        for (const [z, label] of [...TIMES.map(String), 'steady'].entries()) {
          const name = `${run.name}/capture-probability-${well.stem}-${label}.tif`;
          const raster = await decodeTif(oneFiles.get(name)!);
          let expected = 0;
          let above50 = 0;
          let above90 = 0;
          for (let p = 0; p < NX * NY; p++) {
            const fraction = counts[k]![z]![p]! / n;
            expect(raster[p], `${name} cell ${p}`).toBe(Math.fround(fraction));
            expect(raster[p]! >= 0 && raster[p]! <= 1).toBe(true);
            if (fraction > 0 && fraction < 1) between++;
            expected += fraction * DX * DX;
            if (fraction >= 0.5) above50++;
            if (fraction >= 0.9) above90++;
          }
          const zone = summaryRun.captureProbability![k]!.zones[z]!;
          expect(zone.file).toBe(name);
          // Same sum, other rounding order: equal to a relative 1e-12.
          expect(Math.abs(zone.expectedArea - expected)).toBeLessThanOrEqual(1e-12 * expected);
          expect([zone.areaP50, zone.areaP90]).toEqual([above50 * DX * DX, above90 * DX * DX]);
        }
      }
    }
    // The field's spread moves the zones: some cells are captured in some realisations only.
    expect(between).toBeGreaterThan(0);
    // A well id with a space gets a file-safe stem; the summary keeps the id.
    expect(one.setup.capture!.wells[0]!.map((w) => w.stem)).toEqual(['PW-1', 'PW-2']);
    expect(oneSummary.runs[0]!.captureProbability![1]!.well).toBe('PW 2');
  });

  it('sd = 0: every probability is 0 or 1 and equals the plain solve capture-well.tif and travel-time.tif', async () => {
    const sd0 = writeScenario('sd0.json', 0, 2);
    const run = await runEnsemble(sd0, { inline: true });
    const files = byName(ensembleFiles(recordSource(run.setup, run.records), run.runInfo).files);
    const out = join(dir, 'sd0-solve');
    let stderr = '';
    const code = await main(['solve', sd0, '-o', out, '--quiet', '--no-maps'], { stdout: () => {}, stderr: (t) => (stderr += t) });
    expect(code, stderr).toBe(0);
    const summary = JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8'));
    const wellIds: string[] = summary.tracking.wells.map((w: { id: string }) => w.id);
    const captureWell = await decodeTif(readFileSync(join(out, 'capture-well.tif')));
    const travel = await decodeTif(readFileSync(join(out, 'travel-time.tif')));
    for (const well of run.setup.capture!.wells[0]!) {
      const number = wellIds.indexOf(well.id) + 1;
      expect(number).toBeGreaterThan(0);
      for (const [z, t] of TIMES.concat(Infinity).entries()) {
        const label = z < TIMES.length ? String(TIMES[z]) : 'steady';
        const probability = await decodeTif(files.get(`baseline/capture-probability-${well.stem}-${label}.tif`)!);
        let ones = 0;
        for (let p = 0; p < NX * NY; p++) {
          // travel-time.tif holds Float32 times; none of this aquifer lies within Float32 rounding of a capture time.
          const inZone = captureWell[p] === number && travel[p]! <= t;
          expect(probability[p], `${well.id} ${label} cell ${p}`).toBe(inZone ? 1 : 0);
          if (inZone) ones++;
        }
        expect(ones).toBeGreaterThan(0);
      }
    }
  });

  it('eight shards merged one row (and three rows) at a time give the one-machine files byte for byte', async () => {
    const loaded = await loadEnsemble(scenario);
    const dirs: string[] = [];
    for (let k = 1; k <= 8; k++) {
      const shard = await runEnsemble(scenario, { inline: true, shard: { k, n: 8 } }, loaded);
      expect(shard.range).toEqual(shardRange(8, k, 8));
      const folder = join(dir, `shard-${k}`);
      mkdirSync(folder);
      for (const f of shardFiles(shard.setup, { k, n: 8 }, shard.range, shard.records, shard.runInfo))
        writeFileSync(join(folder, f.name), f.bytes);
      dirs.push(folder);
    }
    for (const blockRows of [1, 3]) {
      const merged = await readShards([...dirs].reverse());
      // Watch the reads: never more than one block of rows of every realisation at once.
      let largest = 0;
      const source: EnsembleSource = {
        ...merged.source,
        readBlock(field, r0, r1, include) {
          const block = merged.source.readBlock(field, r0, r1, include);
          largest = Math.max(
            largest,
            block.reduce((sum, b) => sum + (b ? b.length : 0), 0),
          );
          return block;
        },
      };
      const files = ensembleFiles(source, merged.runInfo, { blockRows }).files;
      merged.close();
      expect(largest).toBe(8 * blockRows * NX);
      expect(files.map((f) => f.name)).toEqual([...oneFiles.keys()]);
      for (const f of files) {
        if (f.name === 'summary.json') continue;
        expect(Buffer.compare(Buffer.from(f.bytes), Buffer.from(oneFiles.get(f.name)!)), f.name).toBe(0);
      }
      const summary = JSON.parse(String(files.find((f) => f.name === 'summary.json')!.bytes));
      delete summary.run;
      const expected = { ...oneSummary } as Partial<EnsembleSummaryJson>;
      delete expected.run;
      expect(summary).toEqual(JSON.parse(JSON.stringify(expected)));
    }
  });

  it('the maps are valid PNGs of the size their drawing declares, with the caution', () => {
    const pngs = [...oneFiles.keys()].filter((n) => n.endsWith('.png'));
    expect(pngs).toEqual(
      expect.arrayContaining([
        'baseline/head-mean-map.png',
        'baseline/head-sd-map.png',
        'more/drawdown-exceedance-0.5-map.png',
        'baseline/capture-probability-PW-1-steady-map.png',
        'more/capture-probability-PW-3-steady-map.png',
      ]),
    );
    const setup = one.setup;
    const ctx = {
      grid: setup.grid,
      units: setup.units,
      title: setup.title,
      realisations: setup.realisations,
      wells: setup.runWells[0]!,
      receptors: setup.columns.filter((c) => c.kind === 'receptor'),
      caution: CAUTION,
    };
    const drawing = ensembleMapSvg(ctx, new Float64Array(NX * NY).fill(1), { quantity: 'head' }, 'baseline: mean head (m)');
    expect(drawing.svg).toContain('qualified hydrogeologist');
    const png = PNG.sync.read(Buffer.from(oneFiles.get('baseline/head-mean-map.png')!));
    expect([png.width, png.height]).toEqual([drawing.width, drawing.height]);
    for (const name of pngs) {
      const decoded = PNG.sync.read(Buffer.from(oneFiles.get(name)!));
      expect(decoded.width, name).toBe(drawing.width);
      expect(decoded.height, name).toBeGreaterThan(300);
    }
    // A travel-time outline at P = 0.5 around an indicator of cells (rows 3-5, columns 4-8): with linear
    // interpolation between cell centres (d3-contour's marching squares) the 0.5 line runs along the outer cell
    // edges, so its x coordinates span columns 4 to 9 in px (frame at x = 20, 670 px for 20 columns).
    const indicator = new Float64Array(NX * NY);
    for (let i = 3; i <= 5; i++) for (let j = 4; j <= 8; j++) indicator[i * NX + j] = 1;
    const outlined = ensembleMapSvg(
      ctx,
      indicator,
      { quantity: 'probability', well: 'PW-1', outlines: [{ values: indicator, label: 'P = 0.5 within 2000 d' }] },
      'outline',
    );
    const path = /<path d="([^"]+)" fill="none" stroke="#1d2327" stroke-width="1.6" stroke-dasharray/.exec(outlined.svg);
    expect(path).not.toBeNull();
    const xs = [...path![1]!.matchAll(/[ML]([-\d.]+),/g)].map((m) => Number(m[1]));
    const cell = 670 / NX;
    expect(Math.min(...xs)).toBeCloseTo(20 + 4 * cell, 0);
    expect(Math.max(...xs)).toBeCloseTo(20 + 9 * cell, 0);
    expect(outlined.svg).toContain('P = 0.5 within 2000 d');
  });
});
