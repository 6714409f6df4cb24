/**
 * Property-based fuzzing (fast-check, fixed seeds): mutated GeoTIFF bytes and mutated scenario JSON either load or
 * fail with PiezomapError code 'input' and a clean one-paragraph message — never a raw library exception, a hang
 * or an allocation beyond the memory budget. A sample of the mutated files also goes through the built CLI, which
 * must exit 0 or 2 with no stack trace.
 *
 * Time bound: each case must finish within CASE_SECONDS; this guards against hangs (a decoder looping on a
 * damaged header), it is not a speed test.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { PiezomapError } from '../../src/errors.js';
import { readRaster } from '../../src/raster/read.js';
import { rasterBudget } from '../../src/memory.js';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { loadScenario } from '../../src/scenario/load.js';
import { assembleSystem } from '../../src/discretisation/assemble.js';
import { locateObservations } from '../../src/analysis/points.js';
import { baseConductivity, baseGrid, baseScenario, float32Pixels, stripTiff } from '../../scripts/make-bad-inputs.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
const CASE_SECONDS = 5;
/** Fixed seeds and run counts keep `npm test` reproducible; FUZZ_SEED / FUZZ_RUNS explore further by hand. */
const SEED_OFFSET = Number(process.env.FUZZ_SEED ?? 0);
const RUN_SCALE = Number(process.env.FUZZ_RUNS ?? 1);
/** The memory limit the reader must respect while fuzzing (its budget for one raster is half of it). */
const LIMIT_MB = 64;

let dir: string;
let savedLimit: string | undefined;

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-fuzz-'));
  savedLimit = process.env.PIEZOMAP_MEMORY_LIMIT_MB;
  process.env.PIEZOMAP_MEMORY_LIMIT_MB = String(LIMIT_MB);
});
afterAll(() => {
  if (savedLimit === undefined) delete process.env.PIEZOMAP_MEMORY_LIMIT_MB;
  else process.env.PIEZOMAP_MEMORY_LIMIT_MB = savedLimit;
  rmSync(dir, { recursive: true, force: true });
});

/** A failure is acceptable only as PiezomapError('input') with a readable message. */
function expectCleanInputError(thrown: unknown): void {
  if (!(thrown instanceof PiezomapError)) throw new Error(`raw exception escaped: ${String(thrown)}\n${(thrown as Error)?.stack ?? ''}`);
  expect(thrown.code).toBe('input');
  const text = thrown.describe();
  expect(text.length).toBeGreaterThan(10);
  // a few lines (the schema lists up to 8 problems), none of them a dump
  const lines = text.split('\n');
  expect(lines.length).toBeLessThanOrEqual(12);
  for (const line of lines) expect(line.length).toBeLessThan(400);
  expect(text).not.toMatch(/\bundefined\b|\bNaN-bit|\[object Object\]|\n\s+at /);
}

// --- GeoTIFF bytes ---------------------------------------------------------------------------------------------

const k = baseConductivity();
const seeds: Array<{ name: string; bytes: Uint8Array }> = [
  { name: 'tiled DEFLATE + float predictor', bytes: encodeFloat32GeoTiff(baseGrid, k, { tileSize: 16 }) },
  {
    name: 'uncompressed strips',
    bytes: stripTiff({
      width: 12,
      height: 8,
      pixels: float32Pixels(k.map((v) => (Number.isNaN(v) ? -9999 : v))),
      rowsPerStrip: 3,
      nodata: '-9999',
    }),
  },
];

// GDAL-made files of the raster reader's tests: LZW, ZSTD, big-endian, band-interleaved, BigTIFF.
const FIXTURES = resolve(__dirname, '../fixtures/rasters');
for (const name of [
  'f32-strip-lzw-pred3.tif',
  'f32-bigendian-lzw.tif',
  'f32-tiled-zstd-nan.tif',
  'f32-3band-band.tif',
  'f32-bigtiff.tif',
  'i16-strip-lzw-pred2.tif',
]) {
  seeds.push({ name, bytes: new Uint8Array(readFileSync(join(FIXTURES, name))) });
}

/** Where the first IFD of a classic TIFF lies, so that mutations can aim at the structure; the whole file otherwise. */
function ifdRange(bytes: Uint8Array): [number, number] {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const little = bytes[0] === 0x49;
  if (view.getUint16(2, little) !== 42) return [0, bytes.length];
  const at = view.getUint32(4, little);
  if (at + 2 > bytes.length) return [0, bytes.length];
  return [at, Math.min(bytes.length, at + 2 + 12 * view.getUint16(at, little) + 4)];
}

type Mutation =
  | { kind: 'byte'; at: number; value: number; structure: boolean }
  | { kind: 'word'; at: number; value: number; structure: boolean }
  | { kind: 'truncate'; at: number }
  | { kind: 'splice'; at: number; bytes: Uint8Array };

