/**
 * Our one-pass contour tracer (src/analysis/contourTrace.ts behind traceContourLevels) against the reference: the
 * same contour lines traced on d3-contour 4.0.3's marching squares (./contoursReference.ts, the tracer piezomap used
 * before). Equal means the same levels in the same order, the same lines in the same order, each with the same
 * vertices, from the same start, as the same bytes: what makes head-contours.geojson byte-identical.
 */
import { contours as d3Contours } from 'd3-contour';
import { polygonContains } from 'd3-polygon';
import fc from 'fast-check';
import proj4 from 'proj4';
import { describe, expect, it } from 'vitest';
import { contourPlan, contoursToGeoJson, traceContourLevels, type ContourLevel } from '../../src/analysis/contours.js';
import type { Grid } from '../../src/grid.js';
import { referenceContourLevels } from './contoursReference.js';
import { seededUniform } from '../../src/random.js';

const TRANSFORMS = [
  [500000, 10, 0, 4100000, 0, -10],
  [0, 1, 0, 0, 0, 1],
  [1234.5, 0.3, 0, -77.25, 0, -0.7],
] as const;

function makeGrid(nx: number, ny: number, t: (typeof TRANSFORMS)[number] = TRANSFORMS[0]): Grid {
  return { nx, ny, transform: [...t], crs: { epsg: 32633, geographic: false, geoKeys: {} } };
}

/** Small seeded generator (the project's mulberry32), so that a failing case is reproduced from fast-check's seed. */
const random = seededUniform;

/** Values shared by the "steps" fields and the levels: plateaus and single cells exactly at a level (ties). */
const STEPS = [-1.5, -1, -0.5, 0, 0.5, 1, 1.5];

type Kind = 'steps' | 'blobs' | 'smooth' | 'noise' | 'constant' | 'target';

function makeField(
  nx: number,
  ny: number,
  kind: Kind,
  seed: number,
  nanShare: number,
  nanBlock: boolean,
  infinities: boolean,
): Float64Array {
  const rand = random(seed);
  const values = new Float64Array(nx * ny);
  const constant = STEPS[Math.floor(rand() * STEPS.length)]!;
  const [a, b, p, q, offset] = [1 + 2 * rand(), 1 + 2 * rand(), 6 * rand(), 6 * rand(), -2 + 2 * rand()];
  const wells = Array.from({ length: 3 }, () => ({ x: rand() * nx, y: rand() * ny, depth: 3 * rand() }));
  const [cx, cy, band, flips] = [nx / 2 + 4 * rand() - 2, ny / 2 + 4 * rand() - 2, 1.2 + 2 * rand(), 0.03 * rand()];
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      let v: number;
      if (kind === 'steps') v = STEPS[Math.floor(rand() * STEPS.length)]!;
      else if (kind === 'blobs') v = rand() < 0.45 ? 1 : 0;
      else if (kind === 'noise') v = -3 + 6 * rand();
      else if (kind === 'constant') v = constant;
      // Bands round a centre, a few cells flipped: rings nested several deep, holes inside outer rings inside holes.
      else if (kind === 'target') v = STEPS[(Math.floor(Math.hypot(j - cx, i - cy) / band) % 2) + (rand() < flips ? 4 : 3)]!;
      else {
        // Waves with well-like depressions: nested closed lines and holes.
        v = offset + a * Math.sin(j / 4 + p) + b * Math.cos(i / 5 + q);
        for (const w of wells) v -= w.depth / (1 + (j - w.x) ** 2 + (i - w.y) ** 2);
      }
      values[i * nx + j] = v;
    }
  }
  for (let c = 0; c < values.length; c++) if (rand() < nanShare) values[c] = NaN;
  if (nanBlock) {
    const i0 = Math.floor(rand() * ny);
    const j0 = Math.floor(rand() * nx);
    const h = 1 + Math.floor(rand() * (ny / 2));
    const w = 1 + Math.floor(rand() * (nx / 2));
    for (let i = i0; i < Math.min(ny, i0 + h); i++) for (let j = j0; j < Math.min(nx, j0 + w); j++) values[i * nx + j] = NaN;
  }
  if (infinities) {
    values[Math.floor(rand() * values.length)] = Infinity;
    values[Math.floor(rand() * values.length)] = -Infinity;
  }
  return values;
}

