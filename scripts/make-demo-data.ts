/**
 * Generate the bundled demo in data/: an invented valley aquifer (the "Talvorin valley", a made-up name) with
 * heterogeneous conductivity, variable thickness, a river with a resistant bed in three reaches (one held up by a
 * weir, losing water), a field-drain ditch, a gravel-pit lake and a downstream edge as fixed heads, areal
 * recharge, two supply wells and three observation wells, plus a variant with a third well.
 *
 * Deterministic: a seeded generator makes the same files on every run. Run with `npm run make-demo-data`
 * (optionally `node dist/scripts/make-demo-data.js OUTDIR`).
 *
 * Observed heads are invented too: the baseline is solved with piezomap itself and each observation gets the
 * simulated head plus a seeded deviation of a few decimetres, so that the residuals look like a real calibration.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { CAUTION } from '../src/caution.js';
import type { Grid } from '../src/grid.js';
import { solveScenarioFile } from '../src/pipeline.js';
import { encodeFloat32GeoTiff } from '../src/raster/write.js';
import { makeTransform } from '../src/crs.js';
import { seededUniform } from '../src/random.js';

const NX = 240;
const NY = 180;
const CELL = 50; // m
const X0 = 500000; // invented origin, EPSG:32633 (UTM zone 33N, metres)
const Y0 = 4110000;
const SEED = 20240611;

const RIVER_STAGE_UPSTREAM = 112.0; // m, where the river enters at the west edge
const RIVER_STAGE_DOWNSTREAM = 100.4; // m, at its last cell before the east edge
const EAST_EDGE_HEAD = 99.0; // m
const PIT_LAKE_LEVEL = 103.2; // m, surveyed water level of the invented gravel pit
const RECHARGE = 0.0004; // m/d
const RIVER_BED_DEPTH = 2.0; // m, from the stage down to the bottom of the bed sediments
const RIVER_LEAKANCE = 2.0; // 1/d, bed conductivity / bed thickness (1 m/d over 0.5 m of sandy bed)
const RIVER_WIDTH = 15; // m, wetted width
const WEIR_RAISE = 3.5; // m, how far above the natural stage the invented mill weir holds the pool behind it
const REACH_ENDS = [80, 140]; // columns where the upper reach ends and the impounded reach ends
const DITCH_LEAKANCE = 1.0; // 1/d
const DITCH_WIDTH = 1.5; // m
const DITCH_DEPTH = 0.8; // m, the ditch level below the head the aquifer has there without it
const POROSITY = 0.2; // effective porosity of sand and gravel (handbook range 0.15-0.30, from memory)

/** The boundaries both demo scenarios share: the downstream edge and the gravel-pit lake as fixed heads. */
const DEMO_FIXED_HEADS = [
  { edge: 'east', head: EAST_EDGE_HEAD, name: 'downstream-edge' },
  { shape: 'gravel_pit.geojson', headProperty: 'level', name: 'gravel-pit' },
];

/** The river as a head-dependent boundary with its bed resistance and bed bottom, in both demo scenarios. */
const DEMO_RIVER = {
  name: 'river',
  kind: 'river',
  shape: 'river.geojson',
  headProperty: 'stage',
  bottomProperty: 'bed',
  leakance: RIVER_LEAKANCE,
  width: RIVER_WIDTH,
};
const SPILL_SITE = { x: 503580, y: 4106030 }; // invented farmyard fuel spill upstream of PW-1

const grid: Grid = {
  nx: NX,
  ny: NY,
  transform: [X0, CELL, 0, Y0, 0, -CELL],
  crs: { epsg: 32633, geographic: false, geoKeys: {} },
};

const seeded = seededUniform;

/** Standard normal deviates by Box–Muller. */
function normal(random: () => number): () => number {
  return () => Math.sqrt(-2 * Math.log(1 - random())) * Math.cos(2 * Math.PI * random());
}

