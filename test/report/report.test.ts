import { existsSync, mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { interpolateBrBG, interpolateCividis } from 'd3-scale-chromatic';
import { chromium } from 'playwright-core';
import { PNG } from 'pngjs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { darcyFlux } from '../../src/analysis/flux.js';
import { cellCentre, type Grid } from '../../src/grid.js';
import { parseColour } from '../../src/report/colour.js';
import { renderReportHtml, type ReportInput } from '../../src/report/html.js';
import { renderMapPng, renderMapSvg, type MapInput } from '../../src/report/map.js';
import { convergencePlotSvg } from '../../src/report/plot.js';
import { escapeMarkup, formatLevel, formatSignificant, niceTicks, wrapText } from '../../src/report/text.js';

const CAUTION =
  'Screening-level result. Outputs need review by a qualified hydrogeologist before any decision; local regulations and licensed practice govern.';
const HOSTILE_TITLE = 'Invented wellfield <script>alert(1)</script> & "quotes"';
const HOSTILE_ID = '"><img src=x onerror=alert(2)>';
const OUT = join('test', 'tmp', 'report');

/**
 * An invented confined aquifer (no real place): a regional gradient towards the east, a fixed-head column on the
 * west edge, two pumping wells and one injection well superposed as Thiem cones (Thiem 1906), an inactive block
 * and an inactive corner.
 */
function inventedCase(): MapInput & { drawdown: Float64Array } {
  const nx = 90;
  const ny = 60;
  const d = 25;
  const grid: Grid = { nx, ny, transform: [430000, d, 0, 5210000, 0, -d], crs: { epsg: 32632, geographic: false, geoKeys: {} } };
  const n = nx * ny;
  const T = 250;
  const wells = [
    { id: 'PW-1', x: 430900, y: 5209250, rate: -900 },
    { id: HOSTILE_ID, x: 431600, y: 5208900, rate: -600 },
    { id: 'INJ-3', x: 432000, y: 5209600, rate: 300 },
  ];
  const head = new Float64Array(n);
  const drawdown = new Float64Array(n);
  const fixedHead = new Uint8Array(n);
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      const c = cellCentre(grid, i, j);
      let s = 0;
      for (const w of wells) {
        const r = Math.max(Math.hypot(c.x - w.x, c.y - w.y), 5);
        if (r < 1500) s -= (w.rate / (2 * Math.PI * T)) * Math.log(1500 / r);
      }
      const inactive = (i > 36 && i < 48 && j > 55 && j < 70) || i + j < 10;
      head[p] = inactive ? NaN : 100 - (6 * (c.x - 430000)) / (nx * d) - s;
      drawdown[p] = inactive ? NaN : s;
      if (j === 0 && !inactive) fixedHead[p] = 1;
    }
  }
  const east = new Float64Array(n);
  const south = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    if (p % nx < nx - 1 && Number.isFinite(head[p]!) && Number.isFinite(head[p + 1]!)) east[p] = T;
    if (p + nx < n && Number.isFinite(head[p]!) && Number.isFinite(head[p + nx]!)) south[p] = T;
  }
  const flux = darcyFlux({ grid, head, eastConductance: east, southConductance: south, thickness: 20 });
  return {
    grid,
    values: head,
    drawdown,
    quantity: 'head',
    units: { length: 'm', time: 'd' },
    title: HOSTILE_TITLE,
    caution: CAUTION,
    cellLayers: [{ legend: 'Fixed-head cells', cells: fixedHead }],
    wells,
    observations: [
      { id: 'OB-A', x: 430500, y: 5209400 },
      { id: 'OB-<b>B</b>', x: 431900, y: 5208700 },
    ],
    flux,
    footnote: 'piezomap test',
  };
}

function decode(png: Uint8Array): PNG {
  return PNG.sync.read(Buffer.from(png));
}

