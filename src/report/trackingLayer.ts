/**
 * Capture zones and pathlines drawn on the head map, as a map overlay (map.ts draws overlays above the flow arrows
 * and below the wells, and lists their legend rows):
 * - each withdrawal well's zones in its own colour from the Okabe & Ito (2008) colour-blind-safe palette, over a
 *   white halo so that they read on every colour of the head ramp; the steady capture zone solid, the time zones
 *   dashed (shorter dashes for shorter times);
 * - backward pathlines thin, in dark grey, with arrowheads pointing the way the water flows (towards the well);
 * - forward tracks from points a little heavier in black, arrowed, with a ring at the release point and its id.
 * Geometry comes in the grid's map coordinates; `px`/`py` place it on the drawing.
 */
import type { TrackingRun } from '../analysis/tracking/run.js';
import { escapeMarkup } from './text.js';

/** A layer drawn over the map, with its legend rows (`symbol(x, y)`: an SVG snippet centred on the row at y). */
export interface MapOverlay {
  draw(px: (x: number) => number, py: (y: number) => number): string;
  legend: Array<{ symbol: (x: number, y: number) => string; label: string }>;
}

/** Okabe & Ito (2008) colour-blind-safe colours, the ones that stand out on the blue-to-yellow head ramp first. */
export const ZONE_COLOURS = ['#D55E00', '#CC79A7', '#009E73', '#E69F00', '#56B4E9', '#0072B2', '#000000'] as const;
const PATH_GREY = '#3a3a3a';
const POINT_INK = '#000000';
/** Above these counts the map draws only the first ones (all are in the GeoJSON files). */
const MAX_ZONE_WELLS = 50;
const MAX_PATHLINES = 2000;
/** Arrowhead spacing along a line, px. */
const ARROW_EVERY = 70;

/** Dash pattern of the k-th of `count` capture times (shorter times, shorter dashes); '' = solid (steady zone). */
function dashOf(k: number | null, count: number): string {
  if (k === null) return '';
  const long = 4 + (8 * (k + 1)) / Math.max(1, count);
  return `${long.toFixed(1)} 3`;
}

function r1(v: number): string {
  return (Math.round(v * 10) / 10).toString();
}