/**
 * A spatially correlated standard-normal field: white noise smoothed by three passes of a separable box filter
 * (close to a Gaussian kernel; `radius` cells sets the correlation length), then rescaled to mean 0, variance 1.
 */
function correlatedField(nx: number, ny: number, radius: number, gauss: () => number): Float64Array {
  const field = new Float64Array(nx * ny);
  for (let i = 0; i < field.length; i++) field[i] = gauss();
  const work = new Float64Array(nx * ny);
  for (let pass = 0; pass < 3; pass++) {
    boxBlur(field, work, nx, ny, radius, 1, nx); // along rows
    boxBlur(work, field, ny, nx, radius, nx, 1); // along columns
  }
  let mean = 0;
  for (const v of field) mean += v;
  mean /= field.length;
  let variance = 0;
  for (const v of field) variance += (v - mean) ** 2;
  const sd = Math.sqrt(variance / field.length);
  for (let i = 0; i < field.length; i++) field[i] = (field[i]! - mean) / sd;
  return field;
}

/** Moving average of half-width `radius` along lines of length `n` (`step` apart inside a line, `lineStep` between lines), edges clamped. */
function boxBlur(src: Float64Array, dst: Float64Array, n: number, lines: number, radius: number, step: number, lineStep: number): void {
  const width = 2 * radius + 1;
  for (let line = 0; line < lines; line++) {
    const base = line * lineStep;
    let sum = 0;
    for (let k = -radius; k <= radius; k++) sum += src[base + Math.min(n - 1, Math.max(0, k)) * step]!;
    for (let i = 0; i < n; i++) {
      dst[base + i * step] = sum / width;
      const leaving = Math.max(0, i - radius);
      const entering = Math.min(n - 1, i + radius + 1);
      sum += src[base + entering * step]! - src[base + leaving * step]!;
    }
  }
}

/** Row (fractional) of the valley axis at a column: a gentle bend across the map. */
function valleyAxis(col: number): number {
  return 88 + 16 * Math.sin((2 * Math.PI * col) / 300 + 0.6) + 4 * Math.sin((2 * Math.PI * col) / 95);
}

/** Half-width of the valley floor in rows: narrower upstream (west), wider downstream. */
function valleyHalfWidth(col: number): number {
  return 52 + 0.06 * col + 5 * Math.sin((2 * Math.PI * col) / 70 + 1.3);
}

/** Row (fractional) of the river at a column: meanders around the valley axis. */
function riverRow(col: number): number {
  return valleyAxis(col) + 11 * Math.sin((2 * Math.PI * col) / 62 + 0.4);
}

const round = (v: number, decimals: number): number => Math.round(v * 10 ** decimals) / 10 ** decimals;

interface DemoRasters {
  conductivity: Float64Array;
  thickness: Float64Array;
  riverCells: Uint8Array;
  active: Uint8Array;
}

