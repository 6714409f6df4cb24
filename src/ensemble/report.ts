/**
 * The ensemble's short report (report.html, self-contained, no script, no network): the settings, realisations
 * left out, per variant a histogram of the drawdown at every receptor with its mean, percentiles and exceedance
 * probabilities, the capture-zone probabilities per well, the maps (embedded PNGs), and the caution. Built only from the summary and the records, without timings, so a merge of
 * shards writes the same bytes as a one-machine run.
 */
import { CAUTION } from '../caution.js';
import { dataUrl } from '../report/png.js';
import { formatLevel } from '../report/text.js';
import type { EnsembleSetup, EnsembleSummaryJson, RealisationPoints } from './types.js';

/** A map of the result folder, shown in the report too. */
export interface EnsembleMapFile {
  file: string;
  caption: string;
  png: Uint8Array;
}

const esc = (t: string) => t.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
const num = (v: number | null, digits = 3) => (v === null || !Number.isFinite(v) ? 'n/a' : v.toFixed(digits));
/** Heads and drawdowns: small values keep their significant digits (formatLevel). */
const level = (v: number | null) => (v === null || !Number.isFinite(v) ? 'n/a' : formatLevel(v));

/** An SVG histogram of `values` (20 bins over their range), thresholds drawn as dashed lines. */
export function histogramSvg(values: readonly number[], thresholds: readonly number[], unit: string, label: string): string {
  const W = 420;
  const H = 180;
  const left = 40;
  const bottom = 30;
  if (values.length === 0) return `<p>No converged realisation at ${esc(label)}.</p>`;
  let lo = Math.min(...values);
  let hi = Math.max(...values);
  if (hi - lo < 1e-12) {
    lo -= 0.5;
    hi += 0.5;
  }
  const bins = 20;
  const counts = new Array<number>(bins).fill(0);
  for (const v of values) counts[Math.min(bins - 1, Math.floor(((v - lo) / (hi - lo)) * bins))]!++;
  const top = Math.max(...counts);
  const bw = (W - left - 10) / bins;
  const x = (v: number) => left + ((v - lo) / (hi - lo)) * (W - left - 10);
  const bars = counts
    .map((c, i) => {
      const h = (c / top) * (H - bottom - 10);
      return `<rect x="${(left + i * bw).toFixed(1)}" y="${(H - bottom - h).toFixed(1)}" width="${(bw - 1).toFixed(1)}" height="${h.toFixed(1)}" fill="#4a6fa5"/>`;
    })
    .join('');
  const lines = thresholds
    .filter((t) => t >= lo && t <= hi)
    .map(
      (t) =>
        `<line x1="${x(t).toFixed(1)}" x2="${x(t).toFixed(1)}" y1="10" y2="${H - bottom}" stroke="#b8431f" stroke-dasharray="4 3"/><text x="${(x(t) + 3).toFixed(1)}" y="20" font-size="11" fill="#b8431f">${t} ${esc(unit)}</text>`,
    )
    .join('');
  return (
    `<svg xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" role="img" aria-label="histogram of drawdown at ${esc(label)}">` +
    `<line x1="${left}" x2="${W - 10}" y1="${H - bottom}" y2="${H - bottom}" stroke="#333"/>${bars}${lines}` +
    `<text x="${left}" y="${H - 12}" font-size="11">${level(lo)}</text><text x="${W - 10}" y="${H - 12}" font-size="11" text-anchor="end">${level(hi)}</text>` +
    `<text x="${(W + left) / 2}" y="${H - 2}" font-size="11" text-anchor="middle">drawdown (${esc(unit)})</text>` +
    `<text x="4" y="16" font-size="11">n = ${values.length}</text></svg>`
  );
}

