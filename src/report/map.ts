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
import { escapeMarkup, formatFixed, formatSignificant, niceTicks, wrapText } from './text.js';
import {
  isFree,
  placePointLabels,
  rotatedBox,
  symbolBox,
  textBox,
  textWidth,
  type Box,
  type LabelBox,
  type PlacedPointLabel,
  type PointLabelRequest,
} from './labels.js';
import type { MapCellStyle } from '../discretisation/terms/types.js';
import type { MapOverlay } from './trackingLayer.js';

export type { Box, LabelBox } from './labels.js';
export type { MapCellStyle } from '../discretisation/terms/types.js';

export interface MapPoint {
  id: string;
  /** Map coordinates in the raster CRS. */
  x: number;
  y: number;
  /** Well rate (length^3/time, negative = withdrawal); decides the well symbol. */
  rate?: number;
  /** Observation points: simulated - observed head (length); drawn as a circle sized by size, coloured by sign. */
  residual?: number;
}

/** A layer of flow-term cells drawn over the colours, with its legend row and the term's style. */
export interface MapCellLayer {
  legend: string;
  /** 1 = the term acts on the cell. */
  cells: Uint8Array;
  /** Pattern and ink supplied by the term; absent: a hatching the map chooses. */
  style?: MapCellStyle;
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
  /** Cells of flow terms (e.g. each fixed-head group), one legend row and one style per layer. */
  cellLayers?: ReadonlyArray<MapCellLayer>;
  wells?: readonly MapPoint[];
  observations?: readonly MapPoint[];
  /** Places whose drawdown a comparison reports (neighbours' wells, springs, wetland edges). */
  receptors?: readonly MapPoint[];
  /** Drawdown maps: changes smaller than this (length) are rounding and solver noise, shown as no change. */
  noiseLevel?: number;
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
  /**
   * Encode the embedded image of the cell colours for speed rather than size (the same pixels): for a drawing that
   * is rasterised and not kept (renderMapPng does this). Default false.
   */
  quickCellImage?: boolean;
}

export interface MapDrawing {
  svg: string;
  width: number;
  height: number;
  /** Every text placed on the drawing (point and contour labels, legend, header) and its box in px. */
  labels: LabelBox[];
  /** The boxes of the point symbols (wells, observations, receptors). */
  symbols: Box[];
}

const INK = '#1d2327';
const MUTED = '#5b6770';
const LEGEND_WIDTH = 250;
const MARGIN = 20;
const TITLE_SIZE = 20;
const SUBTITLE_SIZE = 13;
const RECEPTOR_INK = '#8b1e3f';
const RESIDUAL_ABOVE = '#c0392b';
const RESIDUAL_BELOW = '#2166ac';
/** Styles of layers without one of their own, in layer order. */
const DEFAULT_LAYER_STYLES: MapCellStyle[] = [
  { pattern: 'hatch', colour: '#0c2340', angle: 45 },
  { pattern: 'hatch', colour: '#6a1b5d', angle: -45 },
  { pattern: 'cross-hatch', colour: '#005a4e' },
  { pattern: 'dots', colour: '#7a3b00' },
];