function buildRasters(): DemoRasters {
  const random = seeded(SEED);
  const gauss = normal(random);
  const n = NX * NY;
  const logNoise = correlatedField(NX, NY, 6, gauss); // correlation length about 6 cells = 300 m
  const thicknessNoise = correlatedField(NX, NY, 10, gauss);
  const conductivity = new Float64Array(n).fill(Number.NaN);
  const thickness = new Float64Array(n).fill(Number.NaN);
  const active = new Uint8Array(n);

  // Bedrock outcrop: an inactive knoll inside the valley, north of the axis.
  const knollCol = 150;
  const knollRow = valleyAxis(knollCol) - 24;
  for (let row = 0; row < NY; row++) {
    for (let col = 0; col < NX; col++) {
      const p = row * NX + col;
      const offAxis = (row - valleyAxis(col)) / valleyHalfWidth(col); // -1..1 across the valley floor
      if (Math.abs(offAxis) > 1) continue; // valley side: bedrock, inactive
      if (((col - knollCol) / 9) ** 2 + ((row - knollRow) / 6) ** 2 <= 1) continue;
      active[p] = 1;
      // sand and gravel channel along the valley axis (about 30-80 m/d), silty margins (about 1-5 m/d)
      const channel = Math.exp(-((offAxis / 0.38) ** 2));
      const lnK = Math.log(2.5) + (Math.log(50) - Math.log(2.5)) * channel + 0.35 * logNoise[p]!;
      conductivity[p] = round(Math.min(120, Math.max(0.5, Math.exp(lnK))), 2);
      // thicker along the axis: 15 m at the margins to 40 m in the middle
      const b = 15 + 25 * (1 - offAxis * offAxis) + 1.5 * thicknessNoise[p]!;
      thickness[p] = round(Math.min(40, Math.max(15, b)), 1);
    }
  }

  // River: a 4-connected line of cells from the west edge to four cells short of the east edge, stage falling
  // linearly with the distance travelled along it.
  const riverCells = new Uint8Array(n);
  const path: number[] = [];
  let previous = Math.round(riverRow(0));
  for (let col = 0; col < NX - 4; col++) {
    const row = Math.round(riverRow(col));
    const stepRows = row >= previous ? 1 : -1;
    // the vertical run joining the previous column's row to this one sits in this column (4-connected line)
    for (let r = col === 0 ? row : previous; ; r += stepRows) {
      path.push(r * NX + col);
      if (r === row) break;
    }
    previous = row;
  }
  // The cells the river line (river.geojson) runs through, for keeping wells clear of it.
  path.forEach((p) => {
    if (!active[p]) throw new Error(`demo generator: river cell ${p} is outside the valley floor`);
    riverCells[p] = 1;
  });
  return { conductivity, thickness, riverCells, active };
}

/** Whether every cell within `clearance` cells (a square) of (row, col) is active and not a river cell. */
function clearOfRiver(d: DemoRasters, row: number, col: number, clearance: number): boolean {
  for (let r = row - clearance; r <= row + clearance; r++) {
    for (let c = col - clearance; c <= col + clearance; c++) {
      if (r < 0 || c < 0 || r >= NY || c >= NX) return false;
      if (d.riverCells[r * NX + c] || !d.active[r * NX + c]) return false;
    }
  }
  return true;
}

/** The most permeable cell between two columns that is at least `clearance` cells from the river and the valley sides. */
function bestSite(d: DemoRasters, fromCol: number, toCol: number, clearance: number): { row: number; col: number } {
  let best: { row: number; col: number } | null = null;
  let bestK = -Infinity;
  for (let col = fromCol; col <= toCol; col++) {
    for (let row = 0; row < NY; row++) {
      const k = d.conductivity[row * NX + col]!;
      if (k > bestK && clearOfRiver(d, row, col, clearance)) {
        best = { row, col };
        bestK = k;
      }
    }
  }
  if (!best) throw new Error(`demo generator: no site between columns ${fromCol} and ${toCol}`);
  return best;
}

/** The cell nearest to (row, col), searching outwards, that is at least `clearance` cells from the river and the valley sides. */
function siteNear(d: DemoRasters, row: number, col: number, clearance: number): { row: number; col: number } {
  for (let radius = 0; radius < 40; radius++) {
    for (let r = row - radius; r <= row + radius; r++) {
      for (let c = col - radius; c <= col + radius; c++) {
        if (Math.max(Math.abs(r - row), Math.abs(c - col)) !== radius) continue;
        if (clearOfRiver(d, r, c, clearance)) return { row: r, col: c };
      }
    }
  }
  throw new Error(`demo generator: no clear site near row ${row}, col ${col}`);
}

/** Map coordinates inside a cell, a little off its centre (as real well positions are), rounded to the metre. */
function pointIn(cell: { row: number; col: number }, dx: number, dy: number): { x: number; y: number } {
  return { x: X0 + (cell.col + 0.5) * CELL + dx, y: Y0 - (cell.row + 0.5) * CELL + dy };
}