/** Values that break size and offset arithmetic. */
const nastyWords = [0, 1, 2, 0x7f, 0xff, 0x100, 0xffff, 0x10000, 0x7fffffff, 0x80000000, 0xfffffffe, 0xffffffff, 46341, 65536 * 3];

const mutation: fc.Arbitrary<Mutation> = fc.oneof(
  fc.record({ kind: fc.constant('byte' as const), at: fc.nat(), value: fc.integer({ min: 0, max: 255 }), structure: fc.boolean() }),
  fc.record({ kind: fc.constant('word' as const), at: fc.nat(), value: fc.constantFrom(...nastyWords), structure: fc.boolean() }),
  fc.record({ kind: fc.constant('truncate' as const), at: fc.nat() }),
  fc.record({ kind: fc.constant('splice' as const), at: fc.nat(), bytes: fc.uint8Array({ minLength: 1, maxLength: 16 }) }),
);

function mutate(original: Uint8Array, mutations: Mutation[]): Uint8Array {
  let bytes = original.slice();
  const [from, to] = ifdRange(original);
  for (const m of mutations) {
    if (bytes.length < 8) break;
    if (m.kind === 'truncate') {
      bytes = bytes.slice(0, m.at % bytes.length);
    } else if (m.kind === 'splice') {
      const at = m.at % bytes.length;
      const out = new Uint8Array(bytes.length + m.bytes.length);
      out.set(bytes.subarray(0, at));
      out.set(m.bytes, at);
      out.set(bytes.subarray(at), at + m.bytes.length);
      bytes = out;
    } else {
      // structure: inside the IFD entries (tags, types, counts, values/offsets); else anywhere
      const span = m.structure ? Math.max(1, Math.min(to, bytes.length) - from) : bytes.length;
      const at = (m.structure ? from : 0) + (m.at % span);
      if (m.kind === 'byte' && at < bytes.length) bytes[at] = m.value;
      if (m.kind === 'word' && at + 4 <= bytes.length) new DataView(bytes.buffer).setUint32(at, m.value, true);
    }
  }
  return bytes;
}

async function timed<T>(work: () => Promise<T>): Promise<T> {
  const t0 = performance.now();
  try {
    return await work();
  } finally {
    expect((performance.now() - t0) / 1000).toBeLessThan(CASE_SECONDS);
  }
}

describe('fuzzing the GeoTIFF reader', () => {
  let loaded = 0;
  let refused = 0;
  seeds.forEach((seed, s) => {
    it(`mutated ${seed.name} files load or fail cleanly`, async () => {
      await fc.assert(
        fc.asyncProperty(fc.array(mutation, { minLength: 1, maxLength: 6 }), async (mutations) => {
          const bytes = mutate(seed.bytes, mutations);
          const path = join(dir, `fuzz-${s}.tif`);
          writeFileSync(path, bytes);
          await timed(async () => {
            try {
              const raster = await readRaster(path, { maxBytes: rasterBudget() });
              loaded++;
              expect(raster.values.length).toBe(raster.grid.nx * raster.grid.ny);
              // what was decoded fits the reader's budget (half the limit)
              expect(raster.values.byteLength).toBeLessThanOrEqual((LIMIT_MB / 2) * 2 ** 20);
            } catch (thrown) {
              refused++;
              expectCleanInputError(thrown);
            }
          });
        }),
        { seed: 20240601 + s + SEED_OFFSET, numRuns: Math.round(80 * RUN_SCALE) },
      );
    }, 120_000);
  });
  it('both outcomes occurred, so the mutations exercise the reader beyond its first check', () => {
    expect(loaded).toBeGreaterThan(0);
    expect(refused).toBeGreaterThan(0);
  });
});

// --- scenario JSON ---------------------------------------------------------------------------------------------

/** Paths into the base scenario where a value can be replaced. */
const scenarioPaths: Array<Array<string | number>> = [
  ['title'],
  ['units'],
  ['units', 'length'],
  ['units', 'time'],
  ['aquifer'],
  ['aquifer', 'conductivity'],
  ['aquifer', 'thickness'],
  ['aquifer', 'anisotropy'],
  ['fixedHeads'],
  ['fixedHeads', 0],
  ['fixedHeads', 0, 'edge'],
  ['fixedHeads', 0, 'head'],
  ['fixedHeads', 1, 'name'],
  ['recharge'],
  ['wells'],
  ['wells', 0],
  ['wells', 0, 'id'],
  ['wells', 0, 'x'],
  ['wells', 0, 'y'],
  ['wells', 0, 'rate'],
  ['wells', 0, 'radius'],
  ['observations'],
  ['observations', 0, 'head'],
  ['observations', 0, 'x'],
  ['pointCrs'],
  ['solver'],
  ['solver', 'method'],
  ['solver', 'tolerance'],
  ['solver', 'maxIterations'],
  ['variants'],
  ['unknownKey'],
  ['aquifer', 'porosity'],
];

