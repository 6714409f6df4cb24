/**
 * The quick-look map: one SVG drawing (for the HTML report) that is also rasterised to PNG (for the result folder).
 *
 * Layers, bottom to top: "no data" dot pattern (shows through inactive cells), the cell colours as an embedded
 * PNG drawn with nearest-neighbour scaling (each cell one flat colour, inactive cells transparent), hatching on
 * fixed-head cells, contour lines with labels, flow-direction arrows, observation points and wells with labels;
 * around it the title, north arrow, scale bar, legend with units, and the caution line.
 * Every text that comes from the user (title, ids) is escaped.
 */
import { cellHeight, cellWidth, crsLabel, type Grid } from '../grid.js';
import { contourField, decimalsOf, finiteRange, type ContourSet } from '../analysis/contours.js';
import { colourCells, drawdownRamp, headRamp, rampHex, type ColourRamp } from './colour.js';
import { dataUrl, encodePng, MAP_FONT_STACK, svgToPng } from './png.js';
import { escapeMarkup, formatFixed, niceTicks, wrapText } from './text.js';
import type { MapOverlay } from './trackingLayer.js';

export interface MapPoint {
  id: string;
  /** Map coordinates in the raster CRS. */
  x: number;
  y: number;
  /** Well rate (length^3/time, negative = withdrawal); decides the well symbol. */
  rate?: number;
}

export interface MapInput {
  grid: Grid;
  /** Head or drawdown per cell, NaN = inactive. */
  values: Float64Array;
  quantity: 'head' | 'drawdown';
  units: { length: string; time: string };
  title: string;
  /** Second line under the title; default: what is shown, grid size and CRS. */
  subtitle?: string;
  caution: string;
  /** Contours to draw; default: automatic round interval from the values. */
  contours?: ContourSet;
  /** Cells of flow terms drawn hatched (e.g. fixed heads), one legend row per layer; 1 = the term acts on the cell. */
  cellLayers?: ReadonlyArray<{ legend: string; cells: Uint8Array; style?: { colour: string; angle: number } }>;
  wells?: readonly MapPoint[];
  observations?: readonly MapPoint[];
  /** Cell-centred Darcy flux (east- and north-positive) for the flow-direction arrows. */
  flux?: { qx: Float64Array; qy: Float64Array };
  /** Small print at the bottom right, e.g. the program version. */
  footnote?: string;
  /** Layers drawn above the flow arrows and below the points, each with its legend rows (e.g. capture zones). */
  overlays?: readonly MapOverlay[];
}

export interface MapOptions {
  /** Width of the whole drawing in px. Default 1100. */
  width?: number;
  /** Largest height of the map frame in px. Default 720. */
  maxMapHeight?: number;
  /** Distance between flow arrows in px. Default 40. */
  arrowSpacing?: number;
}

export interface MapDrawing {
  svg: string;
  width: number;
  height: number;
}

const INK = '#1d2327';
const MUTED = '#5b6770';
const LEGEND_WIDTH = 250;
const MARGIN = 20;
const HEADER = 64;

