/**
 * Maps of ensemble results (mean and standard deviation of head, exceedance and capture probabilities) as SVG,
 * rasterised to PNG with the project's renderer (png.ts). Layers, bottom to top: the "no data" dot pattern
 * (inactive cells), the cell colours as an embedded PNG scaled nearest-neighbour, then receptors and wells with
 * their labels (placed by labels.ts so that none overlaps another); around it the title, the subtitle (what is
 * shown, grid, realisations), a colour bar with ticks and units, and the caution line. A capture map may carry
 * dashed lines where the probability of a travel-time zone is 0.5.
 *
 * Ramps (256-entry tables from d3-scale-chromatic, as colour.ts builds them):
 *  - mean head: cividis, the head maps' ramp (colour.ts);
 *  - standard deviation: PuBu, sequential, from 0 (ColorBrewer 2.0, Brewer; listed there as colour-blind safe);
 *  - probability: YlOrRd, sequential over the fixed range 0..1 (ColorBrewer 2.0), so maps compare at a glance.
 */
import { contours as d3Contours } from 'd3-contour';
import { finiteRange } from '../analysis/contours.js';
import { interpolatePuBu, interpolateYlOrRd } from 'd3-scale-chromatic';
import { cellHeight, cellWidth, crsLabel, type Grid } from '../grid.js';
import { colourCells, headRamp, parseColour, rampHex, type ColourRamp } from './colour.js';
import { placePointLabels, symbolBox, type PointLabelRequest } from './labels.js';
import { dataUrl, encodePng, MAP_FONT_STACK, svgToPng } from './png.js';
import { escapeMarkup, formatFixed, niceTicks, wrapText } from './text.js';

export interface EnsembleMapContext {
  grid: Grid;
  units: { length: string; time: string };
  /** The scenario's title. */
  title: string;
  realisations: number;
  /** The run's wells (negative rate = withdrawal). */
  wells: ReadonlyArray<{ id: string; x: number; y: number; rate: number }>;
  receptors: ReadonlyArray<{ id: string; x: number; y: number }>;
  /** The caution every result carries. */
  caution: string;
  /** Small print at the bottom right (program and version). */
  footnote?: string;
}

/** What a map shows: head (mean), a standard deviation (length), or a probability (0..1); `well` is highlighted. */
export interface EnsembleMapKind {
  quantity: 'head' | 'sd' | 'probability';
  well?: string;
  /**
   * Lines where other per-cell probabilities equal 0.5 (e.g. of the travel-time zones on the steady zone's map),
   * each dashed in its own way, with its legend text; at most four.
   */
  outlines?: ReadonlyArray<{ values: Float64Array; label: string }>;
}

/** Dash patterns of the outlines, in order. */
const OUTLINE_DASHES = ['5 3', '1.5 2.5', '9 3 2 3', ''];

/**
 * The line where `values` (per cell) equal `level`, traced by d3-contour between cell centres (NaN as 0), as an SVG
 * path in px: d3-contour's coordinates count cells from the grid's north-west corner.
 */
function outlinePath(values: Float64Array, nx: number, ny: number, level: number, x0: number, y0: number, cw: number, ch: number): string {
  const grid = Array.from(values, (v) => (v === v ? v : 0));
  const [shape] = d3Contours().size([nx, ny]).thresholds([level]).smooth(true)(grid);
  const parts: string[] = [];
  for (const polygon of shape!.coordinates) {
    for (const ring of polygon) {
      parts.push(`M${ring.map(([u, v]) => `${r1(x0 + u! * cw)},${r1(y0 + v! * ch)}`).join('L')}Z`);
    }
  }
  return parts.join('');
}

const INK = '#1d2327';
const MUTED = '#5b6770';
const RECEPTOR_INK = '#8b1e3f';
const MARGIN = 20;
const LEGEND_WIDTH = 190;
const SIZE = 256;

let puBu: Uint8Array | null = null;
let ylOrRd: Uint8Array | null = null;

function table(interpolate: (t: number) => string): Uint8Array {
  const out = new Uint8Array(SIZE * 3);
  for (let k = 0; k < SIZE; k++) out.set(parseColour(interpolate(k / (SIZE - 1))), 3 * k);
  return out;
}