/** Values that are plausible mistakes: wrong types, edge numbers, paths to things that are not rasters. */
const oddValue = fc.oneof(
  fc.jsonValue({ maxDepth: 2 }),
  fc.constantFrom(
    0,
    -1,
    1e308,
    -1e-308,
    2 ** 53,
    0.5,
    'k.tif',
    '',
    ' ',
    '.',
    '..',
    '/',
    'k.json',
    'missing.tif',
    'EPSG:4326',
    'EPSG:3857',
    'west',
    'auto',
    'jacobi',
    null,
    [],
    {},
  ),
);

const edit = fc.record({ path: fc.constantFrom(...scenarioPaths), value: fc.option(oddValue, { nil: undefined }) });

function applyEdit(target: Record<string, unknown>, path: Array<string | number>, value: unknown): void {
  let node: unknown = target;
  for (let i = 0; i < path.length - 1; i++) {
    if (node === null || typeof node !== 'object') return;
    node = (node as Record<string | number, unknown>)[path[i]!];
  }
  if (node === null || typeof node !== 'object') return;
  const last = path[path.length - 1]!;
  if (Array.isArray(node) && typeof last !== 'number') return; // e.g. "length" of a list put where an object was
  if (value === undefined) delete (node as Record<string | number, unknown>)[last];
  else (node as Record<string | number, unknown>)[last] = value;
}

/** Text damage: a character deleted, replaced or inserted. */
const textEdit = fc.record({
  at: fc.nat(),
  remove: fc.integer({ min: 0, max: 3 }),
  insert: fc.constantFrom('', '"', ',', '{', '}', '[', ']', ':', '0', '-', 'e', '\\', '\u0000', '\ufeff', 'NaN', '1e999'),
});

async function loadAndAssemble(path: string): Promise<void> {
  const { model } = await loadScenario(path);
  const system = assembleSystem(model);
  locateObservations(system, model.observations);
}

describe('fuzzing the scenario loader', () => {
  beforeAll(() => {
    writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(baseGrid, k));
    writeFileSync(join(dir, 'k.json'), '{}');
  });

  it('scenarios with values replaced or removed load or fail cleanly', async () => {
    let loaded = 0;
    let refused = 0;
    await fc.assert(
      fc.asyncProperty(fc.array(edit, { minLength: 1, maxLength: 4 }), async (edits) => {
        const scenario = structuredClone(baseScenario()) as Record<string, unknown>;
        for (const e of edits) applyEdit(scenario, e.path, e.value);
        const path = join(dir, 'edited.json');
        writeFileSync(path, JSON.stringify(scenario));
        await timed(async () => {
          try {
            await loadAndAssemble(path);
            loaded++;
          } catch (thrown) {
            refused++;
            expectCleanInputError(thrown);
          }
        });
      }),
      { seed: 7351 + SEED_OFFSET, numRuns: Math.round(300 * RUN_SCALE) },
    );
    expect(loaded).toBeGreaterThan(0);
    expect(refused).toBeGreaterThan(0);
  }, 120_000);

  it('scenario text with characters damaged loads or fails cleanly', async () => {
    const text = JSON.stringify(baseScenario(), null, 2);
    await fc.assert(
      fc.asyncProperty(fc.array(textEdit, { minLength: 1, maxLength: 3 }), async (edits) => {
        let damaged = text;
        for (const e of edits) {
          const at = e.at % (damaged.length + 1);
          damaged = damaged.slice(0, at) + e.insert + damaged.slice(at + e.remove);
        }
        const path = join(dir, 'damaged.json');
        writeFileSync(path, damaged);
        await timed(async () => {
          try {
            await loadAndAssemble(path);
          } catch (thrown) {
            expectCleanInputError(thrown);
          }
        });
      }),
      { seed: 9127 + SEED_OFFSET, numRuns: Math.round(250 * RUN_SCALE) },
    );
  }, 120_000);
});