/** Draw the map as a standalone SVG document. */
export function renderMapSvg(input: MapInput, options: MapOptions = {}): MapDrawing {
  const { grid, values } = input;
  const { nx, ny } = grid;
  const width = Math.max(600, Math.round(options.width ?? 1100));
  const maxMapHeight = options.maxMapHeight ?? 720;
  const dx = cellWidth(grid);
  const dy = cellHeight(grid);

  // Map frame: keep the aspect ratio of the ground, one px scale for x and y.
  const frameMaxWidth = width - 2 * MARGIN - LEGEND_WIDTH;
  const scale = Math.min(frameMaxWidth / (nx * dx), maxMapHeight / (ny * dy));
  const frame = { left: MARGIN, top: HEADER, width: nx * dx * scale, height: ny * dy * scale };
  const cellPx = dx * scale;
  const cellPy = dy * scale;

  const range = finiteRange(values);
  const ramp = makeRamp(input.quantity, range);
  const contours = input.contours ?? contourField(grid, values);
  const levelDecimals = contourDecimals(contours);

  // Map coordinates -> px through cell space, so rotated-free grids of any axis direction line up with the image.
  const t = grid.transform;
  const px = (x: number) => frame.left + ((x - t[0]) / t[1]) * cellPx;
  const py = (y: number) => frame.top + ((y - t[3]) / t[5]) * cellPy;

  const parts: string[] = [];
  const footerLines = wrapText(input.caution, Math.floor((width - 2 * MARGIN) / 6.9));
  // Each kind of point drawn as a density takes five legend rows of 24 px instead of up to three.
  const denseRows = (denseKinds(input).wells ? 5 : 0) + (denseKinds(input).observations ? 5 : 0);
  const overlayRows = (input.overlays ?? []).reduce((sum, o) => sum + o.legend.length, 0);
  const legendHeight = 520 + 24 * denseRows + 24 * overlayRows;
  const bodyHeight = Math.max(frame.height, legendHeight);
  const height = Math.round(frame.top + bodyHeight + 24 + footerLines.length * 16 + 26);

  parts.push(
    `<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" font-family="${MAP_FONT_STACK}" role="img" aria-label="${escapeMarkup(input.title)}">`,
  );
  parts.push(defs());
  parts.push(`<rect width="${width}" height="${height}" fill="#ffffff"/>`);

  // Header
  const subtitle =
    input.subtitle ??
    `${input.quantity === 'head' ? 'Head' : 'Drawdown (positive = lowered)'}, ${input.units.length} \u00b7 ${nx} \u00d7 ${ny} cells of ${fmtLength(dx)} \u00d7 ${fmtLength(dy)} ${input.units.length} \u00b7 ${crsLabel(grid.crs)}`;
  parts.push(`<text x="${MARGIN}" y="30" font-size="20" font-weight="bold" fill="${INK}">${escapeMarkup(input.title)}</text>`);
  parts.push(`<text x="${MARGIN}" y="51" font-size="13" fill="${MUTED}">${escapeMarkup(subtitle)}</text>`);

  // Map body, clipped to the frame.
  const clip = `<clipPath id="frame"><rect x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}"/></clipPath>`;
  parts.push(`<defs>${clip}</defs><g clip-path="url(#frame)">`);
  parts.push(`<rect x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}" fill="url(#nodata)"/>`);
  parts.push(cellImage(values, nx, ny, ramp, frame));
  const layers = (input.cellLayers ?? []).filter((layer) => hasAny(layer.cells));
  // Each layer its own hatching (colour, angle) from the term's legend data; the fixed-head look by default.
  const fills = layers.map((layer, i) => (layer.style ? `cells${i}` : 'fixedhead'));
  parts.push(`<defs>${layers.map((layer, i) => (layer.style ? hatchPattern(`cells${i}`, layer.style.colour, layer.style.angle) : '')).join('')}</defs>`);
  layers.forEach((layer, i) => parts.push(fixedHeadPath(layer.cells, values, nx, ny, frame.left, frame.top, cellPx, cellPy, fills[i]!, layer.style?.colour)));
  parts.push(contourLayer(contours, levelDecimals, px, py, input.quantity));
  if (input.flux) parts.push(arrowLayer(input.flux, values, grid, frame, cellPx, cellPy, options.arrowSpacing ?? 40));
  for (const overlay of input.overlays ?? []) parts.push(overlay.draw(px, py));
  const dense = denseKinds(input);
  parts.push(pointLayer(dense.observations ? [] : (input.observations ?? []), dense.wells ? [] : (input.wells ?? []), px, py));
  if (dense.observations) parts.push(densityLayer(input.observations ?? [], px, py, frame, OBSERVATION_DENSITY_COLOUR, 'observation-density'));
  if (dense.wells) parts.push(densityLayer(input.wells ?? [], px, py, frame, INK, 'well-density'));
  parts.push('</g>');
  parts.push(`<rect x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}" fill="none" stroke="${INK}" stroke-width="1"/>`);

  parts.push(northArrow(frame.left + frame.width - 30, frame.top + 14, t[5] < 0));
  if (!grid.crs?.geographic) parts.push(scaleBar(frame, nx * dx, scale, input.units.length));

  // Legend
  parts.push(
    legend(input, ramp, contours, levelDecimals, frame.left + frame.width + 28, frame.top, layers.map((layer, i) => ({ label: layer.legend, fill: fills[i]!, colour: layer.style?.colour ?? '#0c2340' })), hasNaN(values)),
  );

  // Footer: caution in its own band.
  const footTop = frame.top + bodyHeight + 20;
  parts.push(`<rect x="${MARGIN}" y="${footTop}" width="4" height="${footerLines.length * 16 + 4}" fill="#b5651d"/>`);
  footerLines.forEach((line, k) => {
    parts.push(`<text x="${MARGIN + 12}" y="${footTop + 14 + k * 16}" font-size="12.5" fill="${INK}">${escapeMarkup(line)}</text>`);
  });
  if (input.footnote) {
    parts.push(
      `<text x="${width - MARGIN}" y="${height - 8}" font-size="10.5" fill="${MUTED}" text-anchor="end">${escapeMarkup(input.footnote)}</text>`,
    );
  }
  parts.push('</svg>');
  return { svg: parts.join('\n'), width, height };
}

