/**
 * The report's section on particle tracking for one run: zone areas per well and capture time (with the change
 * against the baseline for a variant), forward tracks from points (where and when they arrive), and, for a
 * variant, the receptors that lie inside a new capture zone. Every user-supplied string is escaped.
 */
import { escapeMarkup as e, formatFixed } from './text.js';

export interface ReportTracking {
  captureTimes: number[];
  wells: Array<{ id: string; zones: Array<{ time: number | null; area: number; change?: number | null }> }>;
  points: Array<{ id: string; endsAt: string; endReason: string; travelTime: number }>;
  /** Variants: receptors whose water a well captures now and did not in the baseline. */
  newCaptures?: Array<{ receptor: string; well: string; travelTime: number; baselineWell: string | null }>;
  /** Variants: wells of the baseline that no longer capture (switched off), with their former steady zone area. */
  lostZones?: Array<{ well: string; area: number }>;
  warnings: string[];
}

const ROWS = 1000;

function area(a: number): string {
  return Math.round(a).toLocaleString('en-US');
}

function signed(a: number): string {
  const r = Math.round(a);
  return (r > 0 ? '+' : r < 0 ? '\u2212' : '\u00b1') + Math.abs(r).toLocaleString('en-US');
}

function time(t: number): string {
  if (!Number.isFinite(t)) return '\u2013';
  return t >= 100 ? Math.round(t).toLocaleString('en-US') : formatFixed(t, 2);
}

/** The section's HTML (an `<h3>` block inside the run's section). */
export function trackingSectionHtml(t: ReportTracking, L: string, T: string): string {
  const parts: string[] = [];
  const hasChange = t.wells.some((w) => w.zones.some((z) => z.change !== undefined));
  parts.push(`<h3>Capture zones and travel times</h3>`);
  if (t.newCaptures?.length) {
    const items = t.newCaptures.map(
      (c) =>
        `<li><strong>${e(c.receptor)}</strong> lies inside the capture zone of <strong>${e(c.well)}</strong> (travel time ${time(c.travelTime)} ${e(T)})${c.baselineWell ? `; in the baseline its water went to ${e(c.baselineWell)}` : '; in the baseline no well captured it'}</li>`,
    );
    parts.push(`<div class="caution" role="note"><strong>Receptors inside a new capture zone.</strong><ul>${items.join('')}</ul></div>`);
  } else if (t.newCaptures) {
    parts.push('<p class="quiet">No receptor lies inside a new capture zone.</p>');
  }
  if (t.wells.length === 0) parts.push('<p class="quiet">No withdrawal well, so no capture zone.</p>');
  else {
    const columns: Array<number | null> = [...t.captureTimes, null];
    const head =
      `<th scope="col">Well</th>` +
      columns
        .map((c) => `<th scope="col" class="num">${c === null ? 'Steady zone' : `Within ${e(time(c))} ${e(T)}`} (${e(L)}\u00b2)</th>`)
        .join('');
    const rows = t.wells.slice(0, ROWS).map((w) => {
      const cells = columns.map((c) => {
        const z = w.zones.find((zone) => zone.time === c);
        if (!z) return '<td class="num">\u2013</td>';
        const change = hasChange && z.change !== undefined && z.change !== null ? ` <span class="quiet">(${signed(z.change)})</span>` : '';
        return `<td class="num">${area(z.area)}${change}</td>`;
      });
      return `<tr><th scope="row">${e(w.id)}</th>${cells.join('')}</tr>`;
    });
    parts.push(`<div class="scroll"><table class="data"><thead><tr>${head}</tr></thead><tbody>${rows.join('')}</tbody></table></div>`);
    parts.push(
      `<p class="quiet">Areas of the time-of-travel zones (all places whose water reaches the well within that time; zones nest) and of the steady capture zone (all water that ever reaches it), from Pollock particle tracking on the budget\u2019s face flows.${hasChange ? ' In brackets: the change against the baseline.' : ''}</p>`,
    );
  }
  if (t.lostZones?.length) {
    parts.push(
      `<p>Wells of the baseline that capture no water here: ${t.lostZones.map((z) => `${e(z.well)} (steady zone ${area(z.area)} ${e(L)}\u00b2 in the baseline)`).join(', ')}.</p>`,
    );
  }
  if (t.points.length) {
    const rows = t.points.slice(0, ROWS).map((p) => {
      const where = p.endReason === 'well' ? `well ${e(p.endsAt)}` : p.endReason === 'boundary' ? `boundary ${e(p.endsAt)}` : e(p.endsAt);
      return `<tr><th scope="row">${e(p.id)}</th><td>${where}</td><td class="num">${time(p.travelTime)}</td></tr>`;
    });
    parts.push(
      `<h4>Tracks from points (forward)</h4><div class="scroll"><table class="data"><thead><tr><th scope="col">Point</th><th scope="col">Arrives at</th><th scope="col" class="num">Travel time (${e(T)})</th></tr></thead><tbody>${rows.join('')}</tbody></table></div>`,
    );
  }
  if (t.warnings.length) parts.push(`<ul class="warnings">${t.warnings.map((w) => `<li>${e(w)}</li>`).join('')}</ul>`);
  return parts.join('\n');
}