/** Map coordinates of a fractional (row, col) cell position's centre point. */
function mapPoint(row: number, col: number): { x: number; y: number } {
  return { x: X0 + (col + 0.5) * CELL, y: Y0 - (row + 0.5) * CELL };
}

/**
 * The river as three GeoJSON lines (reaches) along the meander riverRow(col), with a stage and a bed bottom per
 * vertex: natural stage falling linearly along the river, the middle reach held WEIR_RAISE above it by an invented
 * mill weir at its downstream end (so that it stands above the aquifer and loses water to it).
 */
function riverReaches(toLonLat: ReturnType<typeof makeTransform>): object {
  const lastCol = NX - 5;
  const natural = (col: number) => RIVER_STAGE_UPSTREAM + ((RIVER_STAGE_DOWNSTREAM - RIVER_STAGE_UPSTREAM) * col) / lastCol;
  const spans: Array<{ name: string; from: number; to: number; raise: (col: number) => number }> = [
    { name: 'upper reach', from: 0, to: REACH_ENDS[0]!, raise: () => 0 },
    // The weir's pool: a level surface WEIR_RAISE above the natural stage at the weir, back to where the natural stage reaches it.
    {
      name: 'impounded reach',
      from: REACH_ENDS[0]!,
      to: REACH_ENDS[1]!,
      raise: (col) => Math.max(0, natural(REACH_ENDS[1]!) + WEIR_RAISE - natural(col)),
    },
    { name: 'lower reach', from: REACH_ENDS[1]!, to: lastCol, raise: () => 0 },
  ];
  const features = spans.map((span, k) => {
    const coordinates: number[][] = [];
    const stage: number[] = [];
    const bed: number[] = [];
    for (let col = span.from; col <= span.to; col++) {
      // The first vertex sits on the west edge so that the river enters the model there.
      const at = mapPoint(riverRow(col), col);
      const v = toLonLat.forward(col === 0 ? X0 + 1 : at.x, at.y, 'river');
      coordinates.push([round(v.x, 7), round(v.y, 7)]);
      const h = round(natural(col) + span.raise(col), 2);
      stage.push(h);
      bed.push(round(h - RIVER_BED_DEPTH, 2));
    }
    return {
      type: 'Feature',
      id: `reach-${k + 1}`,
      properties: { name: span.name, stage, bed },
      geometry: { type: 'LineString', coordinates },
    };
  });
  return { type: 'FeatureCollection', features };
}