/** The ramp of a map: head over its range, standard deviation from 0, probability over 0..1. */
export function ensembleRamp(kind: EnsembleMapKind, values: Float64Array): ColourRamp {
  const range = finiteRange(values);
  if (kind.quantity === 'probability') {
    ylOrRd ??= table(interpolateYlOrRd);
    return { table: ylOrRd, min: 0, max: 1 };
  }
  if (kind.quantity === 'sd') {
    puBu ??= table(interpolatePuBu);
    const max = range && range.max > 0 ? range.max : 1;
    return { table: puBu, min: 0, max };
  }
  return headRamp(range?.min ?? 0, range?.max ?? 1);
}

const r1 = (v: number) => (Math.round(v * 10) / 10).toString();

/** Draw the map as a standalone SVG document. */
export function ensembleMapSvg(
  ctx: EnsembleMapContext,
  values: Float64Array,
  kind: EnsembleMapKind,
  caption: string,
  width = 900,
): { svg: string; width: number; height: number } {
  const { grid } = ctx;
  const { nx, ny } = grid;
  const dx = cellWidth(grid);
  const dy = cellHeight(grid);
  const L = ctx.units.length;
  const ramp = ensembleRamp(kind, values);
  const parts: string[] = [];

  // Header.
  const titleLines = wrapText(caption, Math.floor((width - 2 * MARGIN) / 11));
  const subtitle = `${ctx.title} \u00b7 ensemble of ${ctx.realisations} realisations \u00b7 ${nx} \u00d7 ${ny} cells of ${formatFixed(dx, dx % 1 ? 2 : 0)} \u00d7 ${formatFixed(dy, dy % 1 ? 2 : 0)} ${L} \u00b7 ${crsLabel(grid.crs)}`;
  const subtitleLines = wrapText(subtitle, Math.floor((width - 2 * MARGIN) / 7.5));
  let y = 10;
  for (const line of titleLines) {
    y += 22;
    parts.push(`<text x="${MARGIN}" y="${y}" font-size="18" font-weight="bold" fill="${INK}">${escapeMarkup(line)}</text>`);
  }
  y += 2;
  for (const line of subtitleLines) {
    y += 17;
    parts.push(`<text x="${MARGIN}" y="${y}" font-size="12.5" fill="${MUTED}">${escapeMarkup(line)}</text>`);
  }
  const top = y + 14;

  // Frame: one px scale for x and y.
  const scale = Math.min((width - 2 * MARGIN - LEGEND_WIDTH) / (nx * dx), 560 / (ny * dy));
  const frame = { left: MARGIN, top, width: nx * dx * scale, height: ny * dy * scale };
  const t = grid.transform;
  const px = (x: number) => frame.left + ((x - t[0]) / t[1]) * dx * scale;
  const py = (yy: number) => frame.top + ((yy - t[3]) / t[5]) * dy * scale;

  // Cells: each a block of identical pixels, so the renderer's scaling keeps cell edges sharp.
  const block = Math.max(1, Math.min(8, Math.ceil(frame.width / nx)));
  const W = nx * block;
  const sampled = new Float64Array(W * ny * block);
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const v = values[i * nx + j]!;
      for (let a = 0; a < block; a++) sampled.fill(v, (i * block + a) * W + j * block, (i * block + a) * W + (j + 1) * block);
    }
  }
  const image = encodePng(colourCells(sampled, ramp), W, ny * block);
  const box = `x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}"`;
  parts.push(`<rect ${box} fill="url(#nodata)"/>`);
  parts.push(
    `<image ${box} preserveAspectRatio="none" image-rendering="optimizeSpeed" style="image-rendering:pixelated" href="${dataUrl('image/png', image)}"/>`,
  );

  // Outlines (over the cells, under the points), clipped to the frame.
  const outlines = (kind.outlines ?? []).slice(0, OUTLINE_DASHES.length);
  const cellPx = dx * scale;
  const cellPy = dy * scale;
  outlines.forEach((o, k) => {
    const d = outlinePath(o.values, nx, ny, 0.5, frame.left, frame.top, cellPx, cellPy);
    if (!d) return;
    parts.push(
      `<path d="${d}" fill="none" stroke="#ffffff" stroke-width="3.2" stroke-opacity="0.8" clip-path="url(#frame)"/><path d="${d}" fill="none" stroke="${INK}" stroke-width="1.6"${OUTLINE_DASHES[k] ? ` stroke-dasharray="${OUTLINE_DASHES[k]}"` : ''} clip-path="url(#frame)"/>`,
    );
  });

  // Points: the highlighted well first (its label placed first), then the other wells, then receptors.
  const wells = [...ctx.wells].sort((a, b) => Number(b.id === kind.well) - Number(a.id === kind.well));
  const requests: Array<PointLabelRequest & { shape: string }> = [];
  for (const w of wells) {
    const x = px(w.x);
    const yy = py(w.y);
    const strong = w.id === kind.well;
    const r = strong ? 7 : 5.5;
    const fill = w.rate < 0 ? (strong ? '#000000' : INK) : '#ffffff';
    requests.push({
      x,
      y: yy,
      radius: r,
      text: w.id,
      size: strong ? 13 : 12,
      bold: strong,
      shape: `<polygon points="${r1(x)},${r1(yy - r)} ${r1(x + r)},${r1(yy + r * 0.8)} ${r1(x - r)},${r1(yy + r * 0.8)}" fill="${fill}" stroke="#ffffff" stroke-width="1.5"/><polygon points="${r1(x)},${r1(yy - r)} ${r1(x + r)},${r1(yy + r * 0.8)} ${r1(x - r)},${r1(yy + r * 0.8)}" fill="none" stroke="${INK}" stroke-width="1"/>`,
    });
  }
  for (const rc of ctx.receptors) {
    const x = px(rc.x);
    const yy = py(rc.y);
    const r = 5;
    requests.push({
      x,
      y: yy,
      radius: r,
      text: rc.id,
      size: 12,
      bold: false,
      shape: `<polygon points="${r1(x)},${r1(yy - r)} ${r1(x + r)},${r1(yy)} ${r1(x)},${r1(yy + r)} ${r1(x - r)},${r1(yy)}" fill="${RECEPTOR_INK}" stroke="#ffffff" stroke-width="1.2"/>`,
    });
  }
  const symbols = requests.map((q) => symbolBox(q.x, q.y, q.radius));
  const frameBox = { x0: frame.left, y0: frame.top, x1: frame.left + frame.width, y1: frame.top + frame.height };
  const placed = placePointLabels(requests, symbols, frameBox);
  parts.push(`<g clip-path="url(#frame)">`);
  requests.forEach((q, k) => {
    const p = placed[k]!;
    parts.push(q.shape);
    if (p.leader)
      parts.push(
        `<line x1="${r1(p.leader.x1)}" y1="${r1(p.leader.y1)}" x2="${r1(p.leader.x2)}" y2="${r1(p.leader.y2)}" stroke="${INK}" stroke-width="0.8"/>`,
      );
    parts.push(
      `<rect x="${r1(p.box.x0)}" y="${r1(p.box.y0)}" width="${r1(p.box.x1 - p.box.x0)}" height="${r1(p.box.y1 - p.box.y0)}" fill="#ffffff" fill-opacity="0.75"/>`,
    );
    parts.push(
      `<text x="${r1(p.x)}" y="${r1(p.baseline)}" font-size="${q.size}"${q.bold ? ' font-weight="bold"' : ''} fill="${INK}">${escapeMarkup(q.text)}</text>`,
    );
  });
  parts.push('</g>');
  parts.push(`<rect ${box} fill="none" stroke="${INK}" stroke-width="1"/>`);

  // Legend: a vertical colour bar with round ticks, then the point symbols and the no-data swatch.
  const lx = frame.left + frame.width + 28;
  let ly = frame.top + 4;
  // Titles of at most two short lines: the legend column is LEGEND_WIDTH wide.
  const legendTitle =
    kind.quantity === 'head'
      ? [`Mean head (${L})`]
      : kind.quantity === 'sd'
        ? ['Standard deviation', `of head (${L})`]
        : kind.well !== undefined
          ? ['Probability of capture']
          : ['Probability'];
  legendTitle.forEach((line, k) =>
    parts.push(`<text x="${lx}" y="${ly + 10 + 16 * k}" font-size="12.5" font-weight="bold" fill="${INK}">${escapeMarkup(line)}</text>`),
  );
  ly += 16 * (legendTitle.length - 1);
  ly += 20;
  const barHeight = Math.min(220, Math.max(120, frame.height - 120));
  const steps = 64;
  for (let k = 0; k < steps; k++) {
    const v = ramp.max - ((k + 0.5) / steps) * (ramp.max - ramp.min);
    parts.push(
      `<rect x="${lx}" y="${r1(ly + (k * barHeight) / steps)}" width="18" height="${r1(barHeight / steps + 0.6)}" fill="${rampHex(ramp, v)}"/>`,
    );
  }
  parts.push(`<rect x="${lx}" y="${ly}" width="18" height="${barHeight}" fill="none" stroke="${INK}" stroke-width="0.8"/>`);
  const ticks = niceTicks(ramp.min, ramp.max, 5);
  for (const v of ticks.ticks) {
    if (v < ramp.min - 1e-12 || v > ramp.max + 1e-12) continue;
    const ty = ly + ((ramp.max - v) / (ramp.max - ramp.min)) * barHeight;
    parts.push(`<line x1="${lx + 18}" y1="${r1(ty)}" x2="${lx + 23}" y2="${r1(ty)}" stroke="${INK}" stroke-width="0.8"/>`);
    parts.push(`<text x="${lx + 27}" y="${r1(ty + 4)}" font-size="11.5" fill="${INK}">${formatFixed(v, ticks.decimals)}</text>`);
  }
  ly += barHeight + 22;
  const legendRow = (shape: string, text: string) => {
    parts.push(shape);
    parts.push(`<text x="${lx + 22}" y="${ly + 4}" font-size="11.5" fill="${INK}">${escapeMarkup(text)}</text>`);
    ly += 20;
  };
  outlines.forEach((o, k) =>
    legendRow(
      `<line x1="${lx}" y1="${ly}" x2="${lx + 16}" y2="${ly}" stroke="${INK}" stroke-width="1.6"${OUTLINE_DASHES[k] ? ` stroke-dasharray="${OUTLINE_DASHES[k]}"` : ''}/>`,
      o.label,
    ),
  );
  if (ctx.wells.length)
    legendRow(
      `<polygon points="${lx + 8},${ly - 5} ${lx + 13},${ly + 4} ${lx + 3},${ly + 4}" fill="${INK}"/>`,
      kind.well !== undefined
        ? `well (${kind.well} in bold)`
        : ctx.wells.some((w) => !(w.rate < 0))
          ? 'well (open: injection)'
          : 'withdrawal well',
    );
  if (ctx.receptors.length)
    legendRow(
      `<polygon points="${lx + 8},${ly - 5} ${lx + 13},${ly} ${lx + 8},${ly + 5} ${lx + 3},${ly}" fill="${RECEPTOR_INK}"/>`,
      'receptor',
    );
  legendRow(
    `<rect x="${lx + 1}" y="${ly - 6}" width="14" height="12" fill="url(#nodata)" stroke="${MUTED}" stroke-width="0.6"/>`,
    'inactive (no data)',
  );
  const legendBottom = ly;

  // Footer: the caution in its own band.
  const body = Math.max(frame.height, legendBottom - frame.top);
  const footTop = frame.top + body + 18;
  const footer = wrapText(ctx.caution, Math.floor((width - 2 * MARGIN) / 6.9));
  parts.push(`<rect x="${MARGIN}" y="${footTop}" width="4" height="${footer.length * 16 + 4}" fill="#b5651d"/>`);
  footer.forEach((line, k) =>
    parts.push(`<text x="${MARGIN + 12}" y="${footTop + 14 + k * 16}" font-size="12.5" fill="${INK}">${escapeMarkup(line)}</text>`),
  );
  const height = Math.round(footTop + footer.length * 16 + 30);
  if (ctx.footnote)
    parts.push(
      `<text x="${width - MARGIN}" y="${height - 8}" font-size="10.5" fill="${MUTED}" text-anchor="end">${escapeMarkup(ctx.footnote)}</text>`,
    );
  const w = width;
  const svg = [
    `<svg xmlns="http://www.w3.org/2000/svg" width="${w}" height="${height}" viewBox="0 0 ${w} ${height}" font-family="${MAP_FONT_STACK}" role="img" aria-label="${escapeMarkup(caption)}">`,
    '<defs><pattern id="nodata" width="6" height="6" patternUnits="userSpaceOnUse"><rect width="6" height="6" fill="#ffffff"/><circle cx="3" cy="3" r="0.8" fill="#b9bec2"/></pattern>',
    `<clipPath id="frame"><rect ${box}/></clipPath></defs>`,
    `<rect width="${w}" height="${height}" fill="#ffffff"/>`,
    ...parts,
    '</svg>',
  ].join('\n');
  return { svg, width: w, height };
}

/** The map as PNG bytes. */
export function ensembleMapPng(ctx: EnsembleMapContext, values: Float64Array, kind: EnsembleMapKind, caption: string): Uint8Array {
  return svgToPng(ensembleMapSvg(ctx, values, kind, caption).svg).png;
}