/** Draw the map and rasterise it; `scale` multiplies the pixel size (default 1). */
export function renderMapPng(input: MapInput, options: MapOptions & { scale?: number } = {}): MapDrawing & { png: Uint8Array } {
  const drawing = renderMapSvg(input, options);
  const { png } = svgToPng(drawing.svg, { scale: options.scale ?? 1 });
  return { ...drawing, png };
}

// ---------------------------------------------------------------------------------------------------------

function makeRamp(quantity: 'head' | 'drawdown', range: { min: number; max: number } | null): ColourRamp {
  if (quantity === 'drawdown') {
    const limit = range ? Math.max(Math.abs(range.min), Math.abs(range.max)) : 1;
    return drawdownRamp(limit);
  }
  return headRamp(range?.min ?? 0, range?.max ?? 1);
}

function defs(): string {
  return [
    '<defs>',
    // Inactive cells: white with a sparse grey dot grid, distinct from every ramp colour.
    '<pattern id="nodata" width="6" height="6" patternUnits="userSpaceOnUse"><rect width="6" height="6" fill="#ffffff"/><circle cx="3" cy="3" r="0.8" fill="#b9bec2"/></pattern>',
    // Fixed-head cells: dark diagonal hatching over the head colour.
    '<pattern id="fixedhead" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="6" height="6" fill="#ffffff" fill-opacity="0.25"/><line x1="0" y1="0" x2="0" y2="6" stroke="#0c2340" stroke-width="2.2"/></pattern>',
    '</defs>',
  ].join('');
}

interface Frame {
  left: number;
  top: number;
  width: number;
  height: number;
}

/**
 * The cell colours as a PNG image. Each cell becomes a block of k x k pixels so that the image is at least as
 * large as the frame: renderers that smooth images when scaling (resvg ignores CSS `pixelated`) then blur only
 * within a pixel, and cells stay flat. Grids larger than the frame are sampled at every `step`-th cell.
 */
function cellImage(values: Float64Array, nx: number, ny: number, ramp: ColourRamp, frame: Frame): string {
  const step = Math.max(1, Math.floor(Math.min(nx / frame.width, ny / frame.height)));
  const w = Math.floor(nx / step);
  const h = Math.floor(ny / step);
  const block = Math.max(1, Math.min(8, Math.ceil(frame.width / w)));
  const sampled = new Float64Array(w * h * block * block);
  const half = step >> 1;
  const W = w * block;
  for (let i = 0; i < h; i++) {
    const src = (i * step + half) * nx;
    for (let j = 0; j < w; j++) {
      const v = values[src + j * step + half]!;
      for (let a = 0; a < block; a++) {
        const o = (i * block + a) * W + j * block;
        for (let b = 0; b < block; b++) sampled[o + b] = v;
      }
    }
  }
  const png = encodePng(colourCells(sampled, ramp), W, h * block);
  return `<image x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}" preserveAspectRatio="none" image-rendering="optimizeSpeed" style="image-rendering:pixelated" href="${dataUrl('image/png', png)}"/>`;
}

/** Runs of a layer's (active) cells per row, e.g. fixed heads, as one hatched path. */
function fixedHeadPath(
  fixed: Uint8Array,
  values: Float64Array,
  nx: number,
  ny: number,
  left: number,
  top: number,
  cellPx: number,
  cellPy: number,
  fill = 'fixedhead',
  stroke = '#0c2340',
): string {
  const d: string[] = [];
  for (let i = 0; i < ny; i++) {
    let j = 0;
    while (j < nx) {
      const p = i * nx + j;
      if (fixed[p] && Number.isFinite(values[p]!)) {
        let end = j + 1;
        while (end < nx && fixed[i * nx + end] && Number.isFinite(values[i * nx + end]!)) end++;
        const x0 = left + j * cellPx;
        const y0 = top + i * cellPy;
        d.push(`M${r1(x0)} ${r1(y0)}h${r1((end - j) * cellPx)}v${r1(cellPy)}h${r1(-(end - j) * cellPx)}z`);
        j = end;
      } else {
        j++;
      }
    }
  }
  if (d.length === 0) return '';
  // Cells narrower than a few px would vanish under the hatching: outline them more strongly instead.
  const outline = Math.min(cellPx, cellPy) < 3 ? 1.8 : 0.6;
  return `<path d="${d.join('')}" fill="url(#${fill})" stroke="${stroke}" stroke-width="${outline}" stroke-opacity="0.8"/>`;
}

