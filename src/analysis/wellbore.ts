/**
 * Well-bore heads from block heads with Peaceman's equivalent well-block radius.
 *
 * The head of a model cell holding a well is a block average: it lies well above the head in the pumped bore.
 * Peaceman (1978, SPE Journal 18(3), 183-194) showed that for the five-point scheme the cell head equals the
 * steady radial (Thiem) head at an equivalent radius r0, so that
 *   h_w = h_cell + Q/(2 pi T) ln(r0 / r_w)      (Q < 0 for withdrawal, so h_w < h_cell)
 * with r0 = 0.208 dx for square cells and isotropic transmissivity (0.208 ~ e^(-pi/2)), and for rectangular
 * cells or anisotropic transmissivity (Peaceman 1983, SPE Journal 23(3), 531-543; form quoted from memory)
 *   r0 = 0.28 sqrt( sqrt(Ty/Tx) dx^2 + sqrt(Tx/Ty) dy^2 ) / ( (Ty/Tx)^(1/4) + (Tx/Ty)^(1/4) ),  T = sqrt(Tx Ty).
 * Assumes the well's neighbours are active with about the same transmissivity, and one well per cell: where
 * several wells share a cell each one's own rate enters its log term (the cell head already holds them all).
 *
 * Water-table aquifers (src/discretisation/aquifer.ts): T = K times the cell's saturated thickness, and where the cell
 * is unconfined the same argument on Dupuit's form (the discrete equations are linear in (h - bottom)^2 there):
 *   (h_w - z)^2 = (h_cell - z)^2 + Q/(pi K) ln(r0 / r_w)
 * (Thiem's unconfined form between r_w and r0; Dupuit 1863, Thiem 1906). When the right side is negative the
 * well-bore head would fall below the bottom: the well cannot deliver its rate; it delivers at most
 * pi K (h_cell - z)^2 / ln(r0 / r_w) (that form with h_w = z) and the rest is reported as not delivered, with the
 * rate a drying cell could not give (deliveryFraction).
 */
import type { FlowSystem } from '../discretisation/assemble.js';
import { fieldAt } from '../field.js';
import { wellCells } from './points.js';
import type { ModelInput } from '../scenario/types.js';
import { deliveryFraction, trueSaturatedThickness } from '../discretisation/aquifer.js';

/** Well-bore radius used when a well gives none, per length unit (0.1 m; 0.33 ft, about the same). */
export const DEFAULT_WELL_RADIUS: Readonly<Record<'m' | 'ft', number>> = { m: 0.1, ft: 0.33 };

export interface WellboreResult {
  id: string;
  row: number;
  col: number;
  rate: number;
  /** Well-bore radius used (given, or the default). */
  radius: number;
  radiusDefaulted: boolean;
  /** Peaceman's equivalent well-block radius r0. */
  equivalentRadius: number;
  /** sqrt(Tx Ty) at the well's cell. */
  transmissivity: number;
  cellHead: number;
  wellboreHead: number;
  /** The well's lowest acceptable well-bore head, when given. */
  minimumHead: number | null;
  /** True when a minimum head is given and the well-bore head falls below it. */
  belowMinimum: boolean;
  /**
   * Water-table aquifers: the withdrawal (length^3/time, >= 0) the well could not deliver because its cell is drying
   * or its well-bore head would fall below the aquifer bottom; 0 otherwise.
   */
  undeliveredRate: number;
  /**
   * Water-table aquifers: of the rate the cell delivers, the part the well bore could not lift because its head would
   * fall below the aquifer bottom (Dupuit's form with h_w = bottom); 0 otherwise.
   */
  wellboreShortfall: number;
  /** Water-table aquifers: true when the cell is dry or the well-bore head would fall below the bottom. */
  dry: boolean;
  /** Water-table aquifers: true when the well's cell itself is dry (head at or below the bottom). */
  cellDry: boolean;
}

/**
 * Peaceman's equivalent well-block radius for cells dx by dy and anisotropy Ty/Tx: 0.208 dx for square
 * isotropic cells (Peaceman 1978), the rectangular/anisotropic form otherwise (Peaceman 1983).
 */
export function equivalentBlockRadius(dx: number, dy: number, anisotropy: number): number {
  // Square within rounding of the geotransform (e.g. 50.0000000001 m): the rectangular form would jump ~5 % lower.
  if (Math.abs(dx - dy) <= 1e-9 * Math.max(dx, dy) && anisotropy === 1) return 0.208 * dx;
  const ratio = anisotropy; // Ty/Tx
  const a = Math.sqrt(ratio);
  const b = Math.sqrt(1 / ratio);
  return (0.28 * Math.sqrt(a * dx * dx + b * dy * dy)) / (Math.pow(ratio, 0.25) + Math.pow(1 / ratio, 0.25));
}

