import { describe, expect, it } from 'vitest';
import { polygonContains } from 'd3-polygon';
import { captureZones, signedArea, type CaptureResult, type CaptureZoneFeature } from '../../../src/analysis/tracking/capture.js';
import { endRasters, trackSeeds } from '../../../src/analysis/tracking/rasters.js';
import { END_TIME_LIMIT, PathBuffer, Tracker } from '../../../src/analysis/tracking/pollock.js';
import { trackPoints } from '../../../src/analysis/tracking/points.js';
import { fixedColumn, makeModel, testGrid, well } from '../../helpers/model.js';
import { seededUniform } from '../../../src/random.js';
import { solveForTracking, type Solved } from './solved.js';

// Uniform regional flow with one pumping well (confined, K = 10 m/d, b = 10 m, gradient 0.001 -> q = 0.01 m/d).
const K = 10,
  b = 10,
  i = 0.001,
  q = K * i,
  Q = 40,
  dx = 10;
// The no-flow north and south edges 2 km from the well act as image wells that narrow the zone; at 1.5 km
// upgradient that is a few metres (checked against 1 km edges, where it reached 13 m), inside the limits below.
const NX = 401,
  NY = 401,
  WELL_ROW = 200,
  WELL_COL = 250;
let uniformCache: { solved: Solved; capture: CaptureResult } | null = null;
function uniformWithWell() {
  if (uniformCache) return uniformCache;
  const grid = testGrid(NX, NY, dx);
  const drop = i * (NX - 1) * dx;
  const model = makeModel(grid, {
    conductivity: new Float64Array(NX * NY).fill(K),
    thickness: b,
    fixedHeads: [fixedColumn(grid, 0, 100, 'west'), fixedColumn(grid, NX - 1, 100 - drop, 'east')],
    wells: [well(grid, 'W1', WELL_ROW, WELL_COL, -Q)],
  });
  const solved = solveForTracking(model, 0.25);
  const capture = captureZones(solved.field, solved.input.stopLabel, {
    captureTimes: [2000, 10000, 40000],
    particlesPerWell: 24,
    rasters: { potential: solved.head },
  });
  uniformCache = { solved, capture };
  return uniformCache;
}

/** Half-width y of the Javandel & Tsang (1986) capture curve at distance L upgradient: L = -y / tan(2 pi b q y / Q). */
function javandelTsangHalfWidth(L: number): number {
  const Y = Q / (2 * b * q);
  let lo = Y / 2,
    hi = Y * (1 - 1e-12);
  for (let k = 0; k < 200; k++) {
    const mid = (lo + hi) / 2;
    if (-mid / Math.tan((Math.PI * mid) / Y) < L) lo = mid;
    else hi = mid;
  }
  return (lo + hi) / 2;
}

/** Width of the captured band in one column (cells whose centre is captured, times dy). */
function capturedWidth(capture: CaptureResult, col: number): number {
  let count = 0;
  for (let r = 0; r < NY; r++) if (capture.capturingWell[r * NX + col] === 0) count++;
  return count * dx;
}