/** A hatching pattern of lines of `colour` at `angle` degrees over a light veil, like the fixed-head pattern. */
function hatchPattern(id: string, colour: string, angle: number): string {
  return `<pattern id="${id}" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(${angle})"><rect width="6" height="6" fill="#ffffff" fill-opacity="0.25"/><line x1="0" y1="0" x2="0" y2="6" stroke="${colour}" stroke-width="2.2"/></pattern>`;
}

function contourDecimals(set: ContourSet): number {
  if (set.interval !== null) return decimalsOf(set.interval);
  let d = 0;
  for (const l of set.levels) d = Math.max(d, decimalsOf(l.level));
  return Math.min(d, 4);
}

/** Index contours: every fifth level of an evenly spaced set (common cartographic practice). */
function isIndexLevel(set: ContourSet, level: number): boolean {
  if (set.interval === null) return false;
  const k = level / set.interval;
  return Math.abs(k / 5 - Math.round(k / 5)) < 1e-6;
}

function contourLayer(
  set: ContourSet,
  decimals: number,
  px: (x: number) => number,
  py: (y: number) => number,
  quantity: 'head' | 'drawdown',
): string {
  const casing: string[] = [];
  const ink: string[] = [];
  const labels: Array<{ x: number; y: number; angle: number; text: string }> = [];
  const labelAll = set.levels.length <= 16 || set.interval === null;
  let labelled = 0;
  for (const { level, lines } of set.levels) {
    if (lines.length === 0) continue;
    const index = isIndexLevel(set, level);
    const zero = quantity === 'drawdown' && level === 0;
    const d: string[] = [];
    const screenLines: Float64Array[] = [];
    for (const line of lines) {
      const s = new Float64Array(line.length);
      for (let k = 0; k < line.length; k += 2) {
        s[k] = px(line[k]!);
        s[k + 1] = py(line[k + 1]!);
      }
      screenLines.push(s);
      d.push(polylinePath(s));
    }
    const path = d.join('');
    const widthPx = zero ? 1.8 : index ? 1.6 : 0.9;
    casing.push(`<path d="${path}" fill="none" stroke="#ffffff" stroke-opacity="0.4" stroke-width="${widthPx + 1.4}" stroke-linejoin="round"/>`);
    ink.push(
      `<path d="${path}" fill="none" stroke="${INK}" stroke-width="${widthPx}" stroke-linejoin="round"${zero ? ' stroke-dasharray="6 3"' : ''} data-level="${level}"/>`,
    );
    if (labelAll || index || zero) {
      for (const s of screenLines) placeLabels(s, formatFixed(level, decimals), labels, (labelled++ % 3) * 70);
    }
  }
  const labelSvg = labels
    .map((l) => {
      const transform = `translate(${r1(l.x)} ${r1(l.y)}) rotate(${r1(l.angle)})`;
      return (
        `<g transform="${transform}"><text text-anchor="middle" dy="3.8" font-size="10.5" stroke="#ffffff" stroke-width="3.2" stroke-linejoin="round" fill="#ffffff">${escapeMarkup(l.text)}</text>` +
        `<text text-anchor="middle" dy="3.8" font-size="10.5" fill="${INK}">${escapeMarkup(l.text)}</text></g>`
      );
    })
    .join('');
  return `<g class="contours">${casing.join('')}${ink.join('')}</g><g class="contour-labels">${labelSvg}</g>`;
}

function polylinePath(s: Float64Array): string {
  let d = `M${r1(s[0]!)} ${r1(s[1]!)}`;
  for (let k = 2; k < s.length; k += 2) d += `L${r1(s[k]!)} ${r1(s[k + 1]!)}`;
  return d;
}

const LABEL_SPACING = 260;
const LABEL_MIN_LINE = 70;
const LABEL_CLEARANCE = 46;
const MAX_LABELS = 80;

/**
 * Labels along a screen polyline: the first near its middle (or 130 px + `stagger` in, so that labels of parallel
 * lines do not line up), then every 260 px, each at least 46 px from every other label.
 */
function placeLabels(
  s: Float64Array,
  text: string,
  labels: Array<{ x: number; y: number; angle: number; text: string }>,
  stagger: number,
): void {
  let length = 0;
  for (let k = 2; k < s.length; k += 2) length += Math.hypot(s[k]! - s[k - 2]!, s[k + 1]! - s[k - 1]!);
  if (length < LABEL_MIN_LINE) return;
  const first = Math.min(length / 2, LABEL_SPACING / 2 + stagger);
  for (let at = first; at < length - 20 && labels.length < MAX_LABELS; at += LABEL_SPACING) {
    let walked = 0;
    for (let k = 2; k < s.length; k += 2) {
      const segment = Math.hypot(s[k]! - s[k - 2]!, s[k + 1]! - s[k - 1]!);
      if (walked + segment >= at && segment > 0) {
        const f = (at - walked) / segment;
        const x = s[k - 2]! + f * (s[k]! - s[k - 2]!);
        const y = s[k - 1]! + f * (s[k + 1]! - s[k - 1]!);
        let angle = (Math.atan2(s[k + 1]! - s[k - 1]!, s[k]! - s[k - 2]!) * 180) / Math.PI;
        if (angle > 90) angle -= 180;
        if (angle < -90) angle += 180;
        let clear = true;
        for (const l of labels) if (Math.hypot(l.x - x, l.y - y) < LABEL_CLEARANCE) clear = false;
        if (clear) labels.push({ x, y, angle, text });
        break;
      }
      walked += segment;
    }
  }
}