export function ensembleReportHtml(
  setup: EnsembleSetup,
  records: readonly RealisationPoints[],
  summary: EnsembleSummaryJson,
  maps: readonly EnsembleMapFile[] = [],
): string {
  const unit = setup.units.length;
  const parts: string[] = [];
  parts.push(`<h1>${esc(setup.title)}: ensemble</h1>`);
  parts.push(`<p class="caution"><strong>${esc(CAUTION)}</strong></p>`);
  const cond = setup.conditioning ? `, conditioned on ${setup.conditioning.points} measured K (${esc(setup.conditioning.file)})` : '';
  parts.push(
    `<p>${setup.realisations} realisations, seed ${setup.seed}; ln K: sd ${setup.logConductivity.sd}, correlation lengths ${setup.logConductivity.correlationLength.join(' × ')} ${esc(unit)}, ${esc(setup.logConductivity.model)} covariance${cond}. Circulant embedding ${setup.embedding.mx} × ${setup.embedding.my}.</p>`,
  );
  parts.push('<table><tr><th>run</th><th>converged</th><th>left out</th></tr>');
  for (const run of summary.runs)
    parts.push(
      `<tr><td>${esc(run.name)}</td><td>${run.converged}</td><td>${run.notConverged.map((n) => n.realisation).join(', ') || '–'}</td></tr>`,
    );
  parts.push('</table>');
  const receptors = setup.columns.map((c, k) => ({ c, k })).filter(({ c }) => c.kind === 'receptor');
  summary.runs.forEach((run, r) => {
    if (r === 0 || !run.drawdownAtPoints) return;
    parts.push(`<h2>Variant ${esc(run.name)}: drawdown at receptors</h2>`);
    if (receptors.length === 0) parts.push('<p>The scenario has no receptors.</p>');
    for (const { c, k } of receptors) {
      const values: number[] = [];
      for (const rec of records) {
        const b = rec.runs[0]!;
        const v = rec.runs[r]!;
        const hb = b.points[k];
        const hv = v.points[k];
        if (b.converged && v.converged && hb !== null && hb !== undefined && hv !== null && hv !== undefined) values.push(hb - hv);
      }
      const s = run.drawdownAtPoints.find((p) => p.id === c.id)!;
      const pcts = Object.entries(s.percentiles)
        .map(([p, v]) => `${p}: ${level(v)}`)
        .join(', ');
      const exc = s.exceedance.map((e) => `P(&gt; ${e.threshold} ${esc(unit)}) = ${num(e.probability, 3)}`).join(', ');
      parts.push(`<h3>${esc(c.id)}</h3><p>mean ${level(s.mean)} ${esc(unit)}, sd ${level(s.sd)}; ${pcts}; ${exc}</p>`);
      parts.push(histogramSvg(values, setup.drawdownThresholds, unit, c.id));
    }
  });
  const area = `${esc(unit)}²`;
  for (const run of summary.runs) {
    if (!run.captureProbability?.length) continue;
    parts.push(`<h2>${esc(run.name)}: capture-zone probability</h2>`);
    parts.push(
      `<p>Per well and zone (travel time in ${esc(setup.units.time)}, or steady): the expected zone area (sum of cell probability × cell area) and the area of the cells in the zone in at least 50 % and 90 % of the ${run.converged} converged realisations.</p>`,
    );
    parts.push(
      `<table><tr><th>well</th><th>zone</th><th>expected area (${area})</th><th>P ≥ 0.5 (${area})</th><th>P ≥ 0.9 (${area})</th></tr>`,
    );
    for (const w of run.captureProbability) {
      for (const z of w.zones) {
        parts.push(
          `<tr><td>${esc(w.well)}</td><td>${z.time === null ? 'steady' : `${z.time} ${esc(setup.units.time)}`}</td><td>${num(z.expectedArea, 0)}</td><td>${num(z.areaP50, 0)}</td><td>${num(z.areaP90, 0)}</td></tr>`,
        );
      }
    }
    parts.push('</table>');
  }
  if (maps.length) {
    parts.push('<h2>Maps</h2>');
    for (const m of maps) {
      parts.push(
        `<figure><img src="${dataUrl('image/png', m.png)}" alt="${esc(m.caption)}" style="max-width:100%"><figcaption>${esc(m.caption)} (${esc(m.file)})</figcaption></figure>`,
      );
    }
  }
  parts.push(`<p>Files: ${summary.files.map(esc).join(', ')}</p>`);
  return (
    '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8"><title>' +
    esc(setup.title) +
    ' – ensemble</title><style>body{font-family:sans-serif;max-width:60em;margin:1em auto;padding:0 1em}table{border-collapse:collapse}td,th{border:1px solid #999;padding:2px 8px}.caution{background:#fff4d6;padding:6px}</style></head><body>\n' +
    parts.join('\n') +
    '\n</body></html>\n'
  );
}