/** Draw the map as a standalone SVG document. */
export function renderMapSvg(input: MapInput, options: MapOptions = {}): MapDrawing {
  const { grid, values } = input;
  const { nx, ny } = grid;
  const width = Math.max(600, Math.round(options.width ?? 1100));
  const maxMapHeight = options.maxMapHeight ?? 720;
  const dx = cellWidth(grid);
  const dy = cellHeight(grid);
  const labels: LabelBox[] = [];

  // Header: the title and subtitle wrap to the drawing's width (long titles are never cut off).
  const subtitle =
    input.subtitle ??
    `${input.quantity === 'head' ? 'Head' : 'Drawdown (positive = lowered)'}, ${input.units.length} \u00b7 ${nx} \u00d7 ${ny} cells of ${fmtLength(dx)} \u00d7 ${fmtLength(dy)} ${input.units.length} \u00b7 ${crsLabel(grid.crs)}` +
      (input.quantity === 'drawdown' && input.noiseLevel
        ? ` \u00b7 |change| below ${formatSignificant(input.noiseLevel, 2)} ${input.units.length} shown as none`
        : '');
  const textSpace = width - 2 * MARGIN;
  const titleLines = wrapToWidth(input.title, textSpace, TITLE_SIZE, true);
  const subtitleLines = wrapToWidth(subtitle, textSpace, SUBTITLE_SIZE, false);
  const header: string[] = [];
  let hy = 10;
  for (const line of titleLines) {
    hy += Math.ceil(TITLE_SIZE * 1.25);
    header.push(`<text x="${MARGIN}" y="${hy}" font-size="${TITLE_SIZE}" font-weight="bold" fill="${INK}">${escapeMarkup(line)}</text>`);
    labels.push({ ...textBox(line, MARGIN, hy, TITLE_SIZE, 'start', true), text: line, kind: 'header' });
  }
  hy += 3;
  for (const line of subtitleLines) {
    hy += SUBTITLE_SIZE + 5;
    header.push(`<text x="${MARGIN}" y="${hy}" font-size="${SUBTITLE_SIZE}" fill="${MUTED}">${escapeMarkup(line)}</text>`);
    labels.push({ ...textBox(line, MARGIN, hy, SUBTITLE_SIZE), text: line, kind: 'header' });
  }
  const headerHeight = hy + 13;

  // Map frame: keep the aspect ratio of the ground, one px scale for x and y.
  const frameMaxWidth = width - 2 * MARGIN - LEGEND_WIDTH;
  const scale = Math.min(frameMaxWidth / (nx * dx), maxMapHeight / (ny * dy));
  const frame = { left: MARGIN, top: headerHeight, width: nx * dx * scale, height: ny * dy * scale };
  const cellPx = dx * scale;
  const cellPy = dy * scale;
  const frameBox: Box = { x0: frame.left, y0: frame.top, x1: frame.left + frame.width, y1: frame.top + frame.height };

  const range = finiteRange(values);
  const ramp = makeRamp(input.quantity, range);
  const contours = input.contours ?? contourField(grid, values);
  const levelDecimals = contourDecimals(contours);

  // Map coordinates -> px through cell space, so rotated-free grids of any axis direction line up with the image.
  const t = grid.transform;
  const px = (x: number) => frame.left + ((x - t[0]) / t[1]) * cellPx;
  const py = (y: number) => frame.top + ((y - t[3]) / t[5]) * cellPy;

  const layers = (input.cellLayers ?? [])
    .filter((layer) => hasAny(layer.cells))
    .map((layer, k) => ({ ...layer, style: layer.style ?? DEFAULT_LAYER_STYLES[k % DEFAULT_LAYER_STYLES.length]!, id: `layer-${k}` }));

  // Points, their symbols and labels: placed first, so that contour labels keep clear of them.
  const dense = denseKinds(input);
  const points = pointRequests(input, dense, px, py);
  const symbols = points.map((p) => symbolBox(p.x, p.y, p.radius));
  const residualSvg = dense.observations ? '' : residualLayer(input.observations ?? [], px, py);
  const placedPoints = placePointLabels(points, symbols, frameBox);
  points.forEach((p, k) => labels.push({ ...placedPoints[k]!.box, text: p.text, kind: 'point' }));

  const contourSvg = contourLayer(
    contours,
    levelDecimals,
    px,
    py,
    input.quantity,
    [...symbols, ...placedPoints.map((p) => p.box)],
    frameBox,
  );
  for (const l of contourSvg.labels) labels.push({ ...l.box, text: l.text, kind: 'contour' });

  // Legend (its height decides the drawing's).
  const legendX = frame.left + frame.width + 28;
  const legendOut = legend(input, ramp, contours, levelDecimals, legendX, frame.top, width - MARGIN - legendX, layers, hasNaN(values));
  labels.push(...legendOut.labels);

  const footerLines = wrapText(input.caution, Math.floor((width - 2 * MARGIN) / 6.9));
  const bodyHeight = Math.max(frame.height, legendOut.height);
  const height = Math.round(frame.top + bodyHeight + 24 + footerLines.length * 16 + 26);

  const parts: string[] = [];
  parts.push(
    `<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" font-family="${MAP_FONT_STACK}" role="img" aria-label="${escapeMarkup(input.title)}">`,
  );
  parts.push(defs(layers));
  parts.push(`<rect width="${width}" height="${height}" fill="#ffffff"/>`);
  parts.push(...header);

  // Lines (contours, arrows) stop short of every label: a mask with a hole per label box.
  const gaps = [
    ...contourSvg.labels.map((l) => l.gap),
    ...placedPoints.map(
      (p) => `<rect x="${r1(p.box.x0)}" y="${r1(p.box.y0)}" width="${r1(p.box.x1 - p.box.x0)}" height="${r1(p.box.y1 - p.box.y0)}"/>`,
    ),
  ];
  parts.push(
    `<defs><mask id="label-gaps" maskUnits="userSpaceOnUse" x="0" y="0" width="${width}" height="${height}"><rect width="${width}" height="${height}" fill="#ffffff"/><g fill="#000000">${gaps.join('')}</g></mask></defs>`,
  );

  // Map body, clipped to the frame.
  const clip = `<clipPath id="frame"><rect x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}"/></clipPath>`;
  parts.push(`<defs>${clip}</defs><g clip-path="url(#frame)">`);
  parts.push(
    `<rect x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}" fill="url(#nodata)"/>`,
  );
  parts.push(cellImage(values, nx, ny, ramp, frame, options.quickCellImage ?? false));
  for (const layer of layers)
    parts.push(layerPath(layer.cells, values, nx, ny, frame.left, frame.top, cellPx, cellPy, layer.id, layer.style));
  parts.push(`<g mask="url(#label-gaps)">${contourSvg.lines}</g>`);
  parts.push(contourSvg.labelSvg);
  if (input.flux)
    parts.push(`<g mask="url(#label-gaps)">${arrowLayer(input.flux, values, grid, frame, cellPx, cellPy, options.arrowSpacing ?? 40)}</g>`);
  for (const overlay of input.overlays ?? []) parts.push(overlay.draw(px, py));
  parts.push(residualSvg);
  parts.push(pointLayer(points, placedPoints));
  if (dense.observations)
    parts.push(densityLayer(input.observations ?? [], px, py, frame, OBSERVATION_DENSITY_COLOUR, 'observation-density'));
  if (dense.wells) parts.push(densityLayer(input.wells ?? [], px, py, frame, INK, 'well-density'));
  parts.push('</g>');
  parts.push(
    `<rect x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}" fill="none" stroke="${INK}" stroke-width="1"/>`,
  );

  parts.push(northArrow(frame.left + frame.width - 30, frame.top + 14, t[5] < 0));
  if (!grid.crs?.geographic) parts.push(scaleBar(frame, nx * dx, scale, input.units.length));

  parts.push(legendOut.svg);

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
  return { svg: parts.join('\n'), width, height, labels, symbols };
}