/** Flow-direction arrows of one length on a regular lattice of cells; stagnant cells get none. */
function arrowLayer(
  flux: { qx: Float64Array; qy: Float64Array },
  values: Float64Array,
  grid: Grid,
  frame: Frame,
  cellPx: number,
  cellPy: number,
  spacing: number,
): string {
  const { nx, ny } = grid;
  const stepX = Math.max(1, Math.round(spacing / cellPx));
  const stepY = Math.max(1, Math.round(spacing / cellPy));
  const samples: number[] = [];
  let largest = 0;
  for (let i = Math.floor(stepY / 2); i < ny; i += stepY) {
    for (let j = Math.floor(stepX / 2); j < nx; j += stepX) {
      const p = i * nx + j;
      const m = Math.hypot(flux.qx[p]!, flux.qy[p]!);
      if (Number.isFinite(m) && Number.isFinite(values[p]!)) {
        samples.push(p);
        if (m > largest) largest = m;
      }
    }
  }
  if (largest === 0) return '';
  const colSign = Math.sign(grid.transform[1]) || 1;
  const rowSign = Math.sign(grid.transform[5]) || -1;
  const half = Math.min(0.36 * Math.min(stepX * cellPx, stepY * cellPy), 9);
  const d: string[] = [];
  for (const p of samples) {
    const qx = flux.qx[p]!;
    const qy = flux.qy[p]!;
    const m = Math.hypot(qx, qy);
    // Below 0.5 % of the largest sampled flux the direction is noise (divides, stagnation points).
    if (m < 0.005 * largest) continue;
    const ux = (colSign * qx) / m;
    const uy = (rowSign * qy) / m;
    const cx = frame.left + ((p % nx) + 0.5) * cellPx;
    const cy = frame.top + (Math.floor(p / nx) + 0.5) * cellPy;
    const tipX = cx + ux * half;
    const tipY = cy + uy * half;
    const head = 4.2;
    const ax = tipX - head * (ux * 0.87 - uy * 0.5);
    const ay = tipY - head * (uy * 0.87 + ux * 0.5);
    const bx = tipX - head * (ux * 0.87 + uy * 0.5);
    const by = tipY - head * (uy * 0.87 - ux * 0.5);
    d.push(`M${r1(cx - ux * half)} ${r1(cy - uy * half)}L${r1(tipX)} ${r1(tipY)}M${r1(ax)} ${r1(ay)}L${r1(tipX)} ${r1(tipY)}L${r1(bx)} ${r1(by)}`);
  }
  const path = d.join('');
  return (
    `<g class="flow-arrows"><path d="${path}" fill="none" stroke="#ffffff" stroke-opacity="0.8" stroke-width="3" stroke-linecap="round" stroke-linejoin="round"/>` +
    `<path d="${path}" fill="none" stroke="#7a1f5c" stroke-width="1.15" stroke-linecap="round" stroke-linejoin="round"/></g>`
  );
}

/**
 * Above this many points of one kind (wells, observations) the map draws that kind as a density, not one symbol
 * and label per point: a map of thousands of labelled symbols is unreadable, and hundreds of thousands passed the
 * SVG rasteriser's node limit (200 000 wells ended in "nodes limit reached").
 */
export const MAX_POINT_SYMBOLS = 500;
/** Side of a density square in px. */
const DENSITY_SQUARE = 6;
/** Density classes: at least this many points in a square, and the opacity it is drawn with. */
const DENSITY_CLASSES = [
  { from: 1, opacity: 0.3, label: '1' },
  { from: 2, opacity: 0.55, label: '2–9' },
  { from: 10, opacity: 0.85, label: '10 or more' },
] as const;
const OBSERVATION_DENSITY_COLOUR = '#1f5c99';

function denseKinds(input: MapInput): { wells: boolean; observations: boolean } {
  return { wells: (input.wells?.length ?? 0) > MAX_POINT_SYMBOLS, observations: (input.observations?.length ?? 0) > MAX_POINT_SYMBOLS };
}

