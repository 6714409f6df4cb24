/** The convergence plot: relative residual per iteration on a log scale, as inline SVG. */
import { escapeMarkup, formatFixed, formatSignificant, niceTicks } from './text.js';

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
    parts.push(
      `<line x1="${pad.left}" x2="${pad.left + plotW}" y1="${y}" y2="${y}" stroke="#b5651d" stroke-dasharray="5 4" stroke-width="1.2"/>`,
    );
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

/** One bar of the sources chart: a budget term and its share of the added pumping (%). */
export interface SourceBar {
  term: string;
  percent: number;
}

/**
 * Where the added pumping comes from, as horizontal bars: one per budget term, its share of the added pumping in
 * percent from a zero axis (a negative share, e.g. more outflow to a boundary, points left). Inline SVG.
 */
export function sourcesChartSvg(bars: readonly SourceBar[], options: { title?: string; width?: number } = {}): string {
  const width = options.width ?? 640;
  const rowH = 26;
  const pad = { left: 170, right: 80, top: 10, bottom: 30 };
  const height = pad.top + pad.bottom + Math.max(1, bars.length) * rowH;
  const title = escapeMarkup(options.title ?? 'Sources of the added pumping');
  let lo = 0;
  let hi = 100;
  for (const b of bars)
    if (Number.isFinite(b.percent)) {
      lo = Math.min(lo, b.percent);
      hi = Math.max(hi, b.percent);
    }
  const plotW = width - pad.left - pad.right;
  const sx = (v: number) => pad.left + ((v - lo) / (hi - lo)) * plotW;
  const parts: string[] = [
    `<svg xmlns="http://www.w3.org/2000/svg" class="sources-chart" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" role="img" aria-label="${title}">`,
  ];
  for (const tick of [lo, 0, 50, 100, hi].filter((v, k, all) => all.indexOf(v) === k && v >= lo && v <= hi)) {
    const x = sx(tick);
    parts.push(
      `<line x1="${x.toFixed(1)}" y1="${pad.top}" x2="${x.toFixed(1)}" y2="${height - pad.bottom}" stroke="${tick === 0 ? '#1d2327' : '#d9dee1'}" stroke-width="${tick === 0 ? 1.2 : 1}"/>`,
    );
    parts.push(
      `<text x="${x.toFixed(1)}" y="${height - pad.bottom + 16}" font-size="11" text-anchor="middle" fill="#5b6770">${escapeMarkup(formatSignificant(tick, 3))} %</text>`,
    );
  }
  bars.forEach((b, k) => {
    const y = pad.top + k * rowH;
    const p = Number.isFinite(b.percent) ? b.percent : 0;
    const x0 = sx(Math.min(0, p));
    const x1 = sx(Math.max(0, p));
    parts.push(`<text x="${pad.left - 8}" y="${y + 17}" font-size="12" text-anchor="end" fill="#1d2327">${escapeMarkup(b.term)}</text>`);
    parts.push(
      `<rect x="${x0.toFixed(1)}" y="${y + 5}" width="${Math.max(0.8, x1 - x0).toFixed(1)}" height="${rowH - 10}" fill="${p >= 0 ? '#1f4e79' : '#b5651d'}"/>`,
    );
    parts.push(
      `<text x="${(x1 + 6).toFixed(1)}" y="${y + 17}" font-size="12" fill="#1d2327">${escapeMarkup(formatSignificant(b.percent, 4))} %</text>`,
    );
  });
  parts.push('</svg>');
  return parts.join('');
}

/** One observation point: observed and simulated head. */
export interface ObservedSimulated {
  id: string;
  observed: number;
  simulated: number;
}

/**
 * Observed against simulated head with the 1:1 line (a perfect fit lies on it), both axes over the same range;
 * each point labelled with its id when there are at most 30. Inline SVG.
 */