async function main(): Promise<void> {
  const here = dirname(fileURLToPath(import.meta.url));
  const outDir = resolve(process.argv[2] ?? join(here, '..', '..', 'data'));
  mkdirSync(outDir, { recursive: true });
  const d = buildRasters();

  const description = 'Talvorin valley demo (invented data)';
  writeFileSync(
    join(outDir, 'conductivity.tif'),
    encodeFloat32GeoTiff(grid, d.conductivity, { description: `${description}: hydraulic conductivity, m/d` }),
  );
  writeFileSync(
    join(outDir, 'thickness.tif'),
    encodeFloat32GeoTiff(grid, d.thickness, { description: `${description}: saturated thickness, m` }),
  );
  const toLonLat = makeTransform(32633, 4326);
  writeFileSync(join(outDir, 'river.geojson'), `${JSON.stringify(riverReaches(toLonLat), null, 2)}\n`);

  // Supply wells where the channel is most permeable, at least 8 cells (400 m) from the river; observation wells
  // a few hundred metres from them, and one upstream away from pumping.
  const pw1 = bestSite(d, 55, 85, 8);
  const pw2 = bestSite(d, 150, 180, 8);
  const pw3 = bestSite(d, 105, 130, 8);
  const ob1 = siteNear(d, pw1.row - 5, pw1.col + 4, 3);
  const ob2 = siteNear(d, pw2.row + 6, pw2.col - 6, 3);
  const ob3 = siteNear(d, Math.round(valleyAxis(30)) - 25, 30, 3);
  const at = (cell: { row: number; col: number }, dx: number, dy: number) => pointIn(cell, dx, dy);
  const wells = [
    { id: 'PW-1', ...at(pw1, 7, -4), rate: -1200 },
    { id: 'PW-2', ...at(pw2, -6, 9), rate: -800 },
  ];
  const observationPoints = [
    { id: 'OB-1', ...at(ob1, 3, 5) },
    { id: 'OB-2', ...at(ob2, -8, -2) },
    { id: 'OB-3', ...at(ob3, 11, 6) },
  ];

  // Receptors: a neighbour's farm well between the new well PW-3 and the river, and the edge of a wetland
  // downstream; compare reports the drawdown there.
  const farm = siteNear(d, pw3.row + 7, pw3.col + 9, 2);
  const wetland = siteNear(d, Math.round(valleyAxis(215)) + 18, 215, 2);
  const receptors = [
    { id: 'farm-well', ...at(farm, 4, -6) },
    { id: 'wetland-edge', ...at(wetland, -10, 12) },
  ];

  // A flooded gravel pit on the south side of the valley, drawn as a GeoJSON polygon (WGS 84, RFC 7946) and held
  // at its surveyed water level: a fixed head from a shape.
  const pit = siteNear(d, Math.round(valleyAxis(185)) + 30, 185, 6);
  const centre = pointIn(pit, 0, 0);
  const ring: number[][] = [];
  for (let k = 0; k <= 12; k++) {
    const angle = (2 * Math.PI * (k % 12)) / 12;
    const radius = k % 2 === 0 ? 190 : 150; // a lobed outline, as pits are dug
    const v = toLonLat.forward(centre.x + radius * 1.4 * Math.cos(angle), centre.y + radius * Math.sin(angle), 'gravel pit');
    ring.push([round(v.x, 7), round(v.y, 7)]);
  }
  const pitLake = {
    type: 'FeatureCollection',
    features: [
      {
        type: 'Feature',
        id: 'pit-1',
        properties: { name: 'gravel pit lake', level: PIT_LAKE_LEVEL },
        geometry: { type: 'Polygon', coordinates: [ring] },
      },
    ],
  };
  writeFileSync(join(outDir, 'gravel_pit.geojson'), `${JSON.stringify(pitLake, null, 2)}\n`);

  // A field-drain ditch in the farmland on the far side of PW-1 from the river, 600 m from the well, 2 km long.
  const side = pw1.row > riverRow(pw1.col) ? 1 : -1;
  const ditchCols = [pw1.col - 20, pw1.col - 7, pw1.col + 6, pw1.col + 20];
  const ditchRows = ditchCols.map((_col, k) => pw1.row + side * (12 + (k % 2)));
  ditchCols.forEach((col, k) => {
    if (!clearOfRiver(d, ditchRows[k]!, col, 2))
      throw new Error(`demo generator: the ditch vertex at row ${ditchRows[k]}, col ${col} is off the valley floor`);
  });
  const ditchLine = (level: number[]) => ({
    type: 'FeatureCollection',
    features: [
      {
        type: 'Feature',
        id: 'ditch-1',
        properties: { name: 'field-drain ditch', level },
        geometry: {
          type: 'LineString',
          coordinates: ditchCols.map((col, k) => {
            const v = toLonLat.forward(mapPoint(ditchRows[k]!, col).x, mapPoint(ditchRows[k]!, col).y, 'ditch');
            return [round(v.x, 7), round(v.y, 7)];
          }),
        },
      },
    ],
  });

  const scenario = (observed: number[], withDitch: boolean) => ({
    title: 'Talvorin valley wellfield (invented demo), baseline',
    units: { length: 'm', time: 'd' },
    aquifer: { conductivity: 'conductivity.tif', thickness: 'thickness.tif', anisotropy: 1.0, porosity: POROSITY },
    fixedHeads: DEMO_FIXED_HEADS,
    headDependent: [
      DEMO_RIVER,
      ...(withDitch
        ? [
            {
              name: 'field-drains',
              kind: 'drain',
              shape: 'field_drain.geojson',
              headProperty: 'level',
              leakance: DITCH_LEAKANCE,
              width: DITCH_WIDTH,
            },
          ]
        : []),
    ],
    recharge: RECHARGE,
    wells,
    observations: observationPoints.map((o, k) => ({ ...o, head: observed[k]! })),
    receptors,
    solver: { method: 'auto', tolerance: 1e-10 },
    // 1-year and 10-year time-of-travel zones plus the steady capture zone of every supply well, and where water
    // from a (invented) fuel spill at a farmyard upstream of PW-1 goes.
    tracking: { captureTimes: [365, 3650], particlesPerWell: 24, points: [{ id: 'spill-site', ...SPILL_SITE }] },
    variants: [
      {
        name: 'expanded',
        title: 'Talvorin valley wellfield (invented demo), expanded abstraction',
        wells: [
          { id: 'PW-1', rate: -1600 },
          { id: 'PW-3', ...at(pw3, -3, -7), rate: -1500 },
        ],
      },
    ],
    // `piezomap ensemble`: 200 realisations of ln K (sd 0.5, correlated over 1.5 km along the valley, 0.8 km across).
    ensemble: {
      realisations: 200,
      seed: 2026,
      logConductivity: { sd: 0.5, correlationLength: [1500, 800], model: 'exponential' },
      drawdownThresholds: [0.1, 0.2],
      percentiles: [5, 50, 95],
    },
  });

  // Solve once without the ditch to set its level DITCH_DEPTH below the head there, so that it runs in the baseline.
  const scenarioPath = join(outDir, 'valley.json');
  writeFileSync(scenarioPath, `${JSON.stringify(scenario([100, 100, 100], false), null, 2)}\n`);
  const before = await solveScenarioFile(scenarioPath);
  if (!before.stats.converged) throw new Error('demo generator: the baseline without the ditch did not converge');
  const ditchLevels = ditchCols.map((col, k) => round(before.head[ditchRows[k]! * NX + col]! - DITCH_DEPTH, 2));
  writeFileSync(join(outDir, 'field_drain.geojson'), `${JSON.stringify(ditchLine(ditchLevels), null, 2)}\n`);

  // Solve the baseline once to invent observed heads that a field campaign could plausibly have measured.
  writeFileSync(scenarioPath, `${JSON.stringify(scenario([100, 100, 100], true), null, 2)}\n`);
  const result = await solveScenarioFile(scenarioPath);
  if (!result.stats.converged) throw new Error('demo generator: the baseline did not converge');
  const deviation = normal(seeded(SEED + 1));
  const observed = result.observations.map((o) => round(o.simulated + 0.25 * deviation(), 2));
  writeFileSync(scenarioPath, `${JSON.stringify(scenario(observed, true), null, 2)}\n`);

  let activeCells = 0;
  let riverCells = 0;
  for (let p = 0; p < NX * NY; p++) {
    activeCells += d.active[p]!;
    riverCells += d.riverCells[p]!;
  }
  writeFileSync(join(outDir, 'README.md'), readme(activeCells, riverCells, result.head, ditchLevels));
  await writeUnconfinedValley(outDir, d, wells, receptors, at(pw3, -3, -7));
  process.stdout.write(
    `make-demo-data: wrote conductivity.tif, thickness.tif, river.geojson, field_drain.geojson, gravel_pit.geojson, valley.json, README.md to ${outDir}\n` +
      `  ${activeCells} active cells, ${riverCells} river cells; baseline head ${range(result.head)} m; ` +
      `observed heads ${observed.join(', ')} m\n`,
  );
}