/**
 * Points counted in squares of DENSITY_SQUARE px over the map frame, drawn as one path per density class, so the
 * drawing has a fixed number of nodes and a size bounded by the frame, however many points there are.
 */
function densityLayer(
  points: readonly MapPoint[],
  px: (x: number) => number,
  py: (y: number) => number,
  frame: Frame,
  colour: string,
  name: string,
): string {
  const columns = Math.max(1, Math.ceil(frame.width / DENSITY_SQUARE));
  const rows = Math.max(1, Math.ceil(frame.height / DENSITY_SQUARE));
  const counts = new Uint32Array(columns * rows);
  for (const point of points) {
    const c = Math.floor((px(point.x) - frame.left) / DENSITY_SQUARE);
    const r = Math.floor((py(point.y) - frame.top) / DENSITY_SQUARE);
    if (c >= 0 && c < columns && r >= 0 && r < rows) counts[r * columns + c]!++;
  }
  const paths: string[][] = DENSITY_CLASSES.map(() => []);
  for (let k = 0; k < counts.length; k++) {
    const count = counts[k]!;
    if (count === 0) continue;
    let cls = 0;
    while (cls + 1 < DENSITY_CLASSES.length && count >= DENSITY_CLASSES[cls + 1]!.from) cls++;
    const x = frame.left + (k % columns) * DENSITY_SQUARE;
    const y = frame.top + Math.floor(k / columns) * DENSITY_SQUARE;
    paths[cls]!.push(`M${r1(x)} ${r1(y)}h${DENSITY_SQUARE}v${DENSITY_SQUARE}h-${DENSITY_SQUARE}Z`);
  }
  const layers = paths
    .map((d, cls) => (d.length ? `<path d="${d.join('')}" fill="${colour}" fill-opacity="${DENSITY_CLASSES[cls]!.opacity}" stroke="#ffffff" stroke-width="0.4"/>` : ''))
    .join('');
  return `<g class="${name}">${layers}</g>`;
}

/** Legend rows of a density layer: what it shows, and one square per class. */
function densityLegend(what: string, count: number, colour: string, x: number, row: (symbol: string, label: string) => void): void {
  row('', `${count.toLocaleString('en-US')} ${what}, too many to`);
  row('', `draw: number per ${DENSITY_SQUARE} px square`);
  for (const cls of DENSITY_CLASSES) {
    row(`<rect x="${x + 6}" y="-6" width="12" height="12" fill="${colour}" fill-opacity="${cls.opacity}" stroke="${MUTED}" stroke-width="0.6"/>`, `${cls.label} per square`);
  }
}

function wellSymbol(x: number, y: number, rate: number | undefined): string {
  if (rate !== undefined && rate > 0) {
    // Injection: open circle with a centre dot.
    return `<circle cx="${r1(x)}" cy="${r1(y)}" r="5.5" fill="#ffffff" stroke="${INK}" stroke-width="1.8"/><circle cx="${r1(x)}" cy="${r1(y)}" r="1.6" fill="${INK}"/>`;
  }
  if (rate === 0) return `<circle cx="${r1(x)}" cy="${r1(y)}" r="5" fill="#ffffff" stroke="#8a949b" stroke-width="1.6"/>`;
  // Withdrawal (or rate unknown): filled circle with a white ring.
  return `<circle cx="${r1(x)}" cy="${r1(y)}" r="6" fill="#ffffff"/><circle cx="${r1(x)}" cy="${r1(y)}" r="4.6" fill="${INK}"/>`;
}

function observationSymbol(x: number, y: number): string {
  const s = 6;
  return `<path d="M${r1(x)} ${r1(y - s)}L${r1(x + s * 0.87)} ${r1(y + s / 2)}L${r1(x - s * 0.87)} ${r1(y + s / 2)}Z" fill="#ffffff" stroke="${INK}" stroke-width="1.6"/>`;
}

function haloText(x: number, y: number, text: string, size: number, weight = 'normal'): string {
  const t = escapeMarkup(text);
  return (
    `<text x="${r1(x)}" y="${r1(y)}" font-size="${size}" font-weight="${weight}" stroke="#ffffff" stroke-width="3.4" stroke-linejoin="round" fill="#ffffff">${t}</text>` +
    `<text x="${r1(x)}" y="${r1(y)}" font-size="${size}" font-weight="${weight}" fill="${INK}">${t}</text>`
  );
}

