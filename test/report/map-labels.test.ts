/**
 * Maps without collisions: on the demo's head and drawdown maps, and on a crowded invented case, no two texts
 * (point labels, contour labels, legend, header) overlap and no label covers a symbol. The boxes come from the
 * layout code (renderMapSvg's `labels`); headless Chromium measures the drawn texts itself as the outside check.
 */
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { compareScenario } from '../../src/compare/run.js';
import { contourField } from '../../src/analysis/contours.js';
import type { ComparisonResult } from '../../src/compare/types.js';
import type { Grid } from '../../src/grid.js';
import { drawdownMapInput } from '../../src/output/comparisonFiles.js';
import { headMapInput } from '../../src/output/products.js';
import { boxesIntersect, placePointLabels, type Box, type LabelBox } from '../../src/report/labels.js';
import { renderMapSvg, type MapDrawing, type MapInput } from '../../src/report/map.js';

const CAUTION =
  'Screening-level result. Outputs need review by a qualified hydrogeologist before any decision; local regulations and licensed practice govern.';

function collisions(drawing: MapDrawing): string[] {
  const found: string[] = [];
  const { labels, symbols } = drawing;
  for (let a = 0; a < labels.length; a++) {
    for (let b = a + 1; b < labels.length; b++) {
      if (boxesIntersect(labels[a]!, labels[b]!))
        found.push(`"${labels[a]!.text}" (${labels[a]!.kind}) overlaps "${labels[b]!.text}" (${labels[b]!.kind})`);
    }
    if (labels[a]!.kind === 'point' || labels[a]!.kind === 'contour') {
      for (const s of symbols)
        if (boxesIntersect(labels[a]!, s)) found.push(`"${labels[a]!.text}" covers a symbol at ${Math.round(s.x0)}, ${Math.round(s.y0)}`);
    }
  }
  return found;
}

let demo: ComparisonResult;
const drawings: Record<string, MapDrawing> = {};

beforeAll(async () => {
  demo = await compareScenario('data/valley.json');
  const base = demo.baseline;
  drawings.head = renderMapSvg(headMapInput(base, contourField(base.model.grid, base.head)));
  const v = demo.variants[0]!;
  drawings.drawdown = renderMapSvg(drawdownMapInput(v, contourField(base.model.grid, v.drawdown!), base.model.units));
}, 60_000);