/**
 * The second demo: the same valley fill as an unconfined aquifer on a bedrock floor (bottom.tif), for the water-table
 * solve (aquifer.type "unconfined"). The floor lies 3 m above the confined demo's base along the axis and rises
 * towards the valley sides, so the saturated thickness is about 30 m in the channel and a few metres at the margins,
 * where the expanded abstraction dries cells.
 */
async function writeUnconfinedValley(
  outDir: string,
  d: DemoRasters,
  wells: Array<{ id: string; x: number; y: number; rate: number }>,
  receptors: Array<{ id: string; x: number; y: number }>,
  pw3: { x: number; y: number },
): Promise<void> {
  const n = NX * NY;
  const bottom = new Float64Array(n).fill(Number.NaN);
  for (let row = 0; row < NY; row++) {
    for (let col = 0; col < NX; col++) {
      const p = row * NX + col;
      if (!d.active[p]) continue;
      const offAxis = (row - valleyAxis(col)) / valleyHalfWidth(col);
      // the water table falls along the valley roughly as the river does
      const trend = RIVER_STAGE_UPSTREAM + ((RIVER_STAGE_DOWNSTREAM - RIVER_STAGE_UPSTREAM) * col) / (NX - 1);
      bottom[p] = round(trend - d.thickness[p]! + 3 + 16 * offAxis ** 4, 2);
    }
  }
  writeFileSync(
    join(outDir, 'bottom.tif'),
    encodeFloat32GeoTiff(grid, bottom, { description: 'Talvorin valley demo (invented data): bedrock floor of the valley fill, m' }),
  );
  const scenario = {
    title: 'Talvorin valley fill, unconfined (invented demo), baseline',
    units: { length: 'm', time: 'd' },
    aquifer: { type: 'unconfined', conductivity: 'conductivity.tif', bottom: 'bottom.tif', anisotropy: 1.0 },
    fixedHeads: DEMO_FIXED_HEADS,
    // The same river as the confined demo: a head-dependent boundary with its bed resistance and bed bottom.
    headDependent: [DEMO_RIVER],
    recharge: RECHARGE,
    wells,
    receptors,
    solver: { method: 'auto', tolerance: 1e-10 },
    variants: [
      {
        name: 'expanded',
        title: 'Talvorin valley fill, unconfined (invented demo), expanded abstraction',
        wells: [
          { id: 'PW-1', rate: -1600 },
          { id: 'PW-3', ...pw3, rate: -1500 },
        ],
      },
    ],
  };
  const scenarioPath = join(outDir, 'valley-unconfined.json');
  writeFileSync(scenarioPath, `${JSON.stringify(scenario, null, 2)}\n`);
  const result = await solveScenarioFile(scenarioPath);
  if (!result.stats.converged || result.outer.stopReason !== 'settled')
    throw new Error('demo generator: the unconfined baseline did not settle');
  process.stdout.write(`make-demo-data: wrote bottom.tif, valley-unconfined.json (${result.outer.iterations} outer iterations)\n`);
}

