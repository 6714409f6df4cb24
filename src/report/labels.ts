/**
 * Text boxes on the map and where labels go: text widths in the bundled font, axis-aligned boxes, and the
 * placement of point labels (wells, observations, receptors) and contour labels so that no label overlaps another
 * label or a symbol. Every placed box is returned, so that tests can check the drawing without rasterising it.
 */

/** An axis-aligned box in px, y down. */
export interface Box {
  x0: number;
  y0: number;
  x1: number;
  y1: number;
}

/** A placed text and the box it covers. */
export interface LabelBox extends Box {
  text: string;
  /** What the text belongs to. */
  kind: 'point' | 'contour' | 'legend' | 'header';
}

export function boxesIntersect(a: Box, b: Box): boolean {
  return a.x0 < b.x1 && b.x0 < a.x1 && a.y0 < b.y1 && b.y0 < a.y1;
}

function overlapArea(a: Box, b: Box): number {
  const w = Math.min(a.x1, b.x1) - Math.max(a.x0, b.x0);
  const h = Math.min(a.y1, b.y1) - Math.max(a.y0, b.y0);
  return w > 0 && h > 0 ? w * h : 0;
}

function inside(a: Box, bounds: Box): boolean {
  return a.x0 >= bounds.x0 && a.y0 >= bounds.y0 && a.x1 <= bounds.x1 && a.y1 <= bounds.y1;
}

/**
 * Advance width of `text` in px in DejaVu Sans (the font the PNGs are rendered with), from classes of its glyph
 * advances (em fractions from memory, rounded up; test/report/map-labels.test.ts checks them against Chromium's
 * measurement of the drawn text); bold is about 10 % wider. An upper estimate for Latin text: browsers that
 * substitute a narrower font only leave more room.
 */
export function textWidth(text: string, size: number, bold = false): number {
  let em = 0;
  for (const c of text) {
    if (c === ' ') em += 0.32;
    else if ('.,:;'.includes(c)) em += 0.32;
    else if ("ijl|!'".includes(c)) em += 0.28;
    else if ('ft()[]{}'.includes(c)) em += 0.4;
    else if ('r-'.includes(c)) em += 0.42;
    else if (c >= '0' && c <= '9') em += 0.64;
    else if ('mM'.includes(c)) em += 0.98;
    else if ('wW'.includes(c)) em += 0.99;
    else if (c >= 'A' && c <= 'Z') em += 0.79;
    else if (c >= 'a' && c <= 'z') em += 0.64;
    else em += 0.84;
  }
  return em * size * (bold ? 1.1 : 1);
}

/** The box of a text drawn at (x, y) (baseline), anchored at its start, middle or end. */
export function textBox(text: string, x: number, y: number, size: number, anchor: 'start' | 'middle' | 'end' = 'start', bold = false): Box {
  const w = textWidth(text, size, bold);
  const x0 = anchor === 'start' ? x : anchor === 'middle' ? x - w / 2 : x - w;
  return { x0, y0: y - 0.95 * size, x1: x0 + w, y1: y + 0.26 * size };
}

/** A point label to place: the symbol's centre and radius, the text and its size. */
export interface PointLabelRequest {
  x: number;
  y: number;
  /** Half the symbol's size in px. */
  radius: number;
  text: string;
  size: number;
  bold: boolean;
}

/** A placed point label: text start at (x, baseline), its box, and a leader line from the symbol when moved away. */
export interface PlacedPointLabel {
  x: number;
  baseline: number;
  box: Box;
  leader: { x1: number; y1: number; x2: number; y2: number } | null;
}

/** The box of a symbol of half-size `radius` at (x, y). */
export function symbolBox(x: number, y: number, radius: number): Box {
  return { x0: x - radius, y0: y - radius, x1: x + radius, y1: y + radius };
}

/**
 * Place point labels one after the other (in the order given: the first are the most important). Each takes the
 * first of eight positions around its symbol (right, then the diagonals, left, above, below), at growing
 * distances with a leader line, whose box overlaps no symbol and no label placed before and lies in `bounds`;
 * when none is free, the position with the least overlap. Common cartographic practice (the eight-position model
 * of point-feature labelling).
 */
export function placePointLabels(requests: readonly PointLabelRequest[], symbols: readonly Box[], bounds: Box): PlacedPointLabel[] {
  const placed: Box[] = [];
  const result: PlacedPointLabel[] = [];
  for (const r of requests) {
    const w = textWidth(r.text, r.size, r.bold) + 2;
    const h = 1.22 * r.size;
    let best: { box: Box; overlap: number; distance: number } | null = null;
    for (let ring = 0; ring < 4 && !(best && best.overlap === 0); ring++) {
      const d = r.radius + 2 + ring * 12;
      const diagonal = 0.72 * d;
      // Box top-left corners: right, upper right, lower right, left, upper left, lower left, above, below.
      const corners: Array<[number, number]> = [
        [r.x + d, r.y - h / 2],
        [r.x + diagonal, r.y - diagonal - h],
        [r.x + diagonal, r.y + diagonal],
        [r.x - d - w, r.y - h / 2],
        [r.x - diagonal - w, r.y - diagonal - h],
        [r.x - diagonal - w, r.y + diagonal],
        [r.x - w / 2, r.y - d - h],
        [r.x - w / 2, r.y + d],
      ];
      for (const [x0, y0] of corners) {
        const box = { x0, y0, x1: x0 + w, y1: y0 + h };
        if (!inside(box, bounds)) continue;
        let overlap = 0;
        for (const s of symbols) overlap += overlapArea(box, s);
        for (const p of placed) overlap += overlapArea(box, p);
        if (!best || overlap < best.overlap) best = { box, overlap, distance: d };
        if (overlap === 0) break;
      }
    }
    // A point whose every candidate leaves the frame keeps the first one (clipped by the frame, never lost).
    const box = best?.box ?? { x0: r.x + r.radius + 2, y0: r.y - h / 2, x1: r.x + r.radius + 2 + w, y1: r.y + h / 2 };
    placed.push(box);
    const far = best !== null && best.distance > r.radius + 2;
    let leader: PlacedPointLabel['leader'] = null;
    if (far) {
      // From the symbol's edge towards the nearest point of the box.
      const nx = Math.min(Math.max(r.x, box.x0), box.x1);
      const ny = Math.min(Math.max(r.y, box.y0), box.y1);
      const len = Math.hypot(nx - r.x, ny - r.y) || 1;
      leader = { x1: r.x + ((nx - r.x) / len) * r.radius, y1: r.y + ((ny - r.y) / len) * r.radius, x2: nx, y2: ny };
    }
    result.push({ x: box.x0 + 1, baseline: box.y0 + 0.96 * r.size, box, leader });
  }
  return result;
}

/** The axis-aligned box of a text of width w and height h centred at (x, y) and turned by `angle` degrees. */
export function rotatedBox(x: number, y: number, w: number, h: number, angle: number): Box {
  const a = (angle * Math.PI) / 180;
  const c = Math.abs(Math.cos(a));
  const s = Math.abs(Math.sin(a));
  const W = w * c + h * s;
  const H = w * s + h * c;
  return { x0: x - W / 2, y0: y - H / 2, x1: x + W / 2, y1: y + H / 2 };
}

/** True when `box` lies in `bounds` and overlaps none of `obstacles`. */
export function isFree(box: Box, obstacles: readonly Box[], bounds: Box): boolean {
  if (!inside(box, bounds)) return false;
  for (const o of obstacles) if (boxesIntersect(box, o)) return false;
  return true;
}