describe('fuzzing GeoJSON shapes', () => {
  it('a lake polygon file with characters damaged or values replaced loads or fails cleanly', async () => {
    writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(baseGrid, k));
    // A lake in the raster CRS (the older crs member, as GDAL writes it), heads from a property.
    const x0 = 500300;
    const y0 = 4099500;
    const lake = {
      type: 'FeatureCollection',
      crs: { type: 'name', properties: { name: 'urn:ogc:def:crs:EPSG::32633' } },
      features: [
        {
          type: 'Feature',
          properties: { level: 46.5 },
          geometry: {
            type: 'Polygon',
            coordinates: [
              [
                [x0, y0],
                [x0 + 250, y0],
                [x0 + 250, y0 + 250],
                [x0, y0 + 250],
                [x0, y0],
              ],
            ],
          },
        },
      ],
    };
    const text = JSON.stringify(lake);
    const scenario = join(dir, 'lake-scenario.json');
    writeFileSync(
      scenario,
      JSON.stringify({
        ...baseScenario(),
        fixedHeads: [
          { edge: 'west', head: 50 },
          { shape: 'lake.geojson', headProperty: 'level' },
        ],
      }),
    );
    await fc.assert(
      fc.asyncProperty(
        fc.array(textEdit, { minLength: 1, maxLength: 3 }),
        fc.option(oddValue, { nil: undefined }),
        async (edits, value) => {
          let damaged = text;
          if (value !== undefined) damaged = damaged.replace('46.5', JSON.stringify(value) ?? 'null');
          for (const e of edits) {
            const at = e.at % (damaged.length + 1);
            damaged = damaged.slice(0, at) + e.insert + damaged.slice(at + e.remove);
          }
          writeFileSync(join(dir, 'lake.geojson'), damaged);
          await timed(async () => {
            try {
              await loadAndAssemble(scenario);
            } catch (thrown) {
              expectCleanInputError(thrown);
            }
          });
        },
      ),
      { seed: 5501 + SEED_OFFSET, numRuns: Math.round(120 * RUN_SCALE) },
    );
  }, 120_000);
});

describe('fuzzing CSV point lists', () => {
  it('a wells CSV with characters damaged loads or fails cleanly', async () => {
    writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(baseGrid, k));
    const text = 'id,x,y,rate,radius\nW1,500350,4099750,-200,0.15\n"W 2",500850,4099350,-50,\n';
    const scenario = join(dir, 'csv-scenario.json');
    writeFileSync(scenario, JSON.stringify({ ...baseScenario(), wells: 'wells.csv' }));
    await fc.assert(
      fc.asyncProperty(fc.array(textEdit, { minLength: 1, maxLength: 3 }), async (edits) => {
        let damaged = text;
        for (const e of edits) {
          const at = e.at % (damaged.length + 1);
          damaged = damaged.slice(0, at) + e.insert + damaged.slice(at + e.remove);
        }
        writeFileSync(join(dir, 'wells.csv'), damaged);
        await timed(async () => {
          try {
            await loadAndAssemble(scenario);
          } catch (thrown) {
            expectCleanInputError(thrown);
          }
        });
      }),
      { seed: 6601 + SEED_OFFSET, numRuns: Math.round(120 * RUN_SCALE) },
    );
  }, 120_000);
});

// --- a sample through the command line -------------------------------------------------------------------------

describe('fuzzed inputs through the command line', () => {
  it('a sample of mutated rasters and scenarios exits 0 or 2, with no stack trace', () => {
    writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(baseGrid, k));
    const rasters = fc.sample(fc.array(mutation, { minLength: 1, maxLength: 6 }), { seed: 4242, numRuns: 3 });
    const edits = fc.sample(fc.array(edit, { minLength: 1, maxLength: 3 }), { seed: 4343, numRuns: 3 });
    const scenarios: string[] = [];
    rasters.forEach((mutations, i) => {
      writeFileSync(join(dir, `cli-${i}.tif`), mutate(seeds[i % 2]!.bytes, mutations));
      const path = join(dir, `cli-raster-${i}.json`);
      writeFileSync(path, JSON.stringify(baseScenario(`cli-${i}.tif`)));
      scenarios.push(path);
    });
    edits.forEach((list, i) => {
      const scenario = structuredClone(baseScenario()) as Record<string, unknown>;
      for (const e of list) applyEdit(scenario, e.path, e.value);
      const path = join(dir, `cli-edit-${i}.json`);
      writeFileSync(path, JSON.stringify(scenario));
      scenarios.push(path);
    });
    const codes: number[] = [];
    scenarios.forEach((path, i) => {
      const r = spawnSync(process.execPath, [BIN, 'inspect', path], {
        encoding: 'utf8',
        timeout: 60_000,
        env: { ...process.env, PIEZOMAP_MEMORY_LIMIT_MB: String(LIMIT_MB) },
      });
      codes.push(r.status ?? -1);
      expect([0, 2], `${path}: ${r.stderr}`).toContain(r.status);
      expect(r.stderr).not.toMatch(/\n\s+at |internal error/);
      if (r.status === 2) expect(r.stderr, `case ${i}`).toMatch(/^piezomap: /);
    });
    expect(codes).toContain(2);
  }, 180_000);
});
