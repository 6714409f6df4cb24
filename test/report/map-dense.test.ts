/**
 * Dense point sets on the quick-look map: above MAX_POINT_SYMBOLS points of a kind they are drawn as counts per
 * square (three shades) with a legend note, so that the drawing's size does not grow with the number of points.
 * Before: one symbol and label per point; 200 000 wells passed the rasteriser's SVG node limit.
 */
import { describe, expect, it } from 'vitest';
import type { Grid } from '../../src/grid.js';
import { MAX_POINT_SYMBOLS, renderMapPng, renderMapSvg, type MapInput, type MapPoint } from '../../src/report/map.js';
import { niceTicks } from '../../src/report/text.js';

const CAUTION =
  'Screening-level result. Outputs need review by a qualified hydrogeologist before any decision; local regulations and licensed practice govern.';

/** An invented 40 x 30 grid of 50 m cells with a head falling to the east. */
function base(wells: MapPoint[], observations: MapPoint[] = []): MapInput {
  const grid: Grid = { nx: 40, ny: 30, transform: [600000, 50, 0, 5000000, 0, -50], crs: { epsg: 32633, geographic: false, geoKeys: {} } };
  const values = new Float64Array(1200);
  for (let p = 0; p < values.length; p++) values[p] = 100 - 0.1 * (p % 40);
  return {
    grid,
    values,
    quantity: 'head',
    units: { length: 'm', time: 'd' },
    title: 'Dense points (invented)',
    caution: CAUTION,
    wells,
    observations,
  };
}

/** `count` wells at the centre of cell (row, col). */
function cluster(count: number, row: number, col: number, start: number): MapPoint[] {
  return Array.from({ length: count }, (_, k) => ({
    id: `W${start + k}`,
    x: 600000 + (col + 0.5) * 50,
    y: 5000000 - (row + 0.5) * 50,
    rate: -1,
  }));
}

/** Number of element tags in an SVG text. */
function elements(svg: string): number {
  return (svg.match(/<[a-zA-Z]/g) ?? []).length;
}

describe('renderMapSvg with dense points', () => {
  it('draws clusters of 1, 5 and 594 wells as one square each, in the three density shades, without ids', () => {
    const wells = [...cluster(1, 3, 3, 0), ...cluster(5, 10, 20, 1), ...cluster(594, 25, 35, 6)];
    expect(wells.length).toBeGreaterThan(MAX_POINT_SYMBOLS);
    const { svg } = renderMapSvg(base(wells));
    const layer = /<g class="well-density">(.*?)<\/g>/.exec(svg)?.[1] ?? '';
    const paths = [...layer.matchAll(/<path d="([^"]*)" fill="[^"]*" fill-opacity="([\d.]+)"/g)];
    // one square (one "M...Z") per class: 1 per square, 2-9, 10 or more
    expect(paths.map((m) => [m[1]!.split('M').length - 1, Number(m[2])])).toEqual([
      [1, 0.3],
      [1, 0.55],
      [1, 0.85],
    ]);
    expect(svg).not.toContain('>W7<');
    expect(svg).toContain('600 wells, too many to');
    // Up to the bound the wells are drawn one by one, with their ids.
    const few = renderMapSvg(base(cluster(MAX_POINT_SYMBOLS, 5, 5, 0))).svg;
    expect(few).toContain('>W7<');
    expect(few).not.toContain('well-density');
  });

  it('keeps the drawing small and renders 200 000 wells and 2 000 observation points to PNG', () => {
    const wells: MapPoint[] = [];
    for (let k = 0; k < 200_000; k++)
      wells.push({ id: `W${k}`, x: 600000 + ((k * 7919) % 2000), y: 5000000 - ((k * 104729) % 1500), rate: -1 });
    const observations = cluster(2000, 12, 12, 0).map((o, k) => ({ ...o, id: `OB${k}` }));
    const input = base(wells, observations);
    const small = renderMapSvg(base(cluster(3, 5, 5, 0)));
    const { svg, png } = renderMapPng(input);
    // The element count does not grow with the points: a handful of density paths and legend rows more.
    expect(elements(svg)).toBeLessThan(elements(small.svg) + 40);
    expect(svg).toContain('observation-density');
    expect(svg).toContain('2,000 observation points');
    // PNG signature (PNG specification, section 5.2)
    expect([...png.slice(0, 8)]).toEqual([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]);
  });
});

describe('map legend at extreme head ranges', () => {
  it('draws fields spanning 1e-300, and a centimetre at 1e14, with ticks at both ends', () => {
    // Before: niceTicks asked toFixed for 301 decimals (RangeError), and near 1e14 its tick counter stuck past 2^53.
    const tiny = base([]);
    tiny.values = tiny.values.map((_, p) => (p % 40) * 2.5e-302);
    expect(renderMapSvg(tiny).svg).toContain('Head (m)');
    const ticks = niceTicks(1e14, 1e14 + 0.01, 6);
    expect(ticks.ticks).toEqual([1e14, 1e14 + 0.01]);
    expect(niceTicks(93.2, 100.4, 6).ticks).toEqual([94, 95, 96, 97, 98, 99, 100]);
  });
});