function pointLayer(
  observations: readonly MapPoint[],
  wells: readonly MapPoint[],
  px: (x: number) => number,
  py: (y: number) => number,
): string {
  const parts: string[] = ['<g class="points">'];
  for (const o of observations) {
    const x = px(o.x);
    const y = py(o.y);
    parts.push(observationSymbol(x, y), haloText(x + 8, y + 12, o.id, 11));
  }
  for (const w of wells) {
    const x = px(w.x);
    const y = py(w.y);
    parts.push(wellSymbol(x, y, w.rate), haloText(x + 8, y - 7, w.id, 11.5, 'bold'));
  }
  parts.push('</g>');
  return parts.join('');
}

function northArrow(x: number, y: number, northUp: boolean): string {
  // A split arrowhead (left half filled, right half open) pointing to grid north, "N" at its tip.
  const rotate = northUp ? 0 : 180;
  const cy = y + 24;
  return (
    `<g class="north-arrow"><circle cx="${r1(x)}" cy="${r1(cy)}" r="22" fill="#ffffff" fill-opacity="0.9" stroke="${INK}" stroke-width="0.8"/>` +
    `<g transform="translate(${r1(x)} ${r1(cy + 5)}) rotate(${rotate})"><path d="M0 -13L-6 8L0 4Z" fill="${INK}"/><path d="M0 -13L6 8L0 4Z" fill="#ffffff" stroke="${INK}" stroke-width="1"/></g>` +
    `<text x="${r1(x)}" y="${r1(northUp ? cy - 9 : cy + 19)}" font-size="10.5" font-weight="bold" text-anchor="middle" fill="${INK}">N</text></g>`
  );
}

function scaleBar(frame: Frame, groundWidth: number, scale: number, unit: string): string {
  const target = groundWidth / 4;
  const power = Math.pow(10, Math.floor(Math.log10(target)));
  const m = target / power;
  const length = (m >= 5 ? 5 : m >= 2 ? 2 : 1) * power;
  const lengthPx = length * scale;
  const x = frame.left + 14;
  const y = frame.top + frame.height - 22;
  const label = unit === 'm' && length >= 1000 ? `${fmtLength(length / 1000)} km` : `${fmtLength(length)} ${unit}`;
  const halfPx = lengthPx / 2;
  return (
    `<g class="scale-bar"><rect x="${r1(x - 8)}" y="${r1(y - 20)}" width="${r1(lengthPx + 20 + label.length * 7)}" height="32" rx="3" fill="#ffffff" fill-opacity="0.85"/>` +
    `<rect x="${r1(x)}" y="${r1(y)}" width="${r1(halfPx)}" height="5" fill="${INK}"/>` +
    `<rect x="${r1(x + halfPx)}" y="${r1(y)}" width="${r1(halfPx)}" height="5" fill="#ffffff" stroke="${INK}" stroke-width="1"/>` +
    `<text x="${r1(x)}" y="${r1(y - 5)}" font-size="11" fill="${INK}">0</text>` +
    `<text x="${r1(x + lengthPx + 6)}" y="${r1(y + 6)}" font-size="11.5" fill="${INK}">${escapeMarkup(label)}</text></g>`
  );
}

