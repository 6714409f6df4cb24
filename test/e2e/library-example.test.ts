/**
 * The library example of the README (examples/compare-wells.ts) runs on the demo scenario and its answers obey
 * the physics: drawdown is linear in the pumping rate, and the sources of the added water sum to 100 %.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { compareWellRates } from '../../examples/compare-wells.js';
import { demoScenarioPath } from '../../src/index.js';

const out = mkdtempSync(join(tmpdir(), 'piezomap-example-'));
afterAll(() => rmSync(out, { recursive: true, force: true }));

describe('examples/compare-wells.ts', () => {
  it('compares two rates of a planned well on the demo scenario', async () => {
    const [half, full] = await compareWellRates(
      demoScenarioPath(),
      { id: 'PW-3', x: 505272, y: 4105068 },
      [-500, -1000],
      join(out, 'rates'),
    );
    // The demo's river (bed bottom) and drain switch, so each variant is set up afresh (docs/compare.md).
    expect(half!.sharedOperator || full!.sharedOperator).toBe(false);
    // Linearity of confined steady flow (common practice: superposition): twice the rate, twice the drawdown,
    // everywhere, as long as no river or drain cell switches between the runs (none does at these rates). Drawdowns
    // below each run's noise level are reported as 0, so a cell may differ by up to the two noise levels.
    let worst = 0;
    let largest = 0;
    for (let p = 0; p < full!.drawdown!.length; p++) {
      const s = full!.drawdown![p]!;
      if (Number.isNaN(s)) continue;
      largest = Math.max(largest, s);
      worst = Math.max(worst, Math.abs(s - 2 * half!.drawdown![p]!));
    }
    expect(largest).toBeGreaterThan(0.01);
    expect(worst).toBeLessThan(1e-6 * largest + half!.noiseLevel + full!.noiseLevel);
    expect(half!.noiseLevel + full!.noiseLevel).toBeLessThan(1e-5 * largest);
    expect(full!.maxDrawdown).toBeCloseTo(2 * half!.maxDrawdown, 6);
    // Steady state: all the added water comes from the boundaries and recharge (Theis 1940), 100 % in total.
    for (const o of [half!, full!]) {
      const total = Object.values(o.sources).reduce((sum: number, v) => sum + (v ?? 0), 0);
      expect(total).toBeCloseTo(100, 3);
      // The river's reaches split its share.
      const reaches = Object.values(o.reaches).reduce((sum: number, v) => sum + (v ?? 0), 0);
      expect(reaches).toBeCloseTo(o.sources.river!, 6);
    }
    const csv = readFileSync(join(out, 'rates', 'comparison.csv'), 'utf8')
      .trim()
      .split('\n');
    expect(csv.slice(1).map((line) => line.split(',')[0])).toEqual(['PW-3-500', 'PW-3-1000']);
  });
});
