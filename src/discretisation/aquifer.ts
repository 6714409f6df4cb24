/**
 * The aquifer's head-dependent transmissivity: the one place that knows confined, unconfined and convertible
 * layers (../shared/spec/physics.md, "Unconfined and convertible aquifers").
 *
 *   saturated thickness b_p = h_p - bottom_p (unconfined), min(h_p, top_p) - bottom_p (convertible);
 *   east-west C = dy/dx · HM(Kx_p, Kx_q) · (b_p + b_q)/2, north-south C = dx/dy · HM(Ky_p, Ky_q) · (b_p + b_q)/2
 *
 * (Dupuit-Forchheimer: horizontal flow, the confined five-point stencil with the thickness taken from the heads).
 *
 * Near a cell's bottom the thickness is smoothed so that the outer iteration does not jump between wet and dry:
 * below a smoothing depth e_p (1 % of the cell's full thickness top - bottom, or of the starting saturated
 * thickness where no top is given) the thickness follows the cubic d²(2e - d)/e² of the depth d = h - bottom, which
 * meets d with equal value and slope at d = e and falls to 0 at the bottom; above e it IS the contract's thickness,
 * so results of cells more than 1 % saturated are the contract's. A dry cell (h <= bottom) keeps a floor of
 * DRY_FRACTION·e so that the system stays non-singular; its flows are that small (reported, head nodata in outputs).
 */
import { fieldAt } from '../field.js';

export type AquiferType = 'confined' | 'unconfined' | 'convertible';

/** Floor of the saturated thickness of a dry cell, as a fraction of its smoothing depth. */
export const DRY_FRACTION = 1e-6;
/** Smoothing depth as a fraction of the full (or starting) saturated thickness: the 1 % of the contract's rule. */
export const SMOOTHING_FRACTION = 0.01;

/** The water-table state of an unconfined or convertible aquifer: per-cell data, allocated once. */
export interface WaterTable {
  type: 'unconfined' | 'convertible';
  /** Bottom elevation per cell (NaN off the active area). */
  bottom: Float64Array;
  /** Top elevation per cell (+Infinity where the aquifer has no top: unconfined). */
  top: Float64Array;
  /** Smoothing depth e_p per cell. */
  smoothing: Float64Array;
  /** Conductivity per cell (x direction); y is anisotropy times x. */
  conductivity: Float64Array;
  anisotropy: number;
  /** Saturated thickness at the current heads (the smoothed form), per cell; 0 off the active area. */
  saturated: Float64Array;
  /** 1 = dry (head at or below the bottom) at the current heads. */
  dry: Uint8Array;
}

/** The saturated thickness of depth d = min(h, top) - bottom with smoothing depth e (module comment). */
export function smoothedThickness(d: number, e: number): number {
  if (d >= e) return d;
  if (d <= 0) return DRY_FRACTION * e;
  return Math.max((d * d * (2 * e - d)) / (e * e), DRY_FRACTION * e);
}

/** The contract's saturated thickness of a cell for head h (not smoothed, 0 when dry). */
export function trueSaturatedThickness(type: AquiferType, h: number, top: number, bottom: number): number {
  const upper = type === 'convertible' ? Math.min(h, top) : h;
  return Math.max(upper - bottom, 0);
}

/**
 * The water table of a model, or null for a confined one. `active` marks the active cells; `start` the starting
 * heads (for the smoothing depth where the aquifer has no top).
 */
