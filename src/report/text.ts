/** Small text helpers shared by the SVG map and the HTML report. */

const ESCAPES: Record<string, string> = { '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' };

/** Escape text for XML/HTML element content and double- or single-quoted attribute values. */
export function escapeMarkup(text: string): string {
  // Also drop control characters that XML 1.0 forbids (a stray one would make the SVG unreadable).
  return String(text)
    .replace(/[\u0000-\u0008\u000b\u000c\u000e-\u001f\ufffe\uffff]/g, '')
    .replace(/[&<>"']/g, (c) => ESCAPES[c]!);
}

/** A number for people: fixed decimals, minus sign as U+2212, NaN as an en dash. */
export function formatFixed(value: number | null | undefined, decimals: number): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return '\u2013';
  const text = (Object.is(value, -0) ? 0 : value).toFixed(decimals);
  return text.startsWith('-') ? `\u2212${text.slice(1)}` : text;
}

/** A number with about `digits` significant digits, switching to exponent form for very large or small magnitudes. */
export function formatSignificant(value: number | null | undefined, digits = 4): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return '\u2013';
  if (value === 0) return '0';
  const magnitude = Math.abs(value);
  if (magnitude >= 1e7 || magnitude < 1e-4) {
    const text = value.toExponential(Math.max(0, digits - 1)).replace('e+', 'e');
    return text.startsWith('-') ? `\u2212${text.slice(1)}` : text;
  }
  const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(magnitude)));
  return formatFixed(value, Math.min(decimals, 10));
}

/**
 * A head or drawdown for people: 3 decimals, or 3 significant digits below 0.01 in magnitude, so that a small but
 * non-zero drawdown (e.g. 8e-5 m at a distant receptor) does not read as 0.000.
 */
export function formatLevel(value: number | null | undefined): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return '\u2013';
  return value === 0 || Math.abs(value) >= 0.01 ? formatFixed(value, 3) : formatSignificant(value, 3);
}

/** Round tick values (1, 2, 5 x 10^k steps) covering [min, max] with about `target` ticks. */
export function niceTicks(min: number, max: number, target = 5): { ticks: number[]; step: number; decimals: number } {
  if (!(max > min) || !Number.isFinite(max - min)) return { ticks: [min], step: 1, decimals: 0 };
  const raw = (max - min) / target;
  const power = Math.pow(10, Math.floor(Math.log10(raw)));
  const mantissa = raw / power;
  const step = (mantissa < 1.5 ? 1 : mantissa < 3.5 ? 2 : mantissa < 7.5 ? 5 : 10) * power;
  // toFixed takes at most 100 decimals (a range of 1e-300 asked for 301).
  const decimals = Math.min(100, Math.max(0, -Math.floor(Math.log10(step) + 1e-9)));
  const first = Math.ceil(min / step - 1e-9);
  // Where min / step passes 2^53 (heads near 1e14 over a centimetre, or 1000 over 1e-13), k + 1 === k and the
  // loop below never ended: then the two ends are the ticks. The loop is bounded by a count in any case.
  if (!Number.isSafeInteger(first)) return { ticks: [min, max], step: max - min, decimals };
  const ticks: number[] = [];
  for (let k = first; k * step <= max + 1e-9 * step && ticks.length <= 4 * target + 4; k++)
    ticks.push(Number((k * step).toFixed(decimals)));
  return { ticks, step, decimals };
}

/** Greedy word wrap by character count (the renderers have no text metrics). */
export function wrapText(text: string, maxChars: number): string[] {
  const lines: string[] = [];
  let line = '';
  for (const word of text.split(/\s+/)) {
    if (!word) continue;
    if (line && line.length + 1 + word.length > maxChars) {
      lines.push(line);
      line = word;
    } else {
      line = line ? `${line} ${word}` : word;
    }
  }
  if (line) lines.push(line);
  return lines;
}