export function observedSimulatedSvg(
  points: readonly ObservedSimulated[],
  options: { unit?: string; size?: number; title?: string } = {},
): string {
  const size = options.size ?? 360;
  const pad = { left: 58, right: 14, top: 12, bottom: 46 };
  const unit = escapeMarkup(options.unit ?? 'm');
  const title = escapeMarkup(options.title ?? 'Observed against simulated head');
  const finite = points.filter((p) => Number.isFinite(p.observed) && Number.isFinite(p.simulated));
  const head = `<svg xmlns="http://www.w3.org/2000/svg" class="observed-simulated" width="${size}" height="${size}" viewBox="0 0 ${size} ${size}" role="img" aria-label="${title}">`;
  if (finite.length === 0)
    return `${head}<text x="${size / 2}" y="${size / 2}" text-anchor="middle" font-size="13" fill="#5b6770">no observation points</text></svg>`;
  let lo = Infinity;
  let hi = -Infinity;
  for (const p of finite) {
    lo = Math.min(lo, p.observed, p.simulated);
    hi = Math.max(hi, p.observed, p.simulated);
  }
  const margin = Math.max((hi - lo) * 0.08, 0.5);
  lo -= margin;
  hi += margin;
  const plot = size - pad.left - pad.right;
  const sx = (v: number) => pad.left + ((v - lo) / (hi - lo)) * plot;
  const sy = (v: number) => pad.top + plot - ((v - lo) / (hi - lo)) * plot;
  const parts: string[] = [head];
  parts.push(`<rect x="${pad.left}" y="${pad.top}" width="${plot}" height="${plot}" fill="none" stroke="#1d2327" stroke-width="0.8"/>`);
  const ticks = niceTicks(lo, hi, 5);
  for (const t of ticks.ticks) {
    if (t < lo || t > hi) continue;
    parts.push(
      `<line x1="${sx(t).toFixed(1)}" y1="${pad.top + plot}" x2="${sx(t).toFixed(1)}" y2="${pad.top + plot + 4}" stroke="#1d2327"/>`,
    );
    parts.push(
      `<text x="${sx(t).toFixed(1)}" y="${pad.top + plot + 16}" font-size="11" text-anchor="middle" fill="#5b6770">${formatFixed(t, ticks.decimals)}</text>`,
    );
    parts.push(`<line x1="${pad.left - 4}" y1="${sy(t).toFixed(1)}" x2="${pad.left}" y2="${sy(t).toFixed(1)}" stroke="#1d2327"/>`);
    parts.push(
      `<text x="${pad.left - 7}" y="${(sy(t) + 4).toFixed(1)}" font-size="11" text-anchor="end" fill="#5b6770">${formatFixed(t, ticks.decimals)}</text>`,
    );
  }
  parts.push(
    `<line class="one-to-one" x1="${sx(lo).toFixed(1)}" y1="${sy(lo).toFixed(1)}" x2="${sx(hi).toFixed(1)}" y2="${sy(hi).toFixed(1)}" stroke="#5b6770" stroke-width="1" stroke-dasharray="5 3"/>`,
  );
  // "1:1" above the line where it is farthest from every point (and so from their labels).
  let at = lo + 0.5 * (hi - lo);
  let clearance = -1;
  for (const f of [0.15, 0.3, 0.45, 0.6, 0.75, 0.9]) {
    const v = lo + f * (hi - lo);
    let nearest = Infinity;
    for (const p of finite) nearest = Math.min(nearest, Math.hypot(sx(p.observed) - sx(v), sy(p.simulated) - sy(v)));
    if (nearest > clearance) {
      clearance = nearest;
      at = v;
    }
  }
  parts.push(
    `<text x="${(sx(at) - 6).toFixed(1)}" y="${(sy(at) - 6).toFixed(1)}" font-size="11" text-anchor="end" fill="#5b6770">1:1</text>`,
  );
  for (const p of finite) {
    const colour = p.simulated > p.observed ? '#c0392b' : '#2166ac';
    parts.push(
      `<circle cx="${sx(p.observed).toFixed(1)}" cy="${sy(p.simulated).toFixed(1)}" r="4" fill="${colour}" fill-opacity="0.75" stroke="#1d2327" stroke-width="0.6"><title>${escapeMarkup(p.id)}</title></circle>`,
    );
    if (finite.length <= 30)
      parts.push(
        `<text x="${(sx(p.observed) + 6).toFixed(1)}" y="${(sy(p.simulated) - 5).toFixed(1)}" font-size="10.5" fill="#1d2327">${escapeMarkup(p.id)}</text>`,
      );
  }
  parts.push(
    `<text x="${pad.left + plot / 2}" y="${size - 8}" font-size="12" text-anchor="middle" fill="#1d2327">Observed head (${unit})</text>`,
  );
  parts.push(
    `<text transform="translate(14 ${pad.top + plot / 2}) rotate(-90)" font-size="12" text-anchor="middle" fill="#1d2327">Simulated head (${unit})</text>`,
  );
  parts.push('</svg>');
  return parts.join('');
}