/** h_w = h_cell + Q/(2 pi T) ln(r0/r_w) (Peaceman 1978). */
export function peacemanWellboreHead(
  cellHead: number,
  rate: number,
  transmissivity: number,
  equivalentRadius: number,
  radius: number,
): number {
  return cellHead + (rate / (2 * Math.PI * transmissivity)) * Math.log(equivalentRadius / radius);
}

/** Well-bore head of every well of a solved model, in the model's well order. */
export function wellboreHeads(model: ModelInput, system: FlowSystem, head: Float64Array): WellboreResult[] {
  const nx = system.grid.nx;
  const r0 = equivalentBlockRadius(system.dx, system.dy, model.anisotropy);
  const defaultRadius = DEFAULT_WELL_RADIUS[model.units.length];
  const cells = wellCells(system.grid, model.wells);
  const table = system.waterTable;
  return model.wells.map((well, k) => {
    const p = cells[k]!;
    const cellHead = head[p]!;
    const k0 = model.conductivity[p]! * Math.sqrt(model.anisotropy);
    const radius = well.radius ?? defaultRadius;
    const b = table === null ? fieldAt(model.thickness, p) : trueSaturatedThickness(table.type, cellHead, table.top[p]!, table.bottom[p]!);
    const transmissivity = k0 * b;
    let wellboreHead = peacemanWellboreHead(cellHead, well.rate, transmissivity, r0, radius);
    let undeliveredRate = 0;
    let wellboreShortfall = 0;
    let dry = false;
    let cellDry = false;
    if (table !== null && well.rate < 0) {
      const z = table.bottom[p]!;
      const delivered = well.rate * deliveryFraction(table, p, cellHead);
      undeliveredRate = delivered - well.rate;
      dry = cellHead <= z;
      cellDry = dry;
      if (cellHead < table.top[p]!) {
        const log = Math.log(r0 / radius);
        const square = b * b + (delivered * log) / (Math.PI * k0);
        if (square > 0) wellboreHead = z + Math.sqrt(square);
        else {
          // The well-bore would be dry: report what it can deliver at a well-bore head at the bottom.
          wellboreHead = z;
          dry = true;
          const most = (Math.PI * k0 * b * b) / log;
          wellboreShortfall = Math.max(0, -delivered - most);
        }
      }
    }
    const minimumHead = well.minimumHead ?? null;
    return {
      id: well.id,
      row: Math.floor(p / nx),
      col: p % nx,
      rate: well.rate,
      radius,
      radiusDefaulted: well.radius === undefined,
      equivalentRadius: r0,
      transmissivity,
      cellHead,
      wellboreHead,
      minimumHead,
      belowMinimum: minimumHead !== null && wellboreHead < minimumHead,
      undeliveredRate,
      wellboreShortfall,
      dry,
      cellDry,
    };
  });
}

/** Warnings a user must see: well-bore head below the well's minimum head; a radius the cell cannot resolve. */
export function wellboreWarnings(results: WellboreResult[], lengthUnit: string): string[] {
  const warnings: string[] = [];
  for (const w of results) {
    if (w.undeliveredRate > 1e-6 * -w.rate || w.wellboreShortfall > 0) {
      const lost =
        w.undeliveredRate > 1e-6 * -w.rate
          ? `its cell is ${w.cellDry ? 'dry' : 'drying'}: of its rate ${fmtRate(-w.rate)} it could not deliver ${fmtRate(w.undeliveredRate)}`
          : `of its rate ${fmtRate(-w.rate)}`;
      const bore =
        w.wellboreShortfall > 0
          ? `; its well-bore head would fall below the aquifer bottom, so a further ${fmtRate(w.wellboreShortfall)} cannot be lifted`
          : '';
      warnings.push(
        `well "${w.id}": ${lost}${bore} (${lengthUnit}^3 per time unit; the water table reaches the aquifer bottom there); lower the rate or move the well`,
      );
    }
    if (w.belowMinimum) {
      warnings.push(
        `well "${w.id}": well-bore head ${w.wellboreHead.toFixed(2)} ${lengthUnit} is below its minimumHead ${w.minimumHead} ${lengthUnit} ` +
          `(by ${(w.minimumHead! - w.wellboreHead).toFixed(2)} ${lengthUnit}): the rate may not be sustainable there`,
      );
    }
    if (w.radius >= w.equivalentRadius) {
      warnings.push(
        `well "${w.id}": radius ${w.radius} ${lengthUnit} is not smaller than the equivalent block radius ${w.equivalentRadius.toFixed(3)} ${lengthUnit}; the well-bore head is not meaningful on cells this small`,
      );
    }
  }
  return warnings;
}

function fmtRate(v: number): string {
  return Math.abs(v) >= 100 ? v.toFixed(0) : v.toPrecision(3);
}
