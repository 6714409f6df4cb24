/**
 * Scenario inputs added for comparisons: receptors, per-well minimumHead, wells/observations/receptors as GeoJSON
 * Point features (RFC 7946), and the calibration statistics of observations.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { loadScenario } from '../../src/scenario/load.js';
import { resolveVariants } from '../../src/compare/run.js';
import { calibrationStatistics } from '../../src/analysis/calibration.js';
import type { ObservationResult } from '../../src/analysis/points.js';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { testGrid } from '../helpers/model.js';

let dir: string;

// 30 x 30 cells of 100 m in EPSG:32633 (WGS 84 / UTM 33N), west edge x = 538500, north edge y = 5007500.
const grid = testGrid(30, 30, 100, 100, 538500, 5007500);

// Reference: GDAL 3.6.2, `echo "15.52 45.21" | gdaltransform -s_srs EPSG:4326 -t_srs EPSG:32633 -output_xy`
// printed 540833.964575239 5006410.67625176; for "15.505 45.203": 539660.926031644 5005625.55929217.
const P1 = { lon: 15.52, lat: 45.21, x: 540833.964575239, y: 5006410.67625176 };
const P2 = { lon: 15.505, lat: 45.203, x: 539660.926031644, y: 5005625.55929217 };

function write(name: string, content: unknown): string {
  writeFileSync(join(dir, name), typeof content === 'string' ? content : JSON.stringify(content, null, 2));
  return join(dir, name);
}

const base = {
  aquifer: { conductivity: 'k.tif', thickness: 10 },
  fixedHeads: [{ edge: 'west', head: 100 }],
};

function point(id: unknown, lon: number, lat: number, properties: Record<string, unknown> = {}) {
  return { type: 'Feature', geometry: { type: 'Point', coordinates: [lon, lat] }, properties: { id, ...properties } };
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-compare-inputs-'));
  writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(grid, new Float64Array(900).fill(5)));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('GeoJSON point lists', () => {
  it('reads wells from Point features in WGS 84 lon/lat, reprojected into the raster CRS, with rate, radius and minimumHead', async () => {
    write('wells.geojson', {
      type: 'FeatureCollection',
      features: [
        point('PW-1', P1.lon, P1.lat, { rate: -250, radius: 0.15, minimumHead: 92, owner: 'ignored' }),
        point(7, P2.lon, P2.lat, { rate: -100 }),
      ],
    });
    const { model } = await loadScenario(write('geo.json', { ...base, wells: 'wells.geojson' }));
    expect(model.wells.map((w) => w.id)).toEqual(['PW-1', '7']);
    expect(model.wells[0]!.x).toBeCloseTo(P1.x, 3);
    expect(model.wells[0]!.y).toBeCloseTo(P1.y, 3);
    expect(model.wells[0]).toMatchObject({ rate: -250, radius: 0.15, minimumHead: 92, source: 'wells.geojson feature 0' });
    expect(model.wells[1]!.x).toBeCloseTo(P2.x, 3);
    expect(model.wells[1]!.y).toBeCloseTo(P2.y, 3);
  });

  it('merges a variant that changes a GeoJSON well by id without moving it (no second reprojection)', async () => {
    write('wells2.geojson', { type: 'FeatureCollection', features: [point('PW-1', P1.lon, P1.lat, { rate: -250 })] });
    const { model, raw } = await loadScenario(
      write('geo-variant.json', {
        ...base,
        pointCrs: 'EPSG:4326',
        wells: 'wells2.geojson',
        variants: [
          {
            name: 'more',
            wells: [
              { id: 'PW-1', rate: -400 },
              { id: 'PW-2', x: P2.lon, y: P2.lat, rate: -50 },
            ],
          },
        ],
      }),
    );
    const [variant] = await resolveVariants(model, raw);
    const [w1, w2] = variant!.model.wells;
    expect(w1).toMatchObject({ id: 'PW-1', rate: -400 });
    expect(w1!.x).toBeCloseTo(P1.x, 3);
    expect(w1!.y).toBeCloseTo(P1.y, 3);
    // A JSON well of the variant is in pointCrs (here lon/lat too) and reprojected once.
    expect(w2!.x).toBeCloseTo(P2.x, 3);
    expect(w2!.y).toBeCloseTo(P2.y, 3);
  });

  it('names the bad feature by its index', async () => {
    const cases: Array<[unknown, RegExp]> = [
      [
        {
          type: 'FeatureCollection',
          features: [
            point('A', P1.lon, P1.lat, { rate: -1 }),
            {
              type: 'Feature',
              geometry: {
                type: 'LineString',
                coordinates: [
                  [15, 45],
                  [15.1, 45],
                ],
              },
              properties: { id: 'B' },
            },
          ],
        },
        /bad\.geojson feature 1: geometry is "LineString", not a Point/,
      ],
      [
        { type: 'FeatureCollection', features: [point('A', P1.lon, P1.lat, { rate: -1 }), point('A', P2.lon, P2.lat, { rate: -2 })] },
        /bad\.geojson feature 1: duplicate well id "A" \(also feature 0\)/,
      ],
      [
        { type: 'FeatureCollection', features: [point('A', P1.lon, P1.lat, { rate: 'lots' })] },
        /bad\.geojson feature 0 \(id "A"\): property "rate" is "lots", not a number/,
      ],
      [
        { type: 'FeatureCollection', features: [point('A', P1.x, P1.y, { rate: -1 })] },
        /bad\.geojson feature 0: \[540833.*\] is not a WGS 84 longitude\/latitude/,
      ],
      [{ type: 'FeatureCollection', features: [point('', P1.lon, P1.lat, { rate: -1 })] }, /bad\.geojson feature 0: has no id/],
      [
        { type: 'FeatureCollection', features: [point('A', P1.lon, P1.lat)] },
        /bad\.geojson feature 0: well "A" is new here, so it needs rate/,
      ],
      [[1, 2], /bad\.geojson: not a GeoJSON object \(found a list\)/],
    ];
    for (const [json, message] of cases) {
      write('bad.geojson', json);
      await expect(loadScenario(write('bad.json', { ...base, wells: 'bad.geojson' }))).rejects.toThrow(message);
    }
  });

  it('reads observations (property head) and receptors from GeoJSON too', async () => {
    write('obs.geojson', { type: 'FeatureCollection', features: [point('OB-1', P2.lon, P2.lat, { head: 99.5 })] });
    write('rec.geojson', { type: 'FeatureCollection', features: [point('spring', P1.lon, P1.lat)] });
    const { model } = await loadScenario(write('geo-points.json', { ...base, observations: 'obs.geojson', receptors: 'rec.geojson' }));
    expect(model.observations[0]).toMatchObject({ id: 'OB-1', head: 99.5 });
    expect(model.observations[0]!.x).toBeCloseTo(P2.x, 3);
    expect(model.receptors![0]!.id).toBe('spring');
    expect(model.receptors![0]!.y).toBeCloseTo(P1.y, 3);
    write('obs-nohead.geojson', { type: 'FeatureCollection', features: [point('OB-1', P2.lon, P2.lat)] });
    await expect(loadScenario(write('geo-nohead.json', { ...base, observations: 'obs-nohead.geojson' }))).rejects.toThrow(
      /obs-nohead\.geojson feature 0 \(id "OB-1"\): has no "head" property/,
    );
  });
});

describe('receptors and minimumHead', () => {
  it('takes receptors in pointCrs, or in their own crs, or from a CSV file', async () => {
    write('rec.csv', `id,x,y\nwetland-edge,${P2.x},${P2.y}\n`);
    const { model } = await loadScenario(
      write('rec.json', {
        ...base,
        receptors: [
          { id: 'neighbour', x: 539000, y: 5007000 },
          { id: 'spring', x: P1.lon, y: P1.lat, crs: 'EPSG:4326' },
        ],
      }),
    );
    expect(model.receptors!.map((r) => [r.id, r.source])).toEqual([
      ['neighbour', 'receptors[0]'],
      ['spring', 'receptors[1]'],
    ]);
    expect(model.receptors![0]).toMatchObject({ x: 539000, y: 5007000 });
    expect(model.receptors![1]!.x).toBeCloseTo(P1.x, 3);
    const csv = await loadScenario(write('rec-csv.json', { ...base, receptors: 'rec.csv' }));
    expect(csv.model.receptors![0]).toMatchObject({ id: 'wetland-edge', x: P2.x, y: P2.y, source: 'rec.csv line 2' });
    await expect(loadScenario(write('rec-bad.json', { ...base, receptors: [{ id: 'r', x: 1, y: 2, crs: 'EPSG:abc' }] }))).rejects.toThrow(
      /receptors\[0\]\.crs/,
    );
    await expect(
      loadScenario(
        write('rec-dup.json', {
          ...base,
          receptors: [
            { id: 'r', x: 1, y: 2 },
            { id: 'r', x: 3, y: 4 },
          ],
        }),
      ),
    ).rejects.toThrow(/duplicate receptor id "r"/);
  });

  it('reads minimumHead from JSON wells and the minimumHead column of a well CSV', async () => {
    write('wells.csv', `id,x,y,rate,radius,minimumHead\nA,539000,5007000,-10,0.2,88.5\nB,539100,5007000,-5,,\n`);
    const { model } = await loadScenario(write('min.json', { ...base, wells: 'wells.csv' }));
    expect(model.wells[0]).toMatchObject({ id: 'A', radius: 0.2, minimumHead: 88.5 });
    expect(model.wells[1]!.minimumHead).toBeUndefined();
    const json = await loadScenario(
      write('min2.json', { ...base, wells: [{ id: 'A', x: 539000, y: 5007000, rate: -10, minimumHead: 90 }] }),
    );
    expect(json.model.wells[0]!.minimumHead).toBe(90);
  });
});

describe('calibrationStatistics', () => {
  it('gives mean error, mean absolute error, RMS error and RMS / range of observed heads', () => {
    // Worked by hand: residuals +1, -2, +0.5 m; observed range 110 - 100 = 10 m.
    // ME = -0.5/3, MAE = 3.5/3, RMS = sqrt(5.25/3) = 1.3229, RMS/range = 13.229 %.
    const obs = (observed: number, simulated: number) => ({ observed, simulated, residual: simulated - observed }) as ObservationResult;
    const stats = calibrationStatistics([obs(100, 101), obs(105, 103), obs(110, 110.5)])!;
    expect(stats.count).toBe(3);
    expect(stats.meanError).toBeCloseTo(-0.5 / 3, 12);
    expect(stats.meanAbsoluteError).toBeCloseTo(3.5 / 3, 12);
    expect(stats.rmsError).toBeCloseTo(Math.sqrt(5.25 / 3), 12);
    expect(stats.observedRange).toBe(10);
    expect(stats.scaledRmsPercent).toBeCloseTo(13.2287566, 6);
    expect(calibrationStatistics([])).toBeNull();
    expect(calibrationStatistics([obs(100, 99)])!.scaledRmsPercent).toBeNull();
  });
});