describe('capture zone of one well in uniform flow', () => {
  it('has its stagnation point at Q / (2 pi b q) downgradient (Grubb 1993; Javandel & Tsang 1986)', () => {
    const { solved } = uniformWithWell();
    const v = solved.field.velocity;
    // Along the well's row east of it: the cell whose west face flows west (to the well) and east face east.
    let xs = NaN;
    for (let col = WELL_COL + 1; col < NX; col++) {
      const p = WELL_ROW * NX + col;
      const vw = v[4 * p]!,
        ve = v[4 * p + 1]!;
      if (vw < 0 && ve > 0) {
        xs = (col - WELL_COL - 0.5) * dx + (-vw / (ve - vw)) * dx; // Pollock's linear velocity vanishes here
        break;
      }
    }
    const expected = Q / (2 * Math.PI * b * q); // 63.7 m
    // Limit: half a cell. The well is a cell-sized sink in the difference scheme, so its field is exact only
    // beyond about a cell; the stagnation point (6 cells away) is placed by a linear velocity inside its cell.
    expect(Math.abs(xs - expected)).toBeLessThan(dx / 2);
  });

  it('is Q / (2 b q) wide across the well and tends to Q / (b q) upgradient (Grubb 1993; Javandel & Tsang 1986)', () => {
    const { capture } = uniformWithWell();
    // Limit: one cell. A cell counts when its centre is captured, so each side of the band is placed to within
    // half a cell (dy / 2): the width to within dy.
    const acrossWell = capturedWidth(capture, WELL_COL);
    expect(Math.abs(acrossWell - Q / (2 * b * q))).toBeLessThanOrEqual(dx);
    const upgradient = 1500; // m, 150 cells west of the well
    const far = capturedWidth(capture, WELL_COL - upgradient / dx);
    expect(Math.abs(far - 2 * javandelTsangHalfWidth(upgradient))).toBeLessThanOrEqual(dx);
    expect(far).toBeLessThan(Q / (b * q)); // approaches the limit width from below
    expect(far).toBeGreaterThan(0.9 * (Q / (b * q)));
  });

  it('nests: zone(t1) inside zone(t2) inside the steady zone, as rasters and as polygons', () => {
    const { capture } = uniformWithWell();
    const zones = capture.zones.filter((z) => z.properties.well === 'W1');
    expect(zones.map((z) => z.properties.time)).toEqual([2000, 10000, 40000, null]);
    for (let k = 1; k < zones.length; k++) {
      expect(zones[k]!.properties.area).toBeGreaterThan(zones[k - 1]!.properties.area);
    }
    // Polygon containment (d3-polygon as the outside reference), on a lattice of points off the cell edges.
    const { x0, y0 } = uniformWithWell().solved.field;
    let insideInner = 0;
    for (let r = WELL_ROW - 40; r < WELL_ROW + 40; r++) {
      for (let c = 80; c < 270; c++) {
        const pt: [number, number] = [x0 + (c + 0.31) * dx, y0 - (r + 0.67) * dx];
        for (let k = 0; k + 1 < zones.length; k++) {
          if (inZone(zones[k]!, pt)) {
            insideInner++;
            expect(inZone(zones[k + 1]!, pt)).toBe(true);
          }
        }
      }
    }
    expect(insideInner).toBeGreaterThan(100);
  });

  it('holds within time t the water pumped in t: area n b = Q t (volume balance)', () => {
    // Steady flow without recharge: the pore water inside the t-zone is what the well pumps in t, so
    // area = Q t / (n b) whatever the flow field (the basis of the calculated-fixed-radius method,
    // r = sqrt(Q t / (pi n b)), US EPA 1987 wellhead protection guidance; citation from memory).
    const { capture } = uniformWithWell();
    const n = 0.25;
    for (const zone of capture.zones.filter((z) => z.properties.time !== null)) {
      const t = zone.properties.time!;
      const expected = (Q * t) / (n * b);
      // Limit: the zone edge cells (cells the outline passes through) counted half, as in the recharge check;
      // for a near-circular zone of area A that is about the perimeter sqrt(4 pi A) / dx cells.
      const edgeCells = Math.sqrt(4 * Math.PI * expected) / dx;
      expect(Math.abs(zone.properties.cellArea - expected)).toBeLessThanOrEqual((edgeCells / 2) * dx * dx);
      expect(Math.abs(zone.properties.area - expected)).toBeLessThanOrEqual((edgeCells / 2) * dx * dx);
    }
  });

  it("writes RFC 7946 rings (exterior counter-clockwise) through the caller's projection", () => {
    const { solved } = uniformWithWell();
    const shift = (x: number, y: number): [number, number] => [x - 500000, y - 4100000];
    const capture = captureZones(
      solved.field,
      solved.input.stopLabel,
      { captureTimes: [2000], particlesPerWell: 4, project: shift },
      uniformWithWell().capture.ends,
    );
    const zone = capture.zones[0]!;
    expect(zone.geometry?.type).toBe('Polygon');
    const rings = (zone.geometry as { coordinates: number[][][] }).coordinates;
    expect(signedArea(rings[0]!)).toBeGreaterThan(0);
    // The well sits at the local origin's (col 250.5, row 200.5) * 10 m: inside the projected ring.
    expect(polygonContains(rings[0] as [number, number][], [(WELL_COL + 0.5) * dx, -(WELL_ROW + 0.5) * dx])).toBe(true);
    expect(capture.pathlines[0]!.geometry.coordinates[0]![0]!).toBeLessThan(10000);
  });

  it("lets a particle released in the well cell's upstream neighbour end in that well", () => {
    const { solved } = uniformWithWell();
    const { x0, y0 } = solved.field;
    const [track] = trackPoints(solved.field, [{ id: 'p', x: x0 + (WELL_COL - 0.5) * dx, y: y0 - (WELL_ROW + 0.5) * dx }]);
    expect(track!.endsAt).toBe('W1');
    expect(track!.endReason).toBe('well');
    // Half a cell at seepage velocity about q / n towards the well (faster close to it): under n (dx/2) / q.
    expect(track!.travelTime).toBeGreaterThan(0);
    expect(track!.travelTime).toBeLessThan((0.25 * dx) / 2 / q);
  });

  it('draws backward pathlines from the well to where its water comes from', () => {
    const { capture } = uniformWithWell();
    expect(capture.pathlines).toHaveLength(24);
    for (const line of capture.pathlines) {
      expect(line.properties.direction).toBe('backward');
      // All water of this well enters through the west boundary (no recharge).
      expect(line.properties.endsAt).toBe('west');
      expect(line.properties.travelTime).toBeGreaterThan(0);
    }
  });
});

