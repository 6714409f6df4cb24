/** The convergence plot: relative residual per iteration on a log scale, as inline SVG. */
import { escapeMarkup, formatSignificant } from './text.js';

export interface ConvergencePlotOptions {
  /** Relative tolerance of the stopping rule, drawn as a dashed line. */
  tolerance?: number;
  width?: number;
  height?: number;
  /** Accessible title. */
  title?: string;
}

/** Most points drawn; longer histories keep the lowest and highest value of each bucket. */
const MAX_POINTS = 800;

/**
 * SVG of log10(relative residual) against iteration. Non-positive or non-finite entries are skipped.
 * Returns a short SVG saying "no residual history" when there is nothing to draw.
 */
export function convergencePlotSvg(history: readonly number[], options: ConvergencePlotOptions = {}): string {
  const width = options.width ?? 640;
  const height = options.height ?? 260;
  const pad = { left: 62, right: 16, top: 14, bottom: 40 };
  const title = escapeMarkup(options.title ?? 'Relative residual per iteration');
  const head = `<svg xmlns="http://www.w3.org/2000/svg" class="convergence" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" role="img" aria-label="${title}">`;
  const points: Array<[number, number]> = [];
  for (let k = 0; k < history.length; k++) {
    const r = history[k]!;
    if (r > 0 && Number.isFinite(r)) points.push([k, Math.log10(r)]);
  }
  if (points.length < 2) {
    return `${head}<text x="${width / 2}" y="${height / 2}" text-anchor="middle" font-size="13" fill="#5b6770">no residual history recorded</text></svg>`;
  }
  const kept = decimate(points, MAX_POINTS);
  const lastIteration = points[points.length - 1]![0];
  let lo = Infinity;
  let hi = -Infinity;
  for (const [, y] of points) {
    lo = Math.min(lo, y);
    hi = Math.max(hi, y);
  }
  const tol = options.tolerance && options.tolerance > 0 ? Math.log10(options.tolerance) : null;
  if (tol !== null) {
    lo = Math.min(lo, tol);
    hi = Math.max(hi, tol);
  }
  lo = Math.floor(lo);
  hi = Math.ceil(hi);
  if (hi === lo) hi = lo + 1;
  const plotW = width - pad.left - pad.right;
  const plotH = height - pad.top - pad.bottom;
  const sx = (k: number) => pad.left + (lastIteration > 0 ? (k / lastIteration) * plotW : 0);
  const sy = (y: number) => pad.top + ((hi - y) / (hi - lo)) * plotH;
  const parts: string[] = [head, `<title>${title}</title>`];
  parts.push(`<rect x="${pad.left}" y="${pad.top}" width="${plotW}" height="${plotH}" fill="#fbfbfa" stroke="#c9cfd3"/>`);
  const decadeStep = Math.max(1, Math.ceil((hi - lo) / 8));
  for (let d = lo; d <= hi; d += decadeStep) {
    const y = sy(d).toFixed(1);
    parts.push(`<line x1="${pad.left}" x2="${pad.left + plotW}" y1="${y}" y2="${y}" stroke="#e3e6e8"/>`);
    parts.push(`<text x="${pad.left - 6}" y="${(sy(d) + 4).toFixed(1)}" font-size="11" text-anchor="end" fill="#39434a">1e${d}</text>`);
  }
  const xTicks = iterationTicks(lastIteration);
  for (const k of xTicks) {
    const x = sx(k).toFixed(1);
    parts.push(`<line x1="${x}" x2="${x}" y1="${pad.top + plotH}" y2="${pad.top + plotH + 4}" stroke="#39434a"/>`);
    parts.push(`<text x="${x}" y="${pad.top + plotH + 16}" font-size="11" text-anchor="middle" fill="#39434a">${k}</text>`);
  }
  parts.push(`<text x="${pad.left + plotW / 2}" y="${height - 6}" font-size="12" text-anchor="middle" fill="#39434a">iteration</text>`);
  parts.push(
    `<text transform="translate(14 ${pad.top + plotH / 2}) rotate(-90)" font-size="12" text-anchor="middle" fill="#39434a">relative residual</text>`,
  );
  if (tol !== null) {
    const y = sy(tol).toFixed(1);
    parts.push(`<line x1="${pad.left}" x2="${pad.left + plotW}" y1="${y}" y2="${y}" stroke="#b5651d" stroke-dasharray="5 4" stroke-width="1.2"/>`);
    parts.push(
      `<text x="${pad.left + plotW - 4}" y="${(sy(tol) - 5).toFixed(1)}" font-size="11" text-anchor="end" fill="#8a4a12">tolerance ${formatSignificant(options.tolerance!, 2)}</text>`,
    );
  }
  let d = '';
  for (let i = 0; i < kept.length; i++) d += `${i === 0 ? 'M' : 'L'}${sx(kept[i]![0]).toFixed(1)} ${sy(kept[i]![1]).toFixed(1)}`;
  parts.push(`<path d="${d}" fill="none" stroke="#1f4e79" stroke-width="1.6" stroke-linejoin="round"/>`);
  parts.push('</svg>');
  return parts.join('');
}

function decimate(points: Array<[number, number]>, max: number): Array<[number, number]> {
  if (points.length <= max) return points;
  const buckets = Math.floor(max / 2);
  const size = points.length / buckets;
  const out: Array<[number, number]> = [];
  for (let b = 0; b < buckets; b++) {
    const start = Math.floor(b * size);
    const end = Math.min(points.length, Math.floor((b + 1) * size));
    let low = points[start]!;
    let high = points[start]!;
    for (let k = start + 1; k < end; k++) {
      if (points[k]![1] < low[1]) low = points[k]!;
      if (points[k]![1] > high[1]) high = points[k]!;
    }
    if (low[0] < high[0]) out.push(low, high);
    else if (low === high) out.push(low);
    else out.push(high, low);
  }
  const last = points[points.length - 1]!;
  if (out[out.length - 1] !== last) out.push(last);
  return out;
}

function iterationTicks(last: number): number[] {
  if (last <= 0) return [0];
  const raw = last / 6;
  const power = Math.pow(10, Math.floor(Math.log10(raw)));
  const m = raw / power;
  const step = Math.max(1, (m < 1.5 ? 1 : m < 3.5 ? 2 : m < 7.5 ? 5 : 10) * power);
  const ticks: number[] = [];
  for (let k = 0; k <= last; k += step) ticks.push(k);
  return ticks;
}