export function buildWaterTable(
  type: AquiferType,
  conductivity: Float64Array,
  anisotropy: number,
  bottomField: Float64Array | number,
  topField: Float64Array | number | undefined,
  active: Uint8Array,
  start: Float64Array,
): WaterTable | null {
  if (type === 'confined') return null;
  const n = active.length;
  const bottom = new Float64Array(n).fill(NaN);
  const top = new Float64Array(n).fill(Infinity);
  const smoothing = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    if (!active[p]) continue;
    const z = fieldAt(bottomField, p);
    bottom[p] = z;
    const t = topField === undefined ? Infinity : fieldAt(topField, p);
    if (type === 'convertible' || Number.isFinite(t)) top[p] = t;
    const full = Number.isFinite(top[p]!) ? top[p]! - z : start[p]! - z;
    // Where no top is given and the start is dry, fall back to a tenth of a length unit: any positive depth works.
    smoothing[p] = SMOOTHING_FRACTION * (full > 0 ? full : 10);
  }
  return { type, bottom, top, smoothing, conductivity, anisotropy, saturated: new Float64Array(n), dry: new Uint8Array(n) };
}

/**
 * The fraction of a well's rate a cell can deliver at head h: 1 while the cell is more than 1 % saturated (depth
 * above the smoothing depth e), falling with the smoothed thickness to 0 when the cell is dry. The rest is
 * the rate the well could not deliver, which is reported (never a silent rate reduction).
 */
export function deliveryFraction(table: WaterTable, p: number, h: number): number {
  const t = table.top[p]!;
  const d = (h < t ? h : t) - table.bottom[p]!;
  const e = table.smoothing[p]!;
  // Not the floored thickness: a dry cell delivers nothing (with the floor its head would swing by Q / C_floor).
  return d >= e ? 1 : d <= 0 ? 0 : (d * d * (2 * e - d)) / (e * e * e);
}

/** d(deliveryFraction)/dh at head h (0 above the smoothing depth, in a confined cell and in a dry cell). */
export function deliverySlope(table: WaterTable, p: number, h: number): number {
  const t = table.top[p]!;
  if (h >= t) return 0;
  const d = h - table.bottom[p]!;
  const e = table.smoothing[p]!;
  if (d >= e || d <= 0) return 0;
  // d/dd of d^2 (2e - d) / e^2, divided by e.
  return (d * (4 * e - 3 * d)) / (e * e * e);
}

/** Fraction of its saturated depth a cell keeps at least in one outer iteration (see limitFall; measured). */
export const FALL_LIMIT = 0.1;

/**
 * Limit the fall of the water table in one outer iteration (common practice for unconfined Picard iterations): a
 * cell more than 1 % saturated may lose at most 90 % (1 - FALL_LIMIT) of its saturated depth, so a cell reaches its bottom through
 * the smoothed zone instead of jumping from wet to deep below it (which makes the next linear system nearly singular
 * and the iteration cycle). `next` is changed in place; returns the number of cells limited.
 */
export function limitFall(table: WaterTable, head: Float64Array, next: Float64Array, unknown: Uint8Array): number {
  const { bottom, smoothing } = table;
  let limited = 0;
  for (let p = 0; p < next.length; p++) {
    if (!unknown[p]) continue;
    const z = bottom[p]!;
    const d = head[p]! - z;
    if (d <= smoothing[p]!) continue;
    const lowest = z + FALL_LIMIT * d;
    if (next[p]! < lowest) {
      next[p] = lowest;
      limited++;
    }
  }
  return limited;
}

/**
 * Saturated thickness (smoothed, for conductances) and dry flags at `head`, into table.saturated and table.dry;
 * returns the number of dry cells.
 */
export function updateSaturation(table: WaterTable, head: Float64Array, active: Uint8Array): number {
  const { bottom, top, smoothing, saturated, dry } = table;
  let dryCount = 0;
  for (let p = 0; p < head.length; p++) {
    if (!active[p]) {
      saturated[p] = 0;
      dry[p] = 0;
      continue;
    }
    const h = head[p]!;
    const t = top[p]!;
    const d = (h < t ? h : t) - bottom[p]!;
    saturated[p] = smoothedThickness(d, smoothing[p]!);
    const isDry = h <= bottom[p]! ? 1 : 0;
    dry[p] = isDry;
    dryCount += isDry;
  }
  return dryCount;
}