function range(values: Float64Array): string {
  let min = Infinity;
  let max = -Infinity;
  for (const v of values) {
    if (v < min) min = v;
    if (v > max) max = v;
  }
  return `${min.toFixed(2)} to ${max.toFixed(2)}`;
}

function readme(activeCells: number, riverCells: number, head: Float64Array, ditchLevels: number[]): string {
  return `# Demo data: the Talvorin valley (invented)

Everything here is invented for demonstration: the valley, its name, the wells and the measurements. No real place,
aquifer or data set is depicted. The files are generated by \`scripts/make-demo-data.ts\` (\`npm run make-demo-data\`)
from a fixed random seed, so they are the same on every run.

## The scenario (\`valley.json\`)

A confined sand-and-gravel aquifer fills a valley floor 12 km long, draining from west to east.

| item | value |
| --- | --- |
| grid | 240 columns x 180 rows, 50 m cells, EPSG:32633 (UTM zone 33N), upper-left corner x = 500000, y = 4110000 (invented position) |
| active cells | ${activeCells} (valley floor); the valley sides and a bedrock knoll inside the valley are inactive (nodata) |
| \`conductivity.tif\` | hydraulic conductivity K, m/d: a spatially correlated log-normal field, about 30-80 m/d in the sand and gravel channel along the valley axis, about 1-5 m/d on the silty margins |
| \`thickness.tif\` | aquifer thickness, m: 15 m at the valley margins to 40 m along the axis |
| \`river.geojson\` | the river as a head-dependent boundary (kind \`river\`): three GeoJSON lines (WGS 84), the \`upper reach\`, the \`impounded reach\` and the \`lower reach\`, meandering along the valley over about ${riverCells} cells. Per-vertex properties \`stage\` (falling from ${RIVER_STAGE_UPSTREAM.toFixed(1)} m at the west edge to ${RIVER_STAGE_DOWNSTREAM.toFixed(1)} m near the east edge; the impounded reach held as a level pool up to ${WEIR_RAISE} m above its natural stage by an invented mill weir, so that it loses water to the aquifer) and \`bed\` (the bottom of the bed sediments, ${RIVER_BED_DEPTH} m below the stage). Bed leakance ${RIVER_LEAKANCE} /d, wetted width ${RIVER_WIDTH} m: conductance = leakance x length in the cell x width (about ${RIVER_LEAKANCE * CELL * RIVER_WIDTH} m2/d per 50 m of river) |
| \`field_drain.geojson\` | a field-drain ditch (kind \`drain\`, outflow only) about 600 m from PW-1 on the side away from the river, level ${ditchLevels.join(', ')} m at its vertices (property \`level\`); leakance ${DITCH_LEAKANCE} /d, width ${DITCH_WIDTH} m |
| downstream edge | fixed head ${EAST_EDGE_HEAD.toFixed(1)} m on the active cells of the east edge |
| \`gravel_pit.geojson\` | a flooded gravel pit on the south side of the valley (GeoJSON polygon in WGS 84), fixed at its water level ${PIT_LAKE_LEVEL.toFixed(1)} m (property \`level\`) |
| recharge | ${RECHARGE} m/d over the whole valley floor |
| porosity | effective porosity ${POROSITY} (sand and gravel), for particle velocities |
| tracking | 1-year (365 d) and 10-year (3650 d) time-of-travel zones and the steady capture zone of each supply well, with 24 backward pathlines per well; a forward track from \`spill-site\` (an invented farmyard fuel spill at x = ${SPILL_SITE.x}, y = ${SPILL_SITE.y}) |
| supply wells | PW-1 (-1200 m3/d) and PW-2 (-800 m3/d) in the channel, at least 400 m from the river |
| observation wells | OB-1 near PW-1, OB-2 near PW-2, OB-3 upstream, away from pumping |
| receptors | \`farm-well\`, a neighbour's well between the planned PW-3 and the river, and \`wetland-edge\` downstream: \`compare\` reports the drawdown there |
| variant \`expanded\` | PW-1 raised to -1600 m3/d and a new well PW-3 at -1500 m3/d |

The observed heads in \`valley.json\` are invented as well: the baseline was solved with piezomap and each
observation received the simulated head plus a seeded random deviation (standard deviation 0.25 m), rounded to the
centimetre. The baseline head ranges ${range(head)} m.

## Try it

\`\`\`
piezomap inspect data/valley.json
piezomap solve data/valley.json -o out/
piezomap compare data/valley.json -o out/
piezomap demo
\`\`\`

## Caution

${CAUTION}
`;
}

main().catch((thrown: unknown) => {
  process.stderr.write(`make-demo-data: ${thrown instanceof Error ? thrown.message : String(thrown)}\n`);
  process.exitCode = 1;
});
