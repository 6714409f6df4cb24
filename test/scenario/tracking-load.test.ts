/**
 * The `tracking` key through the loader: points in pointCrs like the other point lists, capture times sorted and
 * unique, and porosity required. Reprojection is checked against proj4 (the general-purpose projection library)
 * called directly with the EPSG definitions of UTM zone 33N and WGS 84.
 */
import { readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import proj4 from 'proj4';
import { describe, expect, it } from 'vitest';
import { resolveScenario, type ScenarioJson } from '../../src/scenario/load.js';
import { parseScenarioJson } from '../../src/scenario/schema.js';

const DATA = resolve(__dirname, '../../data');
// EPSG:32633 as proj4 text (from the EPSG registry's PROJ string for WGS 84 / UTM zone 33N).
const UTM33 = '+proj=utm +zone=33 +datum=WGS84 +units=m +no_defs';

function demo(): Record<string, unknown> {
  return JSON.parse(readFileSync(resolve(DATA, 'valley.json'), 'utf8')) as Record<string, unknown>;
}

async function load(json: Record<string, unknown>) {
  const parsed = parseScenarioJson(json, 'test');
  if (!parsed.ok) throw new Error(parsed.message);
  return resolveScenario(parsed.scenario as ScenarioJson, DATA, '<inline>');
}

describe('tracking key', () => {
  it('takes tracking points in pointCrs: a point given in lon/lat lands where proj4 puts it in the raster CRS', async () => {
    const json = demo();
    const [lon, lat] = proj4(UTM33, 'WGS84', [503210.5, 4105480.25]);
    // Only the tracking point is given in lon/lat: drop the other point lists so that pointCrs applies to it alone.
    delete json.observations;
    delete json.receptors;
    delete json.wells;
    json.pointCrs = 'EPSG:4326';
    json.tracking = { captureTimes: [3650, 365, 365], points: [{ id: 'spill', x: lon, y: lat }] };
    const model = await load(json);
    expect(model.tracking!.points[0]!.x).toBeCloseTo(503210.5, 3);
    expect(model.tracking!.points[0]!.y).toBeCloseTo(4105480.25, 3);
    expect(model.tracking!.captureTimes).toEqual([365, 3650]);
    expect(model.tracking!.particlesPerWell).toBe(36); // the default
  });

  it('refuses tracking without porosity, naming aquifer.porosity', async () => {
    const json = demo();
    delete (json.aquifer as Record<string, unknown>).porosity;
    await expect(load(json)).rejects.toMatchObject({ code: 'input', detail: expect.objectContaining({ key: 'aquifer.porosity' }) });
  });
});