/**
 * Conductances between active neighbours from the saturated thickness in table.saturated (contract: harmonic mean
 * K times the mean saturated thickness), in place. Faces towards inactive cells stay 0.
 */
export function waterTableConductances(
  table: WaterTable,
  nx: number,
  ny: number,
  dx: number,
  dy: number,
  active: Uint8Array,
  conductanceEast: Float64Array,
  conductanceSouth: Float64Array,
): void {
  const { conductivity: k, saturated: b, anisotropy } = table;
  const ewRatio = dy / dx;
  const nsRatio = (dx / dy) * anisotropy;
  for (let i = 0; i < ny; i++) {
    const row = i * nx;
    for (let j = 0; j < nx - 1; j++) {
      const p = row + j;
      if (active[p] && active[p + 1]) {
        const kp = k[p]!;
        const kq = k[p + 1]!;
        conductanceEast[p] = (ewRatio * ((2 * kp * kq) / (kp + kq)) * (b[p]! + b[p + 1]!)) / 2;
      }
    }
    if (i < ny - 1) {
      for (let j = 0; j < nx; j++) {
        const p = row + j;
        if (active[p] && active[p + nx]) {
          const kp = k[p]!;
          const kq = k[p + nx]!;
          conductanceSouth[p] = (nsRatio * ((2 * kp * kq) / (kp + kq)) * (b[p]! + b[p + nx]!)) / 2;
        }
      }
    }
  }
}

/**
 * Default starting heads of a water-table aquifer: high enough that every cell starts wet (a false dry start is
 * hard to leave): the top where one is given, else the larger of the datum and the bottom plus the largest
 * prescribed saturated thickness. Prescribed cells keep their heads.
 */
export function defaultWaterTableStart(
  active: Uint8Array,
  fixed: Uint8Array,
  fixedHead: Float64Array,
  datum: number,
  bottomField: Float64Array | number,
  topField: Float64Array | number | undefined,
): Float64Array {
  const n = active.length;
  let depth = 0;
  for (let p = 0; p < n; p++) {
    if (fixed[p]) depth = Math.max(depth, fixedHead[p]! - fieldAt(bottomField, p));
  }
  const head = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    if (!active[p]) head[p] = NaN;
    else if (fixed[p]) head[p] = fixedHead[p]!;
    else {
      const t = topField === undefined ? NaN : fieldAt(topField, p);
      head[p] = Number.isFinite(t) ? t : Math.max(datum, fieldAt(bottomField, p) + 0.5 * depth);
    }
  }
  return head;
}

/**
 * Heads as result files show them: dry cells (head at or below the bottom) become NaN (nodata), as the contract
 * asks; confined models return `head` itself.
 */
export function headsForOutput(table: WaterTable | null, head: Float64Array): Float64Array {
  if (table === null) return head;
  const out = Float64Array.from(head);
  for (let p = 0; p < out.length; p++) if (out[p]! <= table.bottom[p]!) out[p] = NaN;
  return out;
}

/** The contract's saturated thickness per cell at `head` (0 in dry cells, NaN off the active area). */
export function saturatedThicknessField(table: WaterTable, head: Float64Array): Float64Array {
  const out = new Float64Array(head.length);
  for (let p = 0; p < out.length; p++) {
    const z = table.bottom[p]!;
    out[p] = Number.isFinite(z) && Number.isFinite(head[p]!) ? trueSaturatedThickness(table.type, head[p]!, table.top[p]!, z) : NaN;
  }
  return out;
}

/** Dry cells (head at or below the bottom) and a 0/1 mask of them. */
export function dryCells(table: WaterTable, head: Float64Array): { count: number; mask: Uint8Array } {
  const mask = new Uint8Array(head.length);
  let count = 0;
  for (let p = 0; p < head.length; p++) {
    if (head[p]! <= table.bottom[p]!) {
      mask[p] = 1;
      count++;
    }
  }
  return { count, mask };
}
