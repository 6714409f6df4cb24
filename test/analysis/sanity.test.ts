/**
 * Physical sanity warnings (src/analysis/sanity.ts): conductivity outside the published range in the scenario's units,
 * heads above the ground surface, below the aquifer bottom or top, and a well drawing the head below the aquifer top.
 * Heads are checked against the linear head of steady 1-D flow between two fixed heads in a uniform aquifer (Darcy's
 * law with constant transmissivity: h varies linearly; any groundwater text, e.g. Freeze & Cherry 1979, ch. 2).
 */
import { describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { solveModel } from '../../src/pipeline.js';
import { metresPerSecond } from '../../src/analysis/sanity.js';
import { loadScenario } from '../../src/scenario/load.js';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';
import type { ModelInput } from '../../src/scenario/types.js';

/** 11 x 3 cells, heads fixed at 50 (west column) and 45 (east column): the head falls 0.5 per column. */
function strip(parts: Partial<ModelInput> = {}, k = 5): ModelInput {
  const grid = testGrid(11, 3, 100);
  return makeModel(grid, {
    conductivity: new Float64Array(33).fill(k),
    thickness: 10,
    fixedHeads: [fixedColumn(grid, 0, 50, 'west'), fixedColumn(grid, 10, 45, 'east')],
    ...parts,
  });
}

const matching = (warnings: string[], pattern: RegExp) => warnings.filter((w) => pattern.test(w));

describe('sanity warnings', () => {
  it('metresPerSecond converts m/d, m/s, ft/d and ft/s (1 ft = 0.3048 m exactly, 1 d = 86400 s)', () => {
    expect(metresPerSecond({ length: 'm', time: 's' })).toBe(1);
    expect(metresPerSecond({ length: 'm', time: 'd' })).toBeCloseTo(1 / 86400, 15);
    expect(metresPerSecond({ length: 'ft', time: 's' })).toBeCloseTo(0.3048, 15);
    expect(metresPerSecond({ length: 'ft', time: 'd' })).toBeCloseTo(0.3048 / 86400, 15);
  });

  it('warns of conductivity above 1 m/s or below 1e-13 m/s in the declared units, and not inside that range', () => {
    // 300 000 ft/d = 1.06 m/s (above); 250 000 ft/d = 0.88 m/s (inside)
    const high = solveModel(strip({ units: { length: 'ft', time: 'd' } }, 300000));
    expect(matching(high.warnings, /conductivity: 33 active cell\(s\) above .* ft\/d .*Freeze & Cherry 1979, Table 2\.2/)).toHaveLength(1);
    const fine = solveModel(strip({ units: { length: 'ft', time: 'd' } }, 250000));
    expect(matching(fine.warnings, /conductivity/)).toEqual([]);
    // 5e-14 m/s is below; the same number in m/d (5.8e-19 m/s) too; 5 m/d is inside
    const tight = solveModel(strip({ units: { length: 'm', time: 's' } }, 5e-14));
    expect(matching(tight.warnings, /conductivity: 33 active cell\(s\) below .* m\/s/)).toHaveLength(1);
    expect(matching(solveModel(strip()).warnings, /conductivity/)).toEqual([]);
  });

  it('counts the cells whose head lies above the ground surface (linear head 50 - 0.5 col: cols 0-5 above 47)', () => {
    const result = solveModel(strip({ groundSurface: 47.2 }));
    const w = matching(result.warnings, /above the ground surface/);
    expect(w).toHaveLength(1);
    expect(w[0]).toMatch(/at 18 active cell\(s\), up to 2\.80 m at row \d, col 0: flowing artesian/);
    expect(matching(solveModel(strip({ groundSurface: 50.5 })).warnings, /ground surface/)).toEqual([]);
  });

  it('counts the cells whose head lies below the aquifer bottom (cols 6-10 below 47.2)', () => {
    const w = matching(solveModel(strip({ aquiferBottom: 47.2 })).warnings, /below the aquifer bottom/);
    expect(w).toHaveLength(1);
    expect(w[0]).toMatch(/at 15 active cell\(s\), down to 2\.20 m below it at row \d, col 10/);
  });

  it('says the confined assumption breaks down when a well draws its head below the aquifer top', () => {
    const grid = testGrid(11, 3, 100);
    const pumped = strip({ wells: [well(grid, 'PW-9', 1, 5, -2000)] });
    const free = solveModel(pumped);
    const bore = free.wellbore.find((w) => w.id === 'PW-9')!;
    // a top 1 m above the well-bore head (but below every cell head): only the well check fires
    const top = bore.wellboreHead + 1;
    const result = solveModel({ ...pumped, aquiferTop: top });
    const w = matching(result.warnings, /well "PW-9": the drawdown exceeds the confining head above the aquifer top/);
    expect(w).toHaveLength(1);
    expect(w[0]).toMatch(/1\.00 m below the top .*confined assumption breaks down/);
    expect(matching(solveModel({ ...pumped, aquiferTop: bore.wellboreHead - 1 }).warnings, /aquifer top/)).toEqual([]);
  });

  it('reads aquifer.top, aquifer.bottom and groundSurface as numbers or rasters on the conductivity grid', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'piezomap-sanity-'));
    try {
      const grid = testGrid(11, 3, 100);
      writeFileSync(join(dir, 'k.tif'), encodeFloat32GeoTiff(grid, new Float64Array(33).fill(5)));
      writeFileSync(join(dir, 'ground.tif'), encodeFloat32GeoTiff(grid, new Float64Array(33).fill(47.2)));
      writeFileSync(join(dir, 'small.tif'), encodeFloat32GeoTiff(testGrid(5, 3, 100), new Float64Array(15).fill(40)));
      const scenario = (aquifer: Record<string, unknown>, groundSurface?: string) => {
        const path = join(dir, 's.json');
        writeFileSync(
          path,
          JSON.stringify({
            aquifer: { conductivity: 'k.tif', thickness: 10, ...aquifer },
            fixedHeads: [
              { edge: 'west', head: 50 },
              { edge: 'east', head: 45 },
            ],
            ...(groundSurface ? { groundSurface } : {}),
          }),
        );
        return path;
      };
      const { model } = await loadScenario(scenario({ top: 20, bottom: 'ground.tif' }, 'ground.tif'));
      expect(model.aquiferTop).toBe(20);
      expect((model.aquiferBottom as Float64Array)[4]).toBeCloseTo(47.2, 5);
      expect((model.groundSurface as Float64Array).length).toBe(33);
      const w = matching(solveModel(model).warnings, /above the ground surface at 18 active/);
      expect(w).toHaveLength(1);
      await expect(loadScenario(scenario({ bottom: 'small.tif' }))).rejects.toThrow(/aquifer\.bottom "small\.tif" is not on the grid/);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});

describe('input plausibility warnings', () => {
  // Bounds: src/analysis/sanity.ts PLAUSIBLE (thickness 1 cm to 10 km and cell size 1 cm to 100 km, common practice;
  // recharge below the greatest recorded annual rainfall, about 26.5 m, from memory; a well below 10 m3/s, from
  // memory; heads within the Earth's relief, about -11 km to +8.85 km, from memory). Units: 1 ft = 0.3048 m exactly.
  it('warns of a thickness above 10 km in the declared units (40 000 ft = 12.2 km; 30 000 ft = 9.1 km is not)', () => {
    expect(
      matching(
        solveModel(strip({ units: { length: 'ft', time: 'd' }, thickness: 40000 })).warnings,
        /aquifer\.thickness: 40000\.00 ft .*aquifer thickness/,
      ),
    ).toHaveLength(1);
    expect(matching(solveModel(strip({ units: { length: 'ft', time: 'd' }, thickness: 30000 })).warnings, /aquifer\.thickness/)).toEqual(
      [],
    );
  });

  it('warns of recharge above the greatest annual rainfall as a rate (0.1 m/d = 36.5 m/yr; 0.05 m/d = 18.3 m/yr is not)', () => {
    expect(matching(solveModel(strip({ recharge: 0.1 })).warnings, /recharge: 0\.10 m\/d exceeds the greatest rainfall/)).toHaveLength(1);
    expect(matching(solveModel(strip({ recharge: 0.05 })).warnings, /recharge:/)).toEqual([]);
    // and nothing at all at ordinary values
    const ordinary = solveModel(strip({ recharge: 0.001, thickness: 30, anisotropy: 2 }));
    expect(matching(ordinary.warnings, /plausible|rainfall|water wells|relief|outside 1 cm/)).toEqual([]);
  });

  it('warns of a well above 10 m3/s (1e6 m3/d = 11.6 m3/s), of anisotropy 1000, and of heads beyond the relief', () => {
    const grid = testGrid(11, 3, 100);
    const result = solveModel(
      strip({
        wells: [well(grid, 'BIG', 1, 5, -1e6)],
        anisotropy: 1000,
        fixedHeads: [fixedColumn(grid, 0, 12000, 'west'), fixedColumn(grid, 10, 11995, 'east')],
      }),
    );
    expect(matching(result.warnings, /well "BIG" .*rate -1\.00e\+6 m3\/d exceeds 864000\.00 m3\/d/)).toHaveLength(1);
    expect(matching(result.warnings, /anisotropy 1000\.00 lies outside 0\.01 to 100/)).toHaveLength(1);
    expect(matching(result.warnings, /"west"\): 3 head\(s\) outside .*relief/)).toHaveLength(1);
    expect(matching(solveModel(strip({ wells: [well(grid, 'SMALL', 1, 5, -8e5)] })).warnings, /well "SMALL"/)).toEqual([]);
  });
});