describe('text helpers', () => {
  it('escapeMarkup escapes the five markup characters', () => {
    expect(escapeMarkup(`<a href="x">'&'</a>`)).toBe('&lt;a href=&quot;x&quot;&gt;&#39;&amp;&#39;&lt;/a&gt;');
  });
  it('formatSignificant and niceTicks give round, readable numbers', () => {
    expect(formatSignificant(1234.567, 4)).toBe('1235');
    expect(formatSignificant(-0.012345, 3)).toBe('\u22120.0123');
    expect(formatSignificant(3e-9, 2)).toBe('3.0e-9');
    expect(niceTicks(93.2, 100.4, 6).ticks).toEqual([94, 95, 96, 97, 98, 99, 100]);
  });
  it('formatLevel keeps three decimals for heads and drawdowns, and the digits of a small drawdown', () => {
    // before: a receptor drawdown of 7.9e-5 m read "0.000" in the ensemble report (the solve report showed 0.0000792)
    expect(formatLevel(108.42817)).toBe('108.428');
    expect(formatLevel(0.162)).toBe('0.162');
    expect(formatLevel(0)).toBe('0.000');
    expect(formatLevel(0.0032)).toBe('0.00320');
    expect(formatLevel(7.92e-5)).toBe('7.92e-5');
    expect(formatLevel(-0.0004)).toBe('\u22120.000400');
  });
  it('wrapText keeps every word and respects the width', () => {
    const lines = wrapText(CAUTION, 60);
    expect(lines.join(' ')).toBe(CAUTION);
    for (const line of lines) expect(line.length).toBeLessThanOrEqual(60);
  });
});