/** Exact equality of two traced level lists, byte for byte; returns a description of the first difference. */
function difference(got: ContourLevel[], want: ContourLevel[]): string | null {
  if (got.length !== want.length) return `${got.length} levels instead of ${want.length}`;
  for (let i = 0; i < want.length; i++) {
    const g = got[i]!;
    const w = want[i]!;
    if (!Object.is(g.level, w.level)) return `level ${i}: ${g.level} instead of ${w.level}`;
    if (g.lines.length !== w.lines.length) return `level ${w.level}: ${g.lines.length} lines instead of ${w.lines.length}`;
    for (let l = 0; l < w.lines.length; l++) {
      const a = Buffer.from(g.lines[l]!.buffer, g.lines[l]!.byteOffset, g.lines[l]!.byteLength);
      const b = Buffer.from(w.lines[l]!.buffer, w.lines[l]!.byteOffset, w.lines[l]!.byteLength);
      if (!a.equals(b)) return `level ${w.level}, line ${l}: [${[...g.lines[l]!]}] instead of [${[...w.lines[l]!]}]`;
    }
  }
  return null;
}

const levelArb = fc.oneof(
  fc.constantFrom(...STEPS),
  fc.double({ min: -4, max: 4, noNaN: true }),
  fc.constantFrom(-100, 100, NaN, Infinity, -Infinity, -0, 0.25, -0.75),
);

/** Grid sides 1..40, a single row or column now and then. */
const size = fc.oneof({ arbitrary: fc.constant(1), weight: 1 }, { arbitrary: fc.integer({ min: 1, max: 40 }), weight: 4 });