function legend(
  input: MapInput,
  ramp: ColourRamp,
  contours: ContourSet,
  decimals: number,
  x: number,
  top: number,
  cellLegends: ReadonlyArray<{ label: string; fill: string; colour: string }>,
  showInactive: boolean,
): string {
  const parts: string[] = ['<g class="legend">'];
  const unit = input.units.length;
  const title = input.quantity === 'head' ? `Head (${unit})` : `Drawdown (${unit})`;
  parts.push(`<text x="${x}" y="${top + 12}" font-size="13" font-weight="bold" fill="${INK}">${escapeMarkup(title)}</text>`);
  let y = top + 26;
  // Colour bar: vertical, high values on top.
  const barH = 200;
  const barW = 18;
  const stops: string[] = [];
  for (let k = 0; k <= 16; k++) {
    const v = ramp.max - (k / 16) * (ramp.max - ramp.min);
    stops.push(`<stop offset="${(k / 16).toFixed(4)}" stop-color="${rampHex(ramp, v)}"/>`);
  }
  parts.push(`<defs><linearGradient id="ramp" x1="0" y1="0" x2="0" y2="1">${stops.join('')}</linearGradient></defs>`);
  parts.push(`<rect x="${x}" y="${y}" width="${barW}" height="${barH}" fill="url(#ramp)" stroke="${INK}" stroke-width="0.8"/>`);
  const ticks = niceTicks(ramp.min, ramp.max, 6);
  for (const tick of ticks.ticks) {
    const ty = y + ((ramp.max - tick) / (ramp.max - ramp.min)) * barH;
    parts.push(`<line x1="${x + barW}" y1="${r1(ty)}" x2="${x + barW + 5}" y2="${r1(ty)}" stroke="${INK}" stroke-width="0.8"/>`);
    const zero = input.quantity === 'drawdown' && tick === 0;
    parts.push(
      `<text x="${x + barW + 8}" y="${r1(ty + 4)}" font-size="11.5"${zero ? ' font-weight="bold"' : ''} fill="${INK}">${formatFixed(tick, ticks.decimals)}${zero ? ' (no change)' : ''}</text>`,
    );
  }
  if (input.quantity === 'drawdown') {
    parts.push(`<text x="${x + barW + 8}" y="${y - 2}" font-size="10.5" fill="${MUTED}">\u2191 lowered</text>`);
    parts.push(`<text x="${x + barW + 8}" y="${y + barH + 12}" font-size="10.5" fill="${MUTED}">\u2193 raised</text>`);
  }
  y += barH + 30;

  const row = (symbol: string, label: string) => {
    parts.push(symbol);
    parts.push(`<text x="${x + 32}" y="${r1(y + 4)}" font-size="12" fill="${INK}">${escapeMarkup(label)}</text>`);
    y += 24;
  };
  const interval = contours.interval;
  const contourLabel =
    interval !== null ? `Contour every ${formatFixed(interval, decimals)} ${unit}` : `Contours (${contours.levels.length} levels)`;
  row(`<line x1="${x}" y1="${y}" x2="${x + 24}" y2="${y}" stroke="${INK}" stroke-width="0.9"/>`, contourLabel);
  if (interval !== null && contours.levels.some((l) => isIndexLevel(contours, l.level))) {
    row(`<line x1="${x}" y1="${y}" x2="${x + 24}" y2="${y}" stroke="${INK}" stroke-width="1.6"/>`, `Every ${formatFixed(5 * interval, decimals)} ${unit}, labelled`);
  }
  if (input.quantity === 'drawdown' && contours.levels.some((l) => l.level === 0 && l.lines.length > 0)) {
    row(`<line x1="${x}" y1="${y}" x2="${x + 24}" y2="${y}" stroke="${INK}" stroke-width="1.8" stroke-dasharray="6 3"/>`, 'Zero drawdown');
  }
  if (input.flux) {
    row(
      `<path d="M${x + 2} ${y}L${x + 22} ${y}M${x + 17} ${y - 4}L${x + 22} ${y}L${x + 17} ${y + 4}" fill="none" stroke="#7a1f5c" stroke-width="1.5" stroke-linecap="round"/>`,
      'Flow direction',
    );
  }
  const wells = input.wells ?? [];
  const dense = denseKinds(input);
  // Density squares are drawn at a row's height: the symbol is placed by a translate to the row.
  const placed = (symbol: string, label: string) => row(symbol ? `<g transform="translate(0 ${r1(y)})">${symbol}</g>` : '', label);
  if (dense.wells) {
    densityLegend('wells', wells.length, INK, x, placed);
  } else {
    if (wells.some((w) => w.rate === undefined || w.rate < 0)) row(wellSymbol(x + 12, y, -1), 'Well, pumping');
    if (wells.some((w) => w.rate !== undefined && w.rate > 0)) row(wellSymbol(x + 12, y, 1), 'Well, injecting');
    if (wells.some((w) => w.rate === 0)) row(wellSymbol(x + 12, y, 0), 'Well, switched off');
  }
  const observations = input.observations ?? [];
  if (dense.observations) densityLegend('observation points', observations.length, OBSERVATION_DENSITY_COLOUR, x, placed);
  else if (observations.length > 0) row(observationSymbol(x + 12, y + 1), 'Observation point');
  for (const cell of cellLegends) row(`<rect x="${x}" y="${y - 8}" width="24" height="16" fill="url(#${cell.fill})" stroke="${cell.colour}" stroke-width="0.8"/>`, cell.label);
  for (const overlay of input.overlays ?? []) for (const item of overlay.legend) row(item.symbol(x, y), item.label);
  if (showInactive) row(`<rect x="${x}" y="${y - 8}" width="24" height="16" fill="url(#nodata)" stroke="${MUTED}" stroke-width="0.8"/>`, 'Inactive (no flow)');
  parts.push('</g>');
  return parts.join('');
}

function hasAny(mask: Uint8Array): boolean {
  for (let p = 0; p < mask.length; p++) if (mask[p]) return true;
  return false;
}

function hasNaN(values: Float64Array): boolean {
  for (let p = 0; p < values.length; p++) if (values[p] !== values[p]) return true;
  return false;
}

function r1(v: number): string {
  return (Math.round(v * 10) / 10).toString();
}

function fmtLength(v: number): string {
  return Number.isInteger(v) ? String(v) : String(Number(v.toPrecision(4)));
}