/** Greedy word wrap by measured width; a single word wider than the line is broken by characters. */
function wrapToWidth(text: string, widthPx: number, size: number, bold: boolean): string[] {
  const lines: string[] = [];
  let line = '';
  for (let word of text.split(/\s+/)) {
    if (!word) continue;
    while (textWidth(word, size, bold) > widthPx && word.length > 1) {
      let k = word.length - 1;
      while (k > 1 && textWidth(word.slice(0, k), size, bold) > widthPx) k--;
      if (line) lines.push(line);
      lines.push(word.slice(0, k));
      line = '';
      word = word.slice(k);
    }
    const candidate = line ? `${line} ${word}` : word;
    if (line && textWidth(candidate, size, bold) > widthPx) {
      lines.push(line);
      line = word;
    } else {
      line = candidate;
    }
  }
  if (line) lines.push(line);
  return lines.length ? lines : [''];
}

/** Draw the map and rasterise it; `scale` multiplies the pixel size (default 1). */
export function renderMapPng(input: MapInput, options: MapOptions & { scale?: number } = {}): MapDrawing & { png: Uint8Array } {
  const drawing = renderMapSvg(input, { quickCellImage: true, ...options });
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

function defs(layers: ReadonlyArray<{ id: string; style: MapCellStyle }>): string {
  return [
    '<defs>',
    // Inactive cells: white with a sparse grey dot grid, distinct from every ramp colour.
    '<pattern id="nodata" width="6" height="6" patternUnits="userSpaceOnUse"><rect width="6" height="6" fill="#ffffff"/><circle cx="3" cy="3" r="0.8" fill="#b9bec2"/></pattern>',
    ...layers.map((layer) => layerPattern(layer.id, layer.style)),
    '</defs>',
  ].join('');
}

/** The fill pattern of a cell layer: hatching at the style's angle, cross-hatching or dots in its ink. */
function layerPattern(id: string, style: MapCellStyle): string {
  const ink = escapeMarkup(style.colour);
  const wash = '<rect width="6" height="6" fill="#ffffff" fill-opacity="0.25"/>';
  if (style.pattern === 'dots') {
    return `<pattern id="${id}" width="5" height="5" patternUnits="userSpaceOnUse">${wash}<circle cx="2.5" cy="2.5" r="1.3" fill="${ink}"/></pattern>`;
  }
  if (style.pattern === 'outline') return `<pattern id="${id}" width="6" height="6" patternUnits="userSpaceOnUse">${wash}</pattern>`;
  const cross = style.pattern === 'cross-hatch' ? `<line x1="0" y1="3" x2="6" y2="3" stroke="${ink}" stroke-width="1.4"/>` : '';
  const width = style.pattern === 'cross-hatch' ? 1.4 : 2.2;
  return `<pattern id="${id}" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(${style.angle ?? 45})">${wash}<line x1="0" y1="0" x2="0" y2="6" stroke="${ink}" stroke-width="${width}"/>${cross}</pattern>`;
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
function cellImage(values: Float64Array, nx: number, ny: number, ramp: ColourRamp, frame: Frame, quick: boolean): string {
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
  const png = encodePng(colourCells(sampled, ramp), W, h * block, { fast: quick });
  return `<image x="${r1(frame.left)}" y="${r1(frame.top)}" width="${r1(frame.width)}" height="${r1(frame.height)}" preserveAspectRatio="none" image-rendering="optimizeSpeed" style="image-rendering:pixelated" href="${dataUrl('image/png', png)}"/>`;
}

/** Runs of a layer's (active) cells per row, e.g. one fixed-head group, as one path in the layer's pattern. */
function layerPath(
  fixed: Uint8Array,
  values: Float64Array,
  nx: number,
  ny: number,
  left: number,
  top: number,
  cellPx: number,
  cellPy: number,
  id: string,
  style: MapCellStyle,
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
  const outline = Math.min(cellPx, cellPy) < 3 || style.pattern === 'outline' ? 1.8 : 0.6;
  return `<path class="cell-layer" d="${d.join('')}" fill="url(#${id})" stroke="${escapeMarkup(style.colour)}" stroke-width="${outline}" stroke-opacity="0.8"/>`;
}

function contourDecimals(set: ContourSet): number {
  if (set.interval !== null) return decimalsOf(set.interval);
  let d = 0;
  for (const l of set.levels) d = Math.max(d, decimalsOf(l.level));
  return Math.min(d, 4);
}

/** Up to 25 levels every one is labelled (placement drops labels that find no free place); beyond, index levels only. */
function labelsEveryLevel(set: ContourSet): boolean {
  return set.levels.length <= 25 || set.interval === null;
}

/** Index contours: every fifth level of an evenly spaced set (common cartographic practice). */
function isIndexLevel(set: ContourSet, level: number): boolean {
  if (set.interval === null) return false;
  const k = level / set.interval;
  return Math.abs(k / 5 - Math.round(k / 5)) < 1e-6;
}

interface ContourLabel {
  x: number;
  y: number;
  angle: number;
  text: string;
  box: Box;
  /** The label's turned rectangle, as a hole in the lines' mask. */
  gap: string;
}

function contourLayer(
  set: ContourSet,
  decimals: number,
  px: (x: number) => number,
  py: (y: number) => number,
  quantity: 'head' | 'drawdown',
  obstacles: readonly Box[],
  bounds: Box,
): { lines: string; labelSvg: string; labels: ContourLabel[] } {
  const casing: string[] = [];
  const ink: string[] = [];
  const labels: ContourLabel[] = [];
  const taken: Box[] = [...obstacles];
  const labelAll = labelsEveryLevel(set);
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
    casing.push(
      `<path d="${path}" fill="none" stroke="#ffffff" stroke-opacity="0.4" stroke-width="${widthPx + 1.4}" stroke-linejoin="round"/>`,
    );
    ink.push(
      `<path d="${path}" fill="none" stroke="${INK}" stroke-width="${widthPx}" stroke-linejoin="round"${zero ? ' stroke-dasharray="6 3"' : ''} data-level="${level}"/>`,
    );
    if (labelAll || index || zero) {
      for (const s of screenLines) placeLabels(s, formatFixed(level, decimals), labels, taken, bounds, (labelled++ % 3) * 70);
    }
  }
  const labelSvg = labels
    .map((l) => {
      const transform = `translate(${r1(l.x)} ${r1(l.y)}) rotate(${r1(l.angle)})`;
      return `<g transform="${transform}"><text text-anchor="middle" dy="3.8" font-size="${CONTOUR_LABEL_SIZE}" fill="${INK}">${escapeMarkup(l.text)}</text></g>`;
    })
    .join('');
  return {
    lines: `<g class="contours">${casing.join('')}${ink.join('')}</g>`,
    labelSvg: `<g class="contour-labels">${labelSvg}</g>`,
    labels,
  };
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
const CONTOUR_LABEL_SIZE = 10.5;
/** Shifts along the line tried when a label's place is taken, px. */
const LABEL_SHIFTS = [0, 24, -24, 48, -48, 72, -72, 96, -96];

/**
 * Labels along a screen polyline: the first near its middle (or 130 px + `stagger` in, so that labels of parallel
 * lines do not line up), then every 260 px, each at least 46 px from every other label. A place whose box meets a
 * symbol, a point label or another contour label is moved along the line; when no place nearby is free, that label
 * is left out (the line keeps its other labels).
 */
function placeLabels(s: Float64Array, text: string, labels: ContourLabel[], taken: Box[], bounds: Box, stagger: number): void {
  let length = 0;
  for (let k = 2; k < s.length; k += 2) length += Math.hypot(s[k]! - s[k - 2]!, s[k + 1]! - s[k - 1]!);
  if (length < LABEL_MIN_LINE) return;
  const w = textWidth(text, CONTOUR_LABEL_SIZE) + 6;
  const h = 1.25 * CONTOUR_LABEL_SIZE;
  const first = Math.min(length / 2, LABEL_SPACING / 2 + stagger);
  for (let base = first; base < length - 20 && labels.length < MAX_LABELS; base += LABEL_SPACING) {
    for (const shift of LABEL_SHIFTS) {
      const at = base + shift;
      if (at < 20 || at > length - 20) continue;
      const place = pointAlong(s, at);
      if (!place) continue;
      let angle = place.angle;
      if (angle > 90) angle -= 180;
      if (angle < -90) angle += 180;
      let clear = true;
      for (const l of labels) if (Math.hypot(l.x - place.x, l.y - place.y) < LABEL_CLEARANCE) clear = false;
      const box = rotatedBox(place.x, place.y, w, h, angle);
      if (!clear || !isFree(box, taken, bounds)) continue;
      const gap = `<rect x="${r1(-w / 2)}" y="${r1(-h / 2)}" width="${r1(w)}" height="${r1(h)}" transform="translate(${r1(place.x)} ${r1(place.y)}) rotate(${r1(angle)})"/>`;
      labels.push({ x: place.x, y: place.y, angle, text, box, gap });
      taken.push(box);
      break;
    }
  }
}

/** The point `at` px along a screen polyline and the direction of its segment (degrees), or null past its end. */
function pointAlong(s: Float64Array, at: number): { x: number; y: number; angle: number } | null {
  let walked = 0;
  for (let k = 2; k < s.length; k += 2) {
    const segment = Math.hypot(s[k]! - s[k - 2]!, s[k + 1]! - s[k - 1]!);
    if (walked + segment >= at && segment > 0) {
      const f = (at - walked) / segment;
      return {
        x: s[k - 2]! + f * (s[k]! - s[k - 2]!),
        y: s[k - 1]! + f * (s[k + 1]! - s[k - 1]!),
        angle: (Math.atan2(s[k + 1]! - s[k - 1]!, s[k]! - s[k - 2]!) * 180) / Math.PI,
      };
    }
    walked += segment;
  }
  return null;
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
    d.push(
      `M${r1(cx - ux * half)} ${r1(cy - uy * half)}L${r1(tipX)} ${r1(tipY)}M${r1(ax)} ${r1(ay)}L${r1(tipX)} ${r1(tipY)}L${r1(bx)} ${r1(by)}`,
    );
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
    .map((d, cls) =>
      d.length
        ? `<path d="${d.join('')}" fill="${colour}" fill-opacity="${DENSITY_CLASSES[cls]!.opacity}" stroke="#ffffff" stroke-width="0.4"/>`
        : '',
    )
    .join('');
  return `<g class="${name}">${layers}</g>`;
}

/** Legend rows of a density layer: what it shows, and one square per class. */
function densityLegend(what: string, count: number, colour: string, x: number, row: (symbol: string, label: string) => void): void {
  row('', `${count.toLocaleString('en-US')} ${what}, too many to`);
  row('', `draw: number per ${DENSITY_SQUARE} px square`);
  for (const cls of DENSITY_CLASSES) {
    row(
      `<rect x="${x + 6}" y="-6" width="12" height="12" fill="${colour}" fill-opacity="${cls.opacity}" stroke="${MUTED}" stroke-width="0.6"/>`,
      `${cls.label} per square`,
    );
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

function haloText(x: number, y: number, text: string, size: number, weight = 'normal', ink = INK): string {
  const t = escapeMarkup(text);
  return (
    `<text x="${r1(x)}" y="${r1(y)}" font-size="${size}" font-weight="${weight}" stroke="#ffffff" stroke-width="3.4" stroke-linejoin="round" fill="#ffffff">${t}</text>` +
    `<text x="${r1(x)}" y="${r1(y)}" font-size="${size}" font-weight="${weight}" fill="${ink}">${t}</text>`
  );
}

function receptorSymbol(x: number, y: number): string {
  // A diamond in its own ink: a place whose drawdown is reported, not a well of the scenario.
  const s = 6.5;
  return `<path d="M${r1(x)} ${r1(y - s)}L${r1(x + s)} ${r1(y)}L${r1(x)} ${r1(y + s)}L${r1(x - s)} ${r1(y)}Z" fill="#ffffff" stroke="${RECEPTOR_INK}" stroke-width="2"/><circle cx="${r1(x)}" cy="${r1(y)}" r="1.6" fill="${RECEPTOR_INK}"/>`;
}

type PointKind = 'well' | 'observation' | 'receptor';

/** Label requests of the drawn points: wells first (most important), then receptors, then observation points. */
function pointRequests(
  input: MapInput,
  dense: { wells: boolean; observations: boolean },
  px: (x: number) => number,
  py: (y: number) => number,
): Array<PointLabelRequest & { kind: PointKind; point: MapPoint }> {
  const out: Array<PointLabelRequest & { kind: PointKind; point: MapPoint }> = [];
  if (!dense.wells)
    for (const w of input.wells ?? [])
      out.push({ x: px(w.x), y: py(w.y), radius: 6.5, text: w.id, size: 11.5, bold: true, kind: 'well', point: w });
  for (const r of input.receptors ?? [])
    out.push({ x: px(r.x), y: py(r.y), radius: 7, text: r.id, size: 11, bold: false, kind: 'receptor', point: r });
  if (!dense.observations) {
    for (const o of input.observations ?? [])
      out.push({ x: px(o.x), y: py(o.y), radius: 6.5, text: o.id, size: 11, bold: false, kind: 'observation', point: o });
  }
  return out;
}

/** Largest residual circle radius in px; a circle's area grows with the residual's size. */
const RESIDUAL_RADIUS = 16;

function largestResidual(points: readonly MapPoint[]): number {
  let largest = 0;
  for (const o of points) if (o.residual !== undefined && Number.isFinite(o.residual)) largest = Math.max(largest, Math.abs(o.residual));
  return largest;
}

function residualRadius(residual: number, largest: number): number {
  return 3 + (RESIDUAL_RADIUS - 3) * Math.sqrt(Math.abs(residual) / largest);
}

/** Residuals at observation points: circles under the symbols, area by size, red above observed, blue below. */
function residualLayer(points: readonly MapPoint[], px: (x: number) => number, py: (y: number) => number): string {
  const largest = largestResidual(points);
  if (!(largest > 0)) return '';
  const parts: string[] = ['<g class="residuals">'];
  for (const o of points) {
    if (o.residual === undefined || !Number.isFinite(o.residual)) continue;
    const colour = o.residual > 0 ? RESIDUAL_ABOVE : RESIDUAL_BELOW;
    parts.push(
      `<circle cx="${r1(px(o.x))}" cy="${r1(py(o.y))}" r="${r1(residualRadius(o.residual, largest))}" fill="${colour}" fill-opacity="0.45" stroke="${colour}" stroke-width="1.2"/>`,
    );
  }
  parts.push('</g>');
  return parts.join('');
}

function pointLayer(
  requests: ReadonlyArray<PointLabelRequest & { kind: PointKind; point: MapPoint }>,
  placed: readonly PlacedPointLabel[],
): string {
  const parts: string[] = ['<g class="points">'];
  const texts: string[] = [];
  requests.forEach((r, k) => {
    const label = placed[k]!;
    if (r.kind === 'well') parts.push(wellSymbol(r.x, r.y, r.point.rate));
    else if (r.kind === 'receptor') parts.push(receptorSymbol(r.x, r.y));
    else parts.push(observationSymbol(r.x, r.y));
    if (label.leader) {
      const l = label.leader;
      texts.push(`<line x1="${r1(l.x1)}" y1="${r1(l.y1)}" x2="${r1(l.x2)}" y2="${r1(l.y2)}" stroke="${MUTED}" stroke-width="0.9"/>`);
    }
    texts.push(haloText(label.x, label.baseline, r.text, r.size, r.bold ? 'bold' : 'normal', r.kind === 'receptor' ? RECEPTOR_INK : INK));
  });
  parts.push(...texts, '</g>');
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
  room: number,
  layers: ReadonlyArray<{ legend: string; id: string; style: MapCellStyle }>,
  showInactive: boolean,
): { svg: string; height: number; labels: LabelBox[] } {
  const parts: string[] = ['<g class="legend">'];
  const labels: LabelBox[] = [];
  const text = (tx: number, ty: number, content: string, size: number, colour = INK, bold = false) => {
    parts.push(
      `<text x="${r1(tx)}" y="${r1(ty)}" font-size="${size}"${bold ? ' font-weight="bold"' : ''} fill="${colour}">${escapeMarkup(content)}</text>`,
    );
    labels.push({ ...textBox(content, tx, ty, size, 'start', bold), text: content, kind: 'legend' });
  };
  const unit = input.units.length;
  const title = input.quantity === 'head' ? `Head (${unit})` : `Drawdown (${unit})`;
  text(x, top + 12, title, 13, INK, true);
  let y = top + 26;
  const barH = 200;
  const barW = 18;
  // Drawdown: "lowered" above the bar and "raised" below it, each on a line of its own, clear of the tick labels.
  if (input.quantity === 'drawdown') {
    text(x, y + 10, '\u2191 lowered', 10.5, MUTED);
    y += 22;
  }
  // Colour bar: vertical, high values on top.
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
    text(x + barW + 8, ty + 4, `${formatFixed(tick, ticks.decimals)}${zero ? ' (no change)' : ''}`, 11.5, INK, zero);
  }
  y += barH;
  if (input.quantity === 'drawdown') {
    text(x, y + 20, '\u2193 raised', 10.5, MUTED);
    y += 20;
  }
  y += 30;

  // One row: a symbol at the left, its label wrapped to the legend's width.
  const labelRoom = Math.max(80, room - 32);
  const row = (symbol: string, label: string) => {
    parts.push(symbol);
    const lines = wrapToWidth(label, labelRoom, 12, false);
    lines.forEach((line, k) => text(x + 32, y + 4 + k * 15, line, 12));
    y += 24 + (lines.length - 1) * 15;
  };
  const interval = contours.interval;
  const drawn = contours.levels.filter((l) => l.lines.length > 0);
  const contourLabel =
    interval !== null ? `Contour every ${formatFixed(interval, decimals)} ${unit}` : `Contours (${contours.levels.length} levels)`;
  if (drawn.length > 0) row(`<line x1="${x}" y1="${y}" x2="${x + 24}" y2="${y}" stroke="${INK}" stroke-width="0.9"/>`, contourLabel);
  else row('', 'No contours (no change above the noise level)');
  if (interval !== null && contours.levels.some((l) => isIndexLevel(contours, l.level))) {
    row(
      `<line x1="${x}" y1="${y}" x2="${x + 24}" y2="${y}" stroke="${INK}" stroke-width="1.6"/>`,
      labelsEveryLevel(contours)
        ? `Every ${formatFixed(5 * interval, decimals)} ${unit}`
        : `Every ${formatFixed(5 * interval, decimals)} ${unit}, labelled`,
    );
  }
  if (input.quantity === 'drawdown' && contours.levels.some((l) => l.level === 0 && l.lines.length > 0)) {
    row(`<line x1="${x}" y1="${y}" x2="${x + 24}" y2="${y}" stroke="${INK}" stroke-width="1.8" stroke-dasharray="6 3"/>`, 'Zero drawdown');
  }
  if (input.quantity === 'drawdown' && input.noiseLevel) {
    row('', `|Change| < ${formatSignificant(input.noiseLevel, 2)} ${unit}: none (solver accuracy)`);
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
  if ((input.receptors ?? []).length > 0) row(receptorSymbol(x + 12, y), 'Receptor (drawdown reported)');
  const observations = input.observations ?? [];
  if (dense.observations) densityLegend('observation points', observations.length, OBSERVATION_DENSITY_COLOUR, x, placed);
  else if (observations.length > 0) {
    row(observationSymbol(x + 12, y + 1), 'Observation point');
    const largest = largestResidual(observations);
    if (largest > 0) {
      row(
        `<circle cx="${x + 12}" cy="${y}" r="7" fill="${RESIDUAL_ABOVE}" fill-opacity="0.45" stroke="${RESIDUAL_ABOVE}" stroke-width="1.2"/>`,
        'Residual: simulated above observed',
      );
      row(
        `<circle cx="${x + 12}" cy="${y}" r="7" fill="${RESIDUAL_BELOW}" fill-opacity="0.45" stroke="${RESIDUAL_BELOW}" stroke-width="1.2"/>`,
        'Residual: simulated below observed',
      );
      y += 8;
      row(
        `<circle cx="${x + 12}" cy="${y}" r="${RESIDUAL_RADIUS}" fill="none" stroke="${MUTED}" stroke-width="1"/>`,
        `Circle area by size; largest ${formatSignificant(largest, 2)} ${unit}`,
      );
      y += 8;
    }
  }
  for (const layer of layers) {
    row(
      `<rect x="${x}" y="${y - 8}" width="24" height="16" fill="url(#${layer.id})" stroke="${escapeMarkup(layer.style.colour)}" stroke-width="${layer.style.pattern === 'outline' ? 1.8 : 0.8}"/>`,
      layer.legend,
    );
  }
  for (const overlay of input.overlays ?? []) for (const item of overlay.legend) row(item.symbol(x, y), item.label);
  if (showInactive)
    row(
      `<rect x="${x}" y="${y - 8}" width="24" height="16" fill="url(#nodata)" stroke="${MUTED}" stroke-width="0.8"/>`,
      'Inactive (no flow)',
    );
  parts.push('</g>');
  return { svg: parts.join(''), height: y - top, labels };
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