describe('traceContourLevels (one pass, typed arrays) against the d3-contour reference', () => {
  it('gives the same lines, in the same order, with the same bytes, on random fields', () => {
    let withHoles = 0;
    let withSeveralOuterRings = 0;
    let withNestedHoles = 0;
    fc.assert(
      fc.property(
        size,
        size,
        fc.constantFrom<Kind>('steps', 'blobs', 'smooth', 'target', 'target', 'noise', 'constant'),
        fc.integer(),
        fc.constantFrom(0, 0, 0.05, 0.3),
        fc.boolean(),
        fc.integer({ min: 0, max: 9 }),
        fc.integer({ min: 0, max: TRANSFORMS.length - 1 }),
        fc.array(levelArb, { maxLength: 8 }),
        (nx, ny, kind, seed, nanShare, nanBlock, infinityDraw, t, drawn) => {
          // Bands of 0 and 0.5 nest rings at a level between them.
          const levels = kind === 'target' ? [...drawn, 0.25] : drawn;
          const grid = makeGrid(nx, ny, TRANSFORMS[t]!);
          const values = makeField(nx, ny, kind, seed, nanShare, nanBlock, infinityDraw === 0);
          const want = referenceContourLevels(grid, values, levels);
          const got = traceContourLevels(grid, values, levels);
          const diff = difference(got, want);
          if (diff) throw new Error(`${nx} x ${ny} ${kind} field: ${diff}`);
          // What the reference made of these levels, to check below that the fields reach the hard cases.
          for (const level of levels) {
            if (!Number.isFinite(level)) continue;
            const shape = d3Contours()
              .size([nx, ny])
              .smooth(false)
              .contour(values as unknown as number[], level);
            if (shape.coordinates.some((polygon) => polygon.length > 1)) withHoles++;
            if (shape.coordinates.length > 1) withSeveralOuterRings++;
            // A hole inside two outer rings (an outer ring with holes inside another one's hole): d3-contour gives it to
            // the one that closed first.
            const outer = shape.coordinates.map((polygon) => polygon[0] as Array<[number, number]>);
            const nested = shape.coordinates.some(
              (polygon, j) => polygon.length > 1 && outer.some((ring, i) => i !== j && polygonContains(ring, outer[j]![0]!)),
            );
            if (nested) withNestedHoles++;
          }
        },
      ),
      { numRuns: 400 },
    );
    // The random fields do give holes, several outer rings per level, and holes inside two outer rings (about 10 to 25
    // levels of 400 runs have those).
    expect(withHoles).toBeGreaterThan(50);
    expect(withSeveralOuterRings).toBeGreaterThan(50);
    expect(withNestedHoles).toBeGreaterThanOrEqual(5);
  });

  it('gives the same lines for nested rings and saddles (a target pattern and a checkerboard, levels at and between values)', () => {
    const nx = 13;
    const ny = 11;
    const grid = makeGrid(nx, ny);
    const rings = new Float64Array(nx * ny);
    const checker = new Float64Array(nx * ny);
    for (let i = 0; i < ny; i++) {
      for (let j = 0; j < nx; j++) {
        // Square "target": alternating bands 0/1 around the centre, so rings nest four deep.
        rings[i * nx + j] = Math.max(Math.abs(i - 5), Math.abs(j - 6)) % 2;
        checker[i * nx + j] = (i + j) % 2;
      }
    }
    rings[2 * nx + 3] = NaN;
    const levels = [0.5, 1, 0, 0.999];
    for (const values of [rings, checker]) {
      const want = referenceContourLevels(grid, values, levels);
      expect(want.some((l) => l.lines.length > 1)).toBe(true);
      expect(difference(traceContourLevels(grid, values, levels), want)).toBeNull();
    }
  });

  it('writes the same GeoJSON bytes on a valley-like head field with wells and inactive cells (160 x 120, levels 1 m apart)', () => {
    // Invented field: a regional gradient towards a river, four pumping wells (Thiem cones, h = h0 + Q/(2 pi T) ln(r/R),
    // Thiem 1906), an inactive outcrop and inactive corners.
    const nx = 160;
    const ny = 120;
    const grid = makeGrid(nx, ny);
    const head = new Float64Array(nx * ny);
    const wells = [
      { x: 40, y: 33, s: 1.2 },
      { x: 100, y: 60, s: 2.5 },
      { x: 104, y: 65, s: 0.8 },
      { x: 133, y: 93, s: 1.6 },
    ];
    for (let i = 0; i < ny; i++) {
      for (let j = 0; j < nx; j++) {
        let h = 100 - 0.12 * j - 0.03 * i + 1.5 * Math.sin(i / 15);
        for (const w of wells) h += w.s * Math.log(Math.max(0.5, Math.hypot(j - w.x, i - w.y)) / 80);
        const outcrop = (j - 66) ** 2 / 180 + (i - 80) ** 2 / 90 < 1;
        head[i * nx + j] = outcrop || i + j < 12 || nx - j + i < 15 ? NaN : h;
      }
    }
    const plan = contourPlan(grid, head, { interval: 1 });
    expect(plan.levels.length).toBeGreaterThan(20);
    const toLonLat = (x: number, y: number) => {
      const [lon, lat] = proj4('+proj=utm +zone=33 +datum=WGS84 +units=m +no_defs', 'EPSG:4326', [x, y]);
      return { x: lon!, y: lat! };
    };
    const want = { levels: referenceContourLevels(grid, head, plan.levels), interval: plan.interval };
    const got = { levels: traceContourLevels(grid, head, plan.levels), interval: plan.interval };
    expect(want.levels.some((l) => l.lines.length > 2)).toBe(true);
    for (const options of [
      { quantity: 'head' as const, units: 'm', toLonLat },
      { quantity: 'head' as const, units: 'm' },
    ]) {
      expect(JSON.stringify(contoursToGeoJson(got, options))).toBe(JSON.stringify(contoursToGeoJson(want, options)));
    }
    // The write pool traces interleaved shares of the levels in separate jobs: each share gives the same lines.
    for (let c = 0; c < 3; c++) {
      const share = plan.levels.filter((_, i) => i % 3 === c);
      expect(difference(traceContourLevels(grid, head, share), referenceContourLevels(grid, head, share))).toBeNull();
    }
  });

  it('gives each of two equal levels its own lines', () => {
    const grid = makeGrid(5, 4);
    const values = Float64Array.from({ length: 20 }, (_, p) => p % 5);
    const [a, b] = traceContourLevels(grid, values, [2.5, 2.5]);
    expect(a!.lines.length).toBe(1);
    expect(difference([b!], [a!])).toBeNull();
    expect(b!.lines[0]).not.toBe(a!.lines[0]);
  });
});