describe('demo maps', () => {
  it('place every label so that no two label boxes intersect and none covers a symbol', () => {
    for (const [name, drawing] of Object.entries(drawings)) {
      expect(collisions(drawing), name).toEqual([]);
      const points = drawing.labels.filter((l) => l.kind === 'point').map((l) => l.text);
      // Wells, observation points and receptors of the demo: each labelled once.
      for (const id of ['PW-1', 'PW-2', 'OB-1', 'OB-2', 'OB-3', 'farm-well', 'wetland-edge'])
        expect(
          points.filter((t) => t === id),
          `${name}: ${id}`,
        ).toHaveLength(1);
      expect(drawing.labels.filter((l) => l.kind === 'contour').length, name).toBeGreaterThanOrEqual(1);
    }
  });

  it("cut every contour line at its labels: one hole in the lines' mask per label", () => {
    for (const [name, drawing] of Object.entries(drawings)) {
      const mask = /<mask id="label-gaps"[\s\S]*?<\/mask>/.exec(drawing.svg)![0];
      const contourLabels = drawing.labels.filter((l) => l.kind === 'contour').length;
      const pointLabels = drawing.labels.filter((l) => l.kind === 'point').length;
      expect((mask.match(/<rect /g) ?? []).length - 1, name).toBe(contourLabels + pointLabels);
      expect(drawing.svg, name).toMatch(/<g mask="url\(#label-gaps\)"><g class="contours">/);
    }
  });

  it('show residuals at observation points as circles coloured by sign and sized by magnitude', () => {
    const obs = demo.baseline.observations;
    const circles = [...drawings.head!.svg.matchAll(/<circle cx="[^"]+" cy="[^"]+" r="([\d.]+)" fill="(#[0-9a-f]+)" fill-opacity="0.45"/g)];
    // The first circles are the map's (one per observation point, in order); the legend's follow.
    const onMap = circles.slice(0, obs.length);
    obs.forEach((o, k) => {
      expect(onMap[k]![2], o.id).toBe(o.residual > 0 ? '#c0392b' : '#2166ac');
    });
    const byMagnitude = obs.map((o, k) => ({ size: Math.abs(o.residual), r: Number(onMap[k]![1]) })).sort((a, b) => a.size - b.size);
    for (let k = 1; k < byMagnitude.length; k++) expect(byMagnitude[k]!.r).toBeGreaterThanOrEqual(byMagnitude[k - 1]!.r);
    expect(drawings.head!.labels.some((l) => l.text.startsWith('Residual: simulated above'))).toBe(true);
  });

  it('give each fixed-head group and each head-dependent entry its own legend row and its own pattern', () => {
    const svg = drawings.head!.svg;
    const rows = ['Fixed head: downstream-edge', 'Fixed head: gravel-pit'];
    const legend = drawings
      .head!.labels.filter((l) => l.kind === 'legend')
      .map((l) => l.text)
      .join(' ');
    // A long row wraps onto a second line: compare with the lines joined.
    for (const row of rows) expect(legend).toContain(row.split(': ')[1]);
    expect(legend.match(/Fixed head:/g)).toHaveLength(2);
    // The demo's river and field drain are head-dependent: their own rows, not fixed heads.
    expect(legend).toMatch(/River "river"/);
    expect(legend).toMatch(/Drain "field-drains"/);
    const patterns = [...svg.matchAll(/<pattern id="(layer-\d+)"[^>]*>([\s\S]*?)<\/pattern>/g)];
    expect(patterns).toHaveLength(4);
    expect(new Set(patterns.map((p) => p[0]!.replace(p[1]!, ''))).size).toBe(4);
  });

  it('draw receptors with their own symbol and legend row, and state the noise level on the drawdown map', () => {
    const { svg, labels } = drawings.drawdown!;
    const legend = labels
      .filter((l) => l.kind === 'legend')
      .map((l) => l.text)
      .join(' ');
    expect(legend).toContain('Receptor');
    expect(svg.match(/<path d="M[^"]*" fill="#ffffff" stroke="#8b1e3f"/g)?.length).toBe(3); // two receptors + legend
    expect(legend).toMatch(/\|Change\| < [\d.e-]+ m/);
  });
});

describe('placePointLabels', () => {
  const bounds: Box = { x0: 0, y0: 0, x1: 600, y1: 400 };
  it('moves a label off a neighbouring symbol (two points 8 px apart, the case that read "PW-11")', () => {
    const requests = [
      { x: 300, y: 200, radius: 6.5, text: 'PW-1', size: 11.5, bold: true },
      { x: 306, y: 193, radius: 6.5, text: 'OB-1', size: 11, bold: false },
    ];
    const symbols = requests.map((r) => ({ x0: r.x - r.radius, y0: r.y - r.radius, x1: r.x + r.radius, y1: r.y + r.radius }));
    const placed = placePointLabels(requests, symbols, bounds);
    expect(boxesIntersect(placed[0]!.box, placed[1]!.box)).toBe(false);
    for (const p of placed) for (const s of symbols) expect(boxesIntersect(p.box, s)).toBe(false);
  });

  it('keeps twelve labels of a tight cluster apart, with leader lines for those moved away', () => {
    const requests = Array.from({ length: 12 }, (_, k) => ({
      x: 300 + (k % 4) * 9,
      y: 200 + Math.floor(k / 4) * 9,
      radius: 4,
      text: `W-${k + 1}`,
      size: 11,
      bold: false,
    }));
    const symbols = requests.map((r) => ({ x0: r.x - r.radius, y0: r.y - r.radius, x1: r.x + r.radius, y1: r.y + r.radius }));
    const placed = placePointLabels(requests, symbols, bounds);
    for (let a = 0; a < placed.length; a++) {
      for (let b = a + 1; b < placed.length; b++) expect(boxesIntersect(placed[a]!.box, placed[b]!.box)).toBe(false);
      for (const s of symbols) expect(boxesIntersect(placed[a]!.box, s)).toBe(false);
    }
    expect(placed.some((p) => p.leader !== null)).toBe(true);
  });
});

describe('renderMapSvg header', () => {
  it('wraps a long title instead of cutting it off, every word kept, every line inside the drawing', () => {
    const grid: Grid = { nx: 20, ny: 10, transform: [0, 10, 0, 100, 0, -10], crs: null };
    const values = Float64Array.from({ length: 200 }, (_, k) => 100 + (k % 20) * 0.1);
    const title =
      'Invented wellfield with a very long descriptive title that names the variant, the pumping plan, the season and the reviewer for the record';
    const input: MapInput = { grid, values, quantity: 'head', units: { length: 'm', time: 'd' }, title, caution: CAUTION };
    const drawing = renderMapSvg(input, { width: 800 });
    const lines = drawing.labels.filter((l) => l.kind === 'header');
    expect(lines.length).toBeGreaterThan(2);
    const titleLines = lines.filter((l) => title.includes(l.text));
    expect(titleLines.map((l) => l.text).join(' ')).toBe(title);
    for (const l of lines) expect(l.x1).toBeLessThanOrEqual(800);
    expect(collisions(drawing)).toEqual([]);
  });
});

describe('label boxes against the browser', () => {
  const executablePath = '/usr/bin/chromium';
  const available = existsSync(executablePath);
  let userDataDir = '';
  beforeAll(() => {
    if (!available && process.env.CI === 'true') throw new Error('Chromium is required in CI: apt-get install -y chromium');
    userDataDir = mkdtempSync(join(tmpdir(), 'piezomap-chromium-'));
  });
  afterAll(() => {
    if (userDataDir) rmSync(userDataDir, { recursive: true, force: true });
  });

  it('Chromium measures the drawn texts of both demo maps inside their computed boxes, none overlapping another', async (ctx) => {
    if (!available) {
      console.warn('skipped: /usr/bin/chromium not installed - browser check of the map labels not run');
      ctx.skip();
      return;
    }
    const context = await chromium.launchPersistentContext(userDataDir, {
      executablePath,
      headless: true,
      args: [
        '--headless',
        '--no-sandbox',
        '--disable-gpu',
        '--no-first-run',
        '--disable-background-networking',
        '--disable-component-update',
        '--disable-sync',
      ],
    });
    try {
      for (const [name, drawing] of Object.entries(drawings)) {
        const page = await context.newPage();
        await page.setViewportSize({ width: drawing.width, height: drawing.height });
        await page.setContent(`<!DOCTYPE html><html><body style="margin:0">${drawing.svg.replace(/^<\?xml[^>]*>/, '')}</body></html>`);
        // The ink texts (the white halo copies carry a stroke) of point labels, contour labels and the legend.
        const measured: Array<{ text: string; x0: number; y0: number; x1: number; y1: number }> = await page.$$eval(
          '.points text:not([stroke]), .contour-labels text, .legend text',
          (list) =>
            list.map((t) => {
              const r = t.getBoundingClientRect();
              return { text: t.textContent ?? '', x0: r.left, y0: r.top, x1: r.right, y1: r.bottom };
            }),
        );
        expect(measured.length, name).toBeGreaterThan(10);
        for (let a = 0; a < measured.length; a++) {
          for (let b = a + 1; b < measured.length; b++) {
            const A = measured[a]!;
            const B = measured[b]!;
            // Browser boxes include the line gap above and below the glyphs: shrink by 1 px before comparing.
            const shrink = (r: Box) => ({ x0: r.x0 + 1, y0: r.y0 + 1, x1: r.x1 - 1, y1: r.y1 - 1 });
            expect(boxesIntersect(shrink(A), shrink(B)), `${name}: "${A.text}" and "${B.text}"`).toBe(false);
          }
        }
        // Horizontal texts: the layout's box holds the browser's (the widths the layout avoids are large enough).
        const level: Array<{ text: string; x0: number; y0: number; x1: number; y1: number }> = await page.$$eval(
          '.points text:not([stroke]), .legend text',
          (list) =>
            list.map((t) => {
              const r = t.getBoundingClientRect();
              return { text: t.textContent ?? '', x0: r.left, y0: r.top, x1: r.right, y1: r.bottom };
            }),
        );
        for (const m of level) {
          const ours = drawing.labels.find((l: LabelBox) => l.text === m.text && Math.abs(l.x0 - m.x0) < 3 && Math.abs(l.y1 - m.y1) < 8);
          expect(ours, `${name}: "${m.text}" has a computed box`).toBeDefined();
          expect(ours!.x1 + 0.5, `${name}: right end of "${m.text}"`).toBeGreaterThanOrEqual(m.x1);
        }
        await page.close();
      }
    } finally {
      await context.close();
    }
  }, 60_000);
});