/** Point in a Polygon / MultiPolygon with holes (even-odd over rings, d3-polygon per ring). */
function inZone(zone: CaptureZoneFeature, pt: [number, number]): boolean {
  const g = zone.geometry;
  if (!g) return false;
  const polygons = g.type === 'Polygon' ? [g.coordinates] : g.coordinates;
  return polygons.some((rings) => {
    const [outer, ...holes] = rings;
    return polygonContains(outer as [number, number][], pt) && !holes.some((h) => polygonContains(h as [number, number][], pt));
  });
}

describe('capture zones fed by recharge only', () => {
  // No-flow edges, a river (fixed head) on the east column that only gains, recharge the only source.
  const NXR = 60,
    NYR = 40,
    DX = 20,
    R = 0.001;
  const rates = { A: 50, B: 30 };
  function rechargeModel(): Solved {
    const grid = testGrid(NXR, NYR, DX);
    const model = makeModel(grid, {
      conductivity: new Float64Array(NXR * NYR).fill(5),
      thickness: 20,
      recharge: R,
      fixedHeads: [fixedColumn(grid, NXR - 1, 50, 'river')],
      wells: [well(grid, 'A', 12, 20, -rates.A), well(grid, 'B', 28, 35, -rates.B)],
    });
    return solveForTracking(model, 0.2);
  }

  it('captures an area whose recharge equals the well rate, within the cell-resolution limit (water balance)', () => {
    const solved = rechargeModel();
    const { field } = solved;
    const capture = captureZones(field, solved.input.stopLabel, { particlesPerWell: 0, rasters: { exact: true } });
    // B passes some water on (a weak sink), A takes all that reaches it: only B is named.
    expect(capture.warnings.filter((w) => w.includes('weak-sink'))).toHaveLength(1);
    expect(capture.warnings[0]).toMatch(/B \(takes \d+ % of the water entering its cell\)/);
    expect(capture.warnings[0]).not.toMatch(/\bA \(/);
    expect(capture.ends.stalled).toBe(0);
    const cellArea = DX * DX;
    capture.wells.forEach((w, k) => {
      // Water the well's cell takes in: all of it is the well's where the cell is a strong sink (rate Q). Where
      // some water passes the cell (a weak sink; by the default rule it stops everything entering) the zone holds
      // all water entering the cell: its face inflow plus its own recharge, face inflow = taken / fraction.
      const cell = solved.input.stopLabel.indexOf(w.label);
      const weak = field.weakSinks.find((s) => s.cell === cell && s.direction === 'forward');
      const ownRecharge = R * DX * DX;
      const rate = weak ? -field.netSource[cell]! / weak.fraction + ownRecharge : rates[w.id as 'A' | 'B'];
      let cells = 0;
      let edgeCells = 0; // cells whose own or a neighbour's capture differs: the only ones a centre can misassign
      for (let r = 0; r < NYR; r++) {
        for (let c = 0; c < NXR; c++) {
          const p = r * NXR + c;
          const mine = capture.capturingWell[p] === k;
          if (mine) cells++;
          const differs = [
            [0, 1],
            [0, -1],
            [1, 0],
            [-1, 0],
          ].some(([di, dj]) => {
            const rr = r + di!,
              cc = c + dj!;
            return rr >= 0 && rr < NYR && cc >= 0 && cc < NXR && (capture.capturingWell[rr * NXR + cc] === k) !== mine;
          });
          if (differs) edgeCells++;
        }
      }
      // A cell is counted whole when its centre is captured, so only cells the zone edge crosses can be
      // misassigned; half of them on average: the limit is edgeCells / 2 cells of area.
      expect(Math.abs(cells * cellArea * R - rate)).toBeLessThanOrEqual((edgeCells / 2) * cellArea * R);
      // With 4 x 4 seeds per cell the same check tightens about fourfold (it converges with the seed spacing).
      const fine = trackSeeds(field, { col0: 0, row0: 0, cols: NXR, rows: NYR, subdivisions: 4 });
      let seeds = 0;
      for (let s = 0; s < fine.label.length; s++) if (fine.label[s] === w.label) seeds++;
      const fineError = Math.abs((seeds * cellArea * R) / 16 - rate);
      expect(fineError).toBeLessThanOrEqual((edgeCells / 8) * cellArea * R);
      expect(w.refined).toBe(false);
    });
  });

  it('outlines a well that captures few cells from sub-cell seeds, with its recharge balance', () => {
    const grid = testGrid(NXR, NYR, DX);
    const model = makeModel(grid, {
      conductivity: new Float64Array(NXR * NYR).fill(5),
      thickness: 20,
      recharge: R,
      fixedHeads: [fixedColumn(grid, NXR - 1, 50, 'river')],
      // Near the west no-flow edge (a water divide), where little water passes.
      wells: [well(grid, 'A', 12, 20, -rates.A), well(grid, 'small', 30, 1, -2)],
    });
    const solved = solveForTracking(model, 0.2);
    const capture = captureZones(solved.field, solved.input.stopLabel, { particlesPerWell: 8, rasters: { exact: true } });
    // Some water still passes the well cell (about a tenth): a weak sink, which by the default rule stops all water
    // entering the cell. So the zone is the cell itself plus the area whose recharge enters it:
    // (face inflow) / R = (water the well takes net of the cell's own recharge / fraction) / R.
    const weak = solved.field.weakSinks.filter((w) => w.name === 'small' && w.direction === 'forward');
    expect(weak).toHaveLength(1);
    expect(weak[0]!.stops).toBe(true);
    const faceInflow = -solved.field.netSource[weak[0]!.cell]! / weak[0]!.fraction;
    const small = capture.wells.find((w) => w.id === 'small')!;
    expect(small.capturedCells).toBeLessThan(64);
    expect(small.refined).toBe(true);
    const zone = capture.zones.find((z) => z.properties.well === 'small' && z.properties.time === null)!;
    // About 2 m3/d at 0.001 m/d: some 2000 m2, 5 cells. Seeds 4 x 4 per cell: edge error within half a seed
    // spacing along a perimeter of about sqrt(4 pi A) (as above, with the seed spacing in place of the cell size).
    const expected = faceInflow / R + DX * DX;
    const seedSpacing = DX / 4;
    expect(Math.abs(zone.properties.cellArea - expected)).toBeLessThanOrEqual(
      (Math.sqrt(4 * Math.PI * expected) / seedSpacing / 2) * seedSpacing * seedSpacing,
    );
    expect(zone.properties.area).toBeGreaterThan(0);
  });

  it('agrees with exact tracking when finished tracks are reused (FaceCache), apart from cells at a zone edge', () => {
    const solved = rechargeModel();
    const exact = endRasters(solved.field, { exact: true });
    const cached = endRasters(solved.field, { potential: solved.head, exactCrossings: 4 });
    let differ = 0;
    for (let p = 0; p < exact.label.length; p++) {
      if (exact.label[p] !== cached.label[p]) differ++;
      else if (exact.time[p]! <= 0) expect(cached.time[p]).toBe(exact.time[p]);
    }
    expect(differ).toBeLessThanOrEqual(0.01 * exact.label.length);
  });
});

describe('pathlines in a heterogeneous field', () => {
  // Random conductivity, an inactive block (no-flow faces around it), one well.
  const N = 40,
    DX = 25;
  function heterogeneous(): Solved {
    const grid = testGrid(N, N, DX);
    const rnd = seededUniform(11);
    const conductivity = new Float64Array(N * N);
    for (let p = 0; p < N * N; p++) conductivity[p] = Math.exp(Math.log(5) + 1.5 * (rnd() - 0.5));
    for (let r = 15; r < 25; r++) for (let c = 18; c < 22; c++) conductivity[r * N + c] = NaN;
    const model = makeModel(grid, {
      conductivity,
      thickness: 15,
      fixedHeads: [fixedColumn(grid, 0, 30, 'west'), fixedColumn(grid, N - 1, 25, 'east')],
      wells: [well(grid, 'W', 20, 30, -60)],
    });
    return solveForTracking(model, 0.15);
  }

  it('never cross a no-flow edge: every segment lies in one active cell', () => {
    const { field } = heterogeneous();
    const tracker = new Tracker(field);
    const path = new PathBuffer();
    let segments = 0;
    for (let p = 0; p < N * N; p += 3) {
      if (!field.active[p]) continue;
      tracker.track(p, 0.37 * DX, 0.61 * DX, 1, Infinity, path);
      for (let k = 0; k + 1 < path.count; k++) {
        const mx = (path.data[2 * k]! + path.data[2 * k + 2]!) / 2;
        const my = (path.data[2 * k + 1]! + path.data[2 * k + 3]!) / 2;
        const col = Math.floor((mx - field.x0) / DX);
        const row = Math.floor((field.y0 - my) / DX);
        expect(col >= 0 && col < N && row >= 0 && row < N).toBe(true);
        expect(field.active[row * N + col]).toBe(1);
        segments++;
      }
      expect(tracker.endReason()).not.toBe('edge');
    }
    expect(segments).toBeGreaterThan(1000);
  });

  it('return to the start when run forward, then backward from the end point (to 1e-6 of a cell)', () => {
    const { field } = heterogeneous();
    const tracker = new Tracker(field);
    const back = new Tracker(field);
    let checked = 0;
    for (let p = 1; p < N * N; p += 37) {
      // Not from the west fixed-head column: it is where water enters, so a backward track stops on entering it.
      if (!field.active[p] || p % N === 0) continue;
      const x = 0.23 * DX,
        y = 0.71 * DX;
      tracker.track(p, x, y, 1, 2000);
      const limit = tracker.time; // the time limit, or the arrival time at a well or boundary
      back.track(tracker.cell, tracker.localX, tracker.localY, -1, limit);
      expect(back.reason).toBe(END_TIME_LIMIT);
      expect(back.cell).toBe(p);
      expect(Math.abs(back.localX - x)).toBeLessThan(1e-6 * DX);
      expect(Math.abs(back.localY - y)).toBeLessThan(1e-6 * DX);
      checked++;
    }
    expect(checked).toBeGreaterThan(20);
  });
});