/** The overlay of one tracking run. */
export function trackingOverlay(run: TrackingRun, units: { time: string }): MapOverlay {
  const times = run.settings.captureTimes;
  const wells = run.capture.wells.slice(0, MAX_ZONE_WELLS).map((w) => w.id);
  const colourOf = new Map(wells.map((id, k) => [id, ZONE_COLOURS[k % ZONE_COLOURS.length]!]));
  const draw = (px: (x: number) => number, py: (y: number) => number): string => {
    const parts: string[] = ['<g class="tracking">'];
    // Pathlines first (below the zone outlines), backward ones reversed so that arrows point downstream.
    const lines = run.capture.pathlines.slice(0, MAX_PATHLINES);
    parts.push(`<g fill="none" stroke="${PATH_GREY}" stroke-width="0.7" stroke-linejoin="round">`);
    for (const line of lines) parts.push(arrowedLine(line.geometry.coordinates, true, px, py, PATH_GREY, 0.7));
    parts.push('</g>');
    // Zones: widest first (steady), then the time zones inside it.
    for (const zone of [...run.capture.zones].reverse()) {
      const colour = colourOf.get(zone.properties.well);
      if (!colour || !zone.geometry) continue;
      const polygons = zone.geometry.type === 'Polygon' ? [zone.geometry.coordinates] : zone.geometry.coordinates;
      const d = polygons
        .flatMap((rings) => rings.map((ring) => ring.map(([x, y], i) => `${i ? 'L' : 'M'}${r1(px(x!))} ${r1(py(y!))}`).join('') + 'Z'))
        .join('');
      const k = zone.properties.time === null ? null : times.indexOf(zone.properties.time);
      const dash = dashOf(k, times.length);
      const width = k === null ? 2.2 : 1.6;
      parts.push(`<path d="${d}" fill="none" stroke="#ffffff" stroke-width="${width + 2}" stroke-opacity="0.85" stroke-linejoin="round"/>`);
      parts.push(
        `<path d="${d}" fill="none" stroke="${colour}" stroke-width="${width}" stroke-linejoin="round"${dash ? ` stroke-dasharray="${dash}"` : ''}><title>${escapeMarkup(zone.properties.well)}</title></path>`,
      );
    }
    // Forward tracks from points, with their start and id.
    for (const track of run.points) {
      const c = track.pathline.geometry.coordinates;
      parts.push(arrowedLine(c, false, px, py, POINT_INK, 1.3));
      const [x0, y0] = c[0]!;
      parts.push(`<circle cx="${r1(px(x0!))}" cy="${r1(py(y0!))}" r="4" fill="#ffffff" stroke="${POINT_INK}" stroke-width="1.5"/>`);
      parts.push(
        `<text x="${r1(px(x0!) + 7)}" y="${r1(py(y0!) - 6)}" font-size="11" fill="${POINT_INK}" stroke="#ffffff" stroke-width="3" paint-order="stroke">${escapeMarkup(track.id)}</text>`,
      );
    }
    parts.push('</g>');
    return parts.join('');
  };
  const legend: MapOverlay['legend'] = [];
  wells.forEach((id) => {
    const colour = colourOf.get(id)!;
    legend.push({
      symbol: (x, y) => `<rect x="${x + 1}" y="${y - 7}" width="22" height="14" fill="none" stroke="${colour}" stroke-width="2.2"/>`,
      label: `Capture zone of ${id}`,
    });
  });
  if (wells.length) {
    legend.push({
      symbol: (x, y) => `<line x1="${x}" y1="${y}" x2="${x + 24}" y2="${y}" stroke="#555" stroke-width="2.2"/>`,
      label: 'steady (all water reaching it)',
    });
    times.forEach((t, k) => {
      legend.push({
        symbol: (x, y) =>
          `<line x1="${x}" y1="${y}" x2="${x + 24}" y2="${y}" stroke="#555" stroke-width="1.6" stroke-dasharray="${dashOf(k, times.length)}"/>`,
        label: `within ${t.toLocaleString('en-US')} ${units.time}`,
      });
    });
  }
  if (run.capture.pathlines.length) {
    legend.push({
      symbol: (x, y) =>
        arrowedLine(
          [
            [x, y],
            [x + 24, y],
          ],
          false,
          (v) => v,
          (v) => v,
          PATH_GREY,
          0.9,
          12,
        ),
      label: 'Pathline to a well',
    });
  }
  if (run.points.length) {
    legend.push({
      symbol: (x, y) =>
        arrowedLine(
          [
            [x, y],
            [x + 24, y],
          ],
          false,
          (v) => v,
          (v) => v,
          POINT_INK,
          1.3,
          12,
        ),
      label: 'Track from a point',
    });
  }
  return { draw, legend };
}

/** A polyline with arrowheads every ARROW_EVERY px (or one at `first` px), pointing along the flow. */
function arrowedLine(
  coordinates: readonly number[][],
  reverse: boolean,
  px: (x: number) => number,
  py: (y: number) => number,
  colour: string,
  width: number,
  first = ARROW_EVERY / 2,
): string {
  const n = coordinates.length;
  if (n < 2) return '';
  const xs = new Float64Array(n);
  const ys = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const [x, y] = coordinates[reverse ? n - 1 - i : i]!;
    xs[i] = px(x!);
    ys[i] = py(y!);
  }
  let d = `M${r1(xs[0]!)} ${r1(ys[0]!)}`;
  for (let i = 1; i < n; i++) d += `L${r1(xs[i]!)} ${r1(ys[i]!)}`;
  const heads: string[] = [];
  let next = first;
  let along = 0;
  for (let i = 1; i < n; i++) {
    const sx = xs[i]! - xs[i - 1]!;
    const sy = ys[i]! - ys[i - 1]!;
    const len = Math.hypot(sx, sy);
    while (len > 0 && along + len >= next) {
      const f = (next - along) / len;
      const ax = xs[i - 1]! + f * sx;
      const ay = ys[i - 1]! + f * sy;
      const ux = sx / len;
      const uy = sy / len;
      const s = 2.5 + 1.5 * width;
      heads.push(
        `M${r1(ax + ux * s)} ${r1(ay + uy * s)}L${r1(ax - ux * s - uy * s * 0.7)} ${r1(ay - uy * s + ux * s * 0.7)}L${r1(ax - ux * s + uy * s * 0.7)} ${r1(ay - uy * s - ux * s * 0.7)}Z`,
      );
      next += ARROW_EVERY;
    }
    along += len;
  }
  return (
    `<path d="${d}" fill="none" stroke="${colour}" stroke-width="${width}" stroke-linejoin="round"/>` +
    (heads.length ? `<path d="${heads.join('')}" fill="${colour}" stroke="none"/>` : '')
  );
}