describe('renderMapSvg', () => {
  const input = inventedCase();
  const { svg } = renderMapSvg(input);

  it('escapes the title and every id', () => {
    expect(svg).not.toMatch(/<script/i);
    expect(svg).not.toMatch(/<img/i);
    expect(svg).not.toMatch(/<b>/);
    expect(svg).toContain('Invented wellfield &lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;quotes&quot;');
    expect(svg).toContain('&quot;&gt;&lt;img src=x onerror=alert(2)&gt;');
    expect(svg).toContain('OB-&lt;b&gt;B&lt;/b&gt;');
  });

  it('carries the caution, legend with units, north arrow, scale bar, contours and flow arrows', () => {
    expect(svg).toContain('Screening-level result.');
    expect(svg).toContain('Head (m)');
    expect(svg).toMatch(/Contour every [\d.]+ m/);
    expect(svg).toContain('class="north-arrow"');
    expect(svg).toMatch(/class="scale-bar"[\s\S]*?(\d+ m|\d+ km)</);
    expect((svg.match(/data-level="/g) ?? []).length).toBeGreaterThanOrEqual(10);
    expect(svg).toContain('class="flow-arrows"');
    expect(svg).toContain('Fixed-head cells');
    expect(svg).toContain('Inactive (no flow)');
  });
});

describe('renderMapSvg on other grids', () => {
  it('draws no scale bar on a lon/lat grid and turns the north arrow for rows that run north', () => {
    const values = Float64Array.from({ length: 12 }, (_, k) => k);
    const geographic: Grid = { nx: 4, ny: 3, transform: [10, 0.01, 0, 45, 0, -0.01], crs: { epsg: 4326, geographic: true, geoKeys: {} } };
    const lonLat = renderMapSvg({
      grid: geographic,
      values,
      quantity: 'head',
      units: { length: 'm', time: 'd' },
      title: 't',
      caution: CAUTION,
    });
    expect(lonLat.svg).not.toContain('class="scale-bar"');
    expect(lonLat.svg).toContain('rotate(0)');
    const southUp: Grid = { nx: 4, ny: 3, transform: [0, 10, 0, 0, 0, 10], crs: null };
    const flipped = renderMapSvg({
      grid: southUp,
      values,
      quantity: 'head',
      units: { length: 'ft', time: 'd' },
      title: 't',
      caution: CAUTION,
    });
    expect(flipped.svg).toContain('rotate(180)');
    expect(flipped.svg).toMatch(/class="scale-bar"[\s\S]*? ft</);
  });

  it('copes with a field that has no active cell', () => {
    const grid: Grid = { nx: 3, ny: 2, transform: [0, 1, 0, 0, 0, -1], crs: null };
    const { svg } = renderMapSvg({
      grid,
      values: new Float64Array(6).fill(NaN),
      quantity: 'drawdown',
      units: { length: 'm', time: 'd' },
      title: 'empty',
      caution: CAUTION,
    });
    expect(svg).toContain('Inactive (no flow)');
    expect(svg).not.toContain('data-level=');
  });
});

describe('renderMapPng', () => {
  const input = inventedCase();

  it('decodes with pngjs at the drawing size, and twice that at scale 2', () => {
    const one = renderMapPng(input);
    const image = decode(one.png);
    expect([image.width, image.height]).toEqual([one.width, one.height]);
    expect(one.width).toBe(1100);
    const two = renderMapPng(input, { scale: 2, width: 800 });
    const image2 = decode(two.png);
    expect([image2.width, image2.height]).toEqual([1600, 2 * two.height]);
  });

  it('paints each active cell in the published cividis colour of its head and leaves inactive cells blank', () => {
    // No arrows, wells or contours here so that cell pixels are unobstructed.
    const bare: MapInput = {
      ...input,
      flux: undefined,
      wells: [],
      observations: [],
      cellLayers: [],
      contours: { levels: [], interval: 1 },
    };
    const drawing = renderMapPng(bare);
    const image = decode(drawing.png);
    const { grid, values } = bare;
    const frameLeft = 20;
    const frameTop = 64;
    const scale = Math.min((1100 - 40 - 250) / (grid.nx * 25), 720 / (grid.ny * 25));
    let min = Infinity;
    let max = -Infinity;
    for (const v of values) if (Number.isFinite(v)) [min, max] = [Math.min(min, v), Math.max(max, v)];
    const pixel = (i: number, j: number) => {
      const x = Math.floor(frameLeft + (j + 0.5) * 25 * scale);
      const y = Math.floor(frameTop + (i + 0.5) * 25 * scale);
      const o = 4 * (y * image.width + x);
      return [image.data[o]!, image.data[o + 1]!, image.data[o + 2]!];
    };
    for (const [i, j] of [
      [5, 30],
      [20, 10],
      [30, 45],
      [55, 85],
    ] as const) {
      const v = values[i * grid.nx + j]!;
      // The ramp uses cividis from 0.1 to 1 (Nunez et al. 2018, via d3-scale-chromatic as the reference).
      const expected = parseColour(interpolateCividis(0.1 + (0.9 * (v - min)) / (max - min)));
      const got = pixel(i, j);
      for (let c = 0; c < 3; c++) expect(Math.abs(got[c]! - expected[c]!)).toBeLessThanOrEqual(4);
    }
    // Centre of the inactive block (rows 37..47, cols 56..69): white or the light grey dots, never a ramp colour.
    const blank = pixel(42, 62);
    expect(Math.min(...blank)).toBeGreaterThanOrEqual(180);
    expect(Math.max(...blank) - Math.min(...blank)).toBeLessThanOrEqual(8);
  });

  it('centres the drawdown ramp on zero: zero drawdown is the light middle of BrBG (Brewer, ColorBrewer)', () => {
    const { grid, drawdown } = input;
    const dd = new Float64Array(drawdown.length);
    for (let p = 0; p < dd.length; p++) dd[p] = Number.isFinite(drawdown[p]!) ? (p % grid.nx < 45 ? 0 : 2) : NaN;
    dd[0] = -2; // symmetric limits -2..2
    const drawing = renderMapPng({
      ...input,
      values: dd,
      quantity: 'drawdown',
      flux: undefined,
      wells: [],
      observations: [],
      cellLayers: [],
      contours: { levels: [], interval: null },
    });
    const image = decode(drawing.png);
    const scale = Math.min((1100 - 40 - 250) / (grid.nx * 25), 720 / (grid.ny * 25));
    const at = (i: number, j: number) => {
      const o = 4 * (Math.floor(64 + (i + 0.5) * 25 * scale) * image.width + Math.floor(20 + (j + 0.5) * 25 * scale));
      return [image.data[o]!, image.data[o + 1]!, image.data[o + 2]!];
    };
    const middle = parseColour(interpolateBrBG(0.5));
    const lowered = parseColour(interpolateBrBG(0)); // positive drawdown = brown end
    const zero = at(30, 20);
    const two = at(10, 80);
    for (let c = 0; c < 3; c++) {
      expect(Math.abs(zero[c]! - middle[c]!)).toBeLessThanOrEqual(4);
      expect(Math.abs(two[c]! - lowered[c]!)).toBeLessThanOrEqual(4);
    }
    expect(drawing.svg).toContain('0 (no change)');
  });

  it('writes the maps for a look (test/tmp/report/)', () => {
    mkdirSync(OUT, { recursive: true });
    const head = renderMapPng(input);
    writeFileSync(join(OUT, 'map-head.png'), head.png);
    const dd = renderMapPng({
      ...input,
      values: input.drawdown,
      quantity: 'drawdown',
      title: 'Variant expanded: drawdown',
      flux: undefined,
    });
    writeFileSync(join(OUT, 'map-drawdown.png'), dd.png);
    expect(existsSync(join(OUT, 'map-head.png'))).toBe(true);
  });
});

describe('convergencePlotSvg', () => {
  it('draws one path, a tolerance line and decade ticks; long histories are thinned', () => {
    const history = Array.from({ length: 5001 }, (_, k) => Math.pow(0.997, k));
    const svg = convergencePlotSvg(history, { tolerance: 1e-6 });
    expect((svg.match(/<path /g) ?? []).length).toBe(1);
    expect(svg).toContain('tolerance 1.0e-6');
    expect(svg).toContain('1e0');
    const points = (svg.match(/[ML]\d/g) ?? []).length;
    expect(points).toBeGreaterThan(100);
    expect(points).toBeLessThanOrEqual(802);
  });
  it('says so when there is no history', () => {
    expect(convergencePlotSvg([])).toContain('no residual history');
  });
});

function reportInput(kind: 'solve' | 'compare'): ReportInput {
  const input = inventedCase();
  const headMap = renderMapSvg(input).svg;
  const ddMap = renderMapSvg({
    ...input,
    values: input.drawdown,
    quantity: 'drawdown',
    title: 'Variant <i>x</i>: drawdown',
    flux: undefined,
  }).svg;
  const history = Array.from({ length: 140 }, (_, k) => Math.pow(0.88, k) * (1 + 0.2 * Math.sin(k)));
  const baseRun = {
    name: 'baseline',
    solver: {
      method: 'pcg',
      converged: true,
      stopReason: 'converged',
      iterations: 139,
      relativeResidual: 1.4e-8,
      tolerance: 1e-8,
      criterion: '||r|| <= 1e-8 ||b||',
      solveSeconds: 0.042,
      history,
      notes: [`note with ${HOSTILE_ID}`],
    },
    budget: {
      terms: [
        { term: `west river ${HOSTILE_ID}`, inflow: 1520.5, outflow: 320.1 },
        { term: 'wells', inflow: 300, outflow: 1500 },
        { term: 'recharge', inflow: 0, outflow: 0 },
      ],
      discrepancyPercent: 0.0002,
    },
    head: { min: 93.1, max: 100.2 },
    wells: input.wells!.map((w, k) => ({ id: w.id, x: w.x, y: w.y, row: 20 + k, col: 30 + k, rate: w.rate!, cellHead: 97 - k })),
    observations: [
      { id: 'OB-A', observed: 98.1, simulated: 98.25, residual: 0.15 },
      { id: '<script>alert(3)</script>', observed: 96.4, simulated: 96.1, residual: -0.3 },
    ],
    maps: [{ caption: `Head \u2013 ${HOSTILE_TITLE}`, svg: headMap, file: 'baseline/head-map.png' }],
  };
  const runs = [baseRun];
  if (kind === 'compare') {
    runs.push({
      ...baseRun,
      name: 'expanded',
      maxDrawdown: 2.7,
      wells: baseRun.wells.map((w) => ({ ...w, drawdown: 1.2 })),
      maps: [{ caption: 'Drawdown of variant expanded', svg: ddMap, file: 'expanded/drawdown-map.png' }],
    } as typeof baseRun);
  }
  return {
    kind,
    title: HOSTILE_TITLE,
    units: { length: 'm', time: 'd' },
    grid: { nx: 90, ny: 60, dx: 25, dy: 25, crs: 'EPSG:32632', activeCells: 5200, fixedHeadCells: 50 },
    runs,
    variants:
      kind === 'compare'
        ? [
            {
              name: 'expanded',
              maxDrawdown: 2.7,
              totalWithdrawal: 1500,
              discrepancyPercent: 0.001,
              converged: true,
              observationDrawdowns: [0.4, 1.1],
            },
          ]
        : undefined,
    observationIds: ['OB-A', '<script>alert(3)</script>'],
    warnings: [`cell (3, 4): thickness below 1 m ${HOSTILE_ID}`],
    caution: CAUTION,
    scenarioFile: 'data/<invented>.json',
    program: 'piezomap test',
    generatedAt: '2026-01-01T00:00:00Z',
    timings: [{ stage: 'solve', seconds: 0.05 }],
    files: ['head.tif', 'report.html'],
  };
}

describe('renderReportHtml', () => {
  it('escapes every user string and loads nothing from outside', () => {
    const html = renderReportHtml(reportInput('compare'));
    expect(html).not.toMatch(/<script/i);
    expect(html).not.toMatch(/<img src=x/i);
    expect(html).not.toMatch(/<i>x<\/i>/);
    expect(html).toContain('&lt;script&gt;alert(1)&lt;/script&gt;');
    expect(html).toContain('&quot;&gt;&lt;img src=x onerror=alert(2)&gt;');
    expect(html).toContain("default-src 'none'");
    // Every src/href is a data: URL or an in-page anchor.
    for (const m of html.matchAll(/(?:src|href)="([^"]*)"/g)) expect(m[1]!.startsWith('data:') || m[1]!.startsWith('#')).toBe(true);
    expect(html).toContain('Variants against the baseline');
    expect(html.match(/Screening-level result\./g)!.length).toBeGreaterThanOrEqual(2);
  });
});

describe('HTML report in headless Chromium', () => {
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

  it('renders both reports, loads every image, logs no error, runs no hostile script, and takes a screenshot', async (ctx) => {
    if (!available) {
      console.warn('skipped: /usr/bin/chromium not installed (apt-get install -y chromium) - browser test of the report not run');
      ctx.skip();
      return;
    }
    mkdirSync(OUT, { recursive: true });
    const context = await chromium.launchPersistentContext(userDataDir, {
      executablePath,
      headless: true,
      args: [
        '--headless',
        '--no-sandbox',
        '--disable-gpu',
        '--disable-quic',
        '--no-first-run',
        '--disable-background-networking',
        '--disable-component-update',
        '--disable-sync',
      ],
      viewport: { width: 1280, height: 900 },
    });
    try {
      for (const kind of ['solve', 'compare'] as const) {
        const file = resolve(OUT, `report-${kind}.html`);
        writeFileSync(file, renderReportHtml(reportInput(kind)));
        const page = await context.newPage();
        const problems: string[] = [];
        const outside: string[] = [];
        page.on('console', (msg) => {
          if (msg.type() === 'error') problems.push(`${msg.type()}: ${msg.text()}`);
        });
        page.on('pageerror', (error) => problems.push(`page error: ${error.message}`));
        page.on('dialog', async (dialog) => {
          problems.push(`dialog opened: ${dialog.message()}`);
          await dialog.dismiss();
        });
        page.on('request', (request) => {
          const url = request.url();
          if (!url.startsWith('data:') && !url.startsWith('file:')) outside.push(url);
        });
        await page.goto(pathToFileURL(file).href, { waitUntil: 'load' });
        const images = await page.$$eval('img', (list) =>
          list.map((img) => ({ complete: img.complete, width: img.naturalWidth, height: img.naturalHeight })),
        );
        expect(images.length).toBe(kind === 'solve' ? 1 : 2);
        for (const img of images) {
          expect(img.complete).toBe(true);
          expect(img.width).toBeGreaterThan(500);
          expect(img.height).toBeGreaterThan(300);
        }
        const text = await page.textContent('body');
        expect(text).toContain('<script>alert(1)</script>');
        expect(text).toContain('"><img src=x onerror=alert(2)>');
        expect(text).toContain('Screening-level result.');
        expect(await page.title()).toContain('<script>alert(1)</script>');
        expect(await page.$$('script')).toHaveLength(0);
        expect(await page.$$('img[src="x"]')).toHaveLength(0);
        expect(await page.$$('svg.convergence path')).toHaveLength(kind === 'solve' ? 1 : 2);
        // Variants are columns (quantities as rows): a heading column and one per variant.
        if (kind === 'compare') expect(await page.$$('#variants thead th')).toHaveLength(2);
        await page.screenshot({ path: join(OUT, `report-${kind}.png`), fullPage: true });
        expect(problems).toEqual([]);
        expect(outside).toEqual([]);
        await page.close();
      }
    } finally {
      await context.close();
    }
    expect(existsSync(join(OUT, 'report-compare.png'))).toBe(true);
  });
});
