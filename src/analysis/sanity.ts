/**
 * Physical sanity warnings (never errors): numbers that are possible but suspicious, or results that fall outside
 * what a steady confined model can represent. They go into SolveResult.warnings, so into summary.json and the printed
 * summary.
 *
 * - Conductivity outside the range of published values. Source: Freeze & Cherry (1979), Groundwater, Table 2.2
 *   (range of values of hydraulic conductivity), whose K axis runs from about 1e-13 m/s (unfractured igneous and
 *   metamorphic rock) to about 1 m/s (gravel). The end values are quoted from memory.
 * - Heads above a given ground surface (flowing artesian), below a given aquifer bottom (dewatered), and below a
 *   given aquifer top (the aquifer drains: no longer confined; common practice for the confined-model check).
 * - Other inputs far outside what occurs in nature (inputWarnings): see PLAUSIBLE for each bound and its source.
 *   Magnitudes the arithmetic cannot carry at all are input errors, not warnings (src/scenario/magnitudes.ts).
 */
import type { FlowSystem } from '../discretisation/assemble.js';
import { fieldAt as at } from '../field.js';
import type { ModelInput, Units } from '../scenario/types.js';
import type { WellboreResult } from './wellbore.js';

/** Published range of hydraulic conductivity in m/s (Freeze & Cherry 1979, Table 2.2; from memory). */
export const CONDUCTIVITY_RANGE_M_PER_S = { min: 1e-13, max: 1 } as const;

/** Factor from the scenario's length/time units to m/s. */
export function metresPerSecond(units: Units): number {
  const metres = units.length === 'ft' ? 0.3048 : 1; // international foot, exact
  const seconds = units.time === 'd' ? 86400 : 1;
  return metres / seconds;
}

function cellText(p: number, nx: number): string {
  return `row ${Math.floor(p / nx)}, col ${p % nx}`;
}

function fmt(value: number): string {
  return Math.abs(value) >= 0.01 && Math.abs(value) < 1e6 ? value.toFixed(2) : value.toExponential(2);
}

/** Active cells whose conductivity lies outside the published range, in the scenario's units. */
export function conductivityWarnings(model: ModelInput, active: Uint8Array): string[] {
  const toSI = metresPerSecond(model.units);
  const unit = `${model.units.length}/${model.units.time}`;
  const low = CONDUCTIVITY_RANGE_M_PER_S.min / toSI;
  const high = CONDUCTIVITY_RANGE_M_PER_S.max / toSI;
  const k = model.conductivity;
  let above = 0;
  let below = 0;
  let highest = -Infinity;
  let lowest = Infinity;
  for (let p = 0; p < k.length; p++) {
    if (!active[p]) continue;
    const v = k[p]!;
    if (v > high) above++;
    if (v < low) below++;
    if (v > highest) highest = v;
    if (v < lowest) lowest = v;
  }
  const source = 'Freeze & Cherry 1979, Table 2.2';
  const units = `check the units (units.length "${model.units.length}", units.time "${model.units.time}")`;
  const warnings: string[] = [];
  if (above > 0) {
    warnings.push(
      `aquifer.conductivity: ${above} active cell(s) above ${fmt(high)} ${unit} (1 m/s, the top of published values, for gravel; ${source}), up to ${fmt(highest)} ${unit}: ${units}`,
    );
  }
  if (below > 0) {
    warnings.push(
      `aquifer.conductivity: ${below} active cell(s) below ${fmt(low)} ${unit} (1e-13 m/s, the bottom of published values, for unfractured rock; ${source}), down to ${fmt(lowest)} ${unit}: ${units}`,
    );
  }
  return warnings;
}

/**
 * Bounds of physically plausible inputs, in metres and seconds (converted to the scenario's units when checked).
 * Values beyond them are possible only by a unit or data error, so they are warned about, never refused.
 */
export const PLAUSIBLE = {
  /** Saturated aquifer thickness: 1 cm to 10 km. Common practice; 10 km is about the depth of the deepest
   * sedimentary basins (from memory), far beyond any aquifer tapped for water. */
  thicknessMetres: { min: 0.01, max: 10_000 },
  /** Recharge magnitude: the greatest rainfall recorded in one year, about 26.5 m (Cherrapunji, 1860-61; from
   * memory), as a rate. No recharge (or net discharge) can exceed the rain that falls. */
  rechargeMetresPerYear: 26.5,
  /** One well's rate: 10 m3/s, about ten times the largest single water wells (radial collector wells, of the
   * order of 1 m3/s; from memory). */
  wellCubicMetresPerSecond: 10,
  /** Horizontal anisotropy Ky/Kx: 0.01 to 100 (common practice; reported ratios rarely pass 10 to 1). */
  anisotropy: { min: 0.01, max: 100 },
  /** Cell size: 1 cm to 100 km (common practice for groundwater models). */
  cellMetres: { min: 0.01, max: 100_000 },
  /** Heads and elevations: the Earth's relief, about -11 km (deepest ocean trench) to +8.85 km (highest summit),
   * from memory. Heads are elevations above a datum such as sea level. */
  elevationMetres: { min: -11_000, max: 8_850 },
} as const;

const SECONDS_PER_YEAR = 365.25 * 86400;

function metres(units: Units): number {
  return units.length === 'ft' ? 0.3048 : 1;
}

function secondsPer(units: Units): number {
  return units.time === 'd' ? 86400 : 1;
}

/** Count of values beyond [min, max] (NaN skipped) where `keep[p]` (or everywhere), with the most extreme one. */
function beyond(
  values: Float64Array | number,
  min: number,
  max: number,
  keep: Uint8Array | null,
): { count: number; worst: number; at: number } {
  const n = typeof values === 'number' ? 1 : values.length;
  let count = 0;
  let worst = NaN;
  let at = -1;
  let excess = 0;
  for (let p = 0; p < n; p++) {
    if (keep && typeof values !== 'number' && !keep[p]) continue;
    const v = typeof values === 'number' ? values : values[p]!;
    const e = v > max ? v / max : v < min ? (min > 0 ? min / v : v / min) : 0;
    if (!(e > 0)) continue;
    count++;
    if (e > excess) {
      excess = e;
      worst = v;
      at = p;
    }
  }
  return { count, worst, at };
}

/**
 * Inputs beyond the bounds of PLAUSIBLE (thickness, recharge, well rates, anisotropy, cell size, heads and
 * elevations), each a warning naming the key and the most extreme value. Conductivity has conductivityWarnings.
 */
export function inputWarnings(model: ModelInput, active: Uint8Array): string[] {
  const warnings: string[] = [];
  const m = metres(model.units);
  const s = secondsPer(model.units);
  const u = model.units.length;
  const t = model.units.time;
  const nx = model.grid.nx;
  const where = (field: Float64Array | number, at: number) => (typeof field === 'number' ? '' : ` (most extreme at ${cellText(at, nx)})`);
  const units = `check the units (units.length "${u}", units.time "${t}")`;

  const thick = PLAUSIBLE.thicknessMetres;
  const b = beyond(model.thickness, thick.min / m, thick.max / m, active);
  if (b.count > 0) {
    warnings.push(
      `aquifer.thickness: ${typeof model.thickness === 'number' ? fmt(b.worst) : `${b.count} active cell(s) outside ${fmt(thick.min / m)} to ${fmt(thick.max / m)}, e.g. ${fmt(b.worst)}`} ${u}${where(model.thickness, b.at)} lies outside the plausible range of aquifer thickness (1 cm to 10 km; common practice): ${units}`,
    );
  }

  const rechargeLimit = (PLAUSIBLE.rechargeMetresPerYear / m) * (s / SECONDS_PER_YEAR);
  const r = beyond(model.recharge, -rechargeLimit, rechargeLimit, active);
  if (r.count > 0) {
    warnings.push(
      `recharge: ${typeof model.recharge === 'number' ? fmt(r.worst) : `${r.count} active cell(s) beyond ±${fmt(rechargeLimit)}, e.g. ${fmt(r.worst)}`} ${u}/${t}${where(model.recharge, r.at)} exceeds the greatest rainfall recorded in a year (about 26.5 m; from memory) as a rate: ${units}`,
    );
  }

  const wellLimit = (PLAUSIBLE.wellCubicMetresPerSecond / (m * m * m)) * s;
  for (const well of model.wells) {
    if (Math.abs(well.rate) > wellLimit) {
      warnings.push(
        `well "${well.id}" (${well.source}): rate ${fmt(well.rate)} ${u}3/${t} exceeds ${fmt(wellLimit)} ${u}3/${t} (10 m3/s, about ten times the largest single water wells; from memory): ${units}`,
      );
    }
  }

  const a = model.anisotropy;
  if (a < PLAUSIBLE.anisotropy.min || a > PLAUSIBLE.anisotropy.max) {
    warnings.push(`aquifer.anisotropy ${fmt(a)} lies outside 0.01 to 100, the plausible range of the ratio Ky/Kx (common practice)`);
  }

  const transform = model.grid.transform;
  const cell = PLAUSIBLE.cellMetres;
  for (const [what, size] of [
    ['width', Math.abs(transform[1])],
    ['height', Math.abs(transform[5])],
  ] as const) {
    if (size < cell.min / m || size > cell.max / m) {
      warnings.push(
        `aquifer.conductivity: cell ${what} ${fmt(size)} ${u} lies outside 1 cm to 100 km (common practice for groundwater models): check the raster's CRS units against units.length "${u}"`,
      );
    }
  }

  const relief = PLAUSIBLE.elevationMetres;
  const low = relief.min / m;
  const high = relief.max / m;
  const reliefText = `the Earth's relief (about -11 km to +8.85 km; from memory): heads are elevations above a datum such as sea level; ${units}`;
  for (const entry of model.fixedHeads) {
    const h = beyond(entry.heads, low, high, null);
    if (h.count > 0)
      warnings.push(
        `${entry.source} ("${entry.name}"): ${h.count} head(s) outside ${fmt(low)} to ${fmt(high)} ${u}, e.g. ${fmt(h.worst)} ${u}, lie beyond ${reliefText}`,
      );
  }
  for (const o of model.observations) {
    if (o.head < low || o.head > high)
      warnings.push(`observation "${o.id}" (${o.source}): head ${fmt(o.head)} ${u} lies beyond ${reliefText}`);
  }
  for (const [key, field] of [
    ['aquifer.top', model.aquiferTop],
    ['aquifer.bottom', model.aquiferBottom],
    ['groundSurface', model.groundSurface],
  ] as const) {
    if (field === undefined) continue;
    const e = beyond(field, low, high, null);
    if (e.count > 0)
      warnings.push(
        `${key}: ${typeof field === 'number' ? fmt(e.worst) : `${e.count} cell(s), e.g. ${fmt(e.worst)}`} ${u} lies beyond ${reliefText}`,
      );
  }
  return warnings;
}

/** Heads against the given ground surface, aquifer bottom and aquifer top; well-bore heads against the top. */
export function headWarnings(model: ModelInput, system: FlowSystem, head: Float64Array, wellbore: WellboreResult[]): string[] {
  const { active } = system;
  const nx = system.grid.nx;
  const u = model.units.length;
  const warnings: string[] = [];
  /** Count of active cells where `excess(p)` > 0, and the cell of the largest excess. */
  const survey = (excess: (p: number) => number) => {
    let count = 0;
    let worst = -1;
    let most = 0;
    for (let p = 0; p < head.length; p++) {
      if (!active[p]) continue;
      const e = excess(p);
      if (e > 0) {
        count++;
        if (e > most) {
          most = e;
          worst = p;
        }
      }
    }
    return { count, worst, most };
  };
  const ground = model.groundSurface;
  if (ground !== undefined) {
    const s = survey((p) => head[p]! - at(ground, p));
    if (s.count > 0) {
      warnings.push(
        `head above the ground surface at ${s.count} active cell(s), up to ${fmt(s.most)} ${u} at ${cellText(s.worst, nx)}: flowing artesian conditions there; check the fixed heads and groundSurface`,
      );
    }
  }
  // Water-table aquifers model the drained and dry states themselves (dry cells are counted and reported there).
  const confined = (model.aquiferType ?? 'confined') === 'confined';
  const bottom = model.aquiferBottom;
  if (bottom !== undefined && confined) {
    const s = survey((p) => at(bottom, p) - head[p]!);
    if (s.count > 0) {
      warnings.push(
        `head below the aquifer bottom at ${s.count} active cell(s), down to ${fmt(s.most)} ${u} below it at ${cellText(s.worst, nx)}: the aquifer would be dry there, which this confined model cannot represent; reduce the pumping or check the fixed heads`,
      );
    }
  }
  const top = model.aquiferTop;
  if (top !== undefined && confined) {
    const s = survey((p) => at(top, p) - head[p]!);
    if (s.count > 0) {
      warnings.push(
        `head below the aquifer top at ${s.count} active cell(s), down to ${fmt(s.most)} ${u} below it at ${cellText(s.worst, nx)}: the aquifer is no longer confined there (it drains), so its transmissivity falls and real drawdowns would exceed the computed ones`,
      );
    }
    for (const w of wellbore) {
      const t = at(top, w.row * nx + w.col);
      if (w.wellboreHead < t) {
        warnings.push(
          `well "${w.id}": the drawdown exceeds the confining head above the aquifer top: well-bore head ${fmt(w.wellboreHead)} ${u} is ${fmt(t - w.wellboreHead)} ${u} below the top (${fmt(t)} ${u}); the confined assumption breaks down around this well`,
        );
      }
    }
  }
  return warnings;
}

export function sanityWarnings(model: ModelInput, system: FlowSystem, head: Float64Array, wellbore: WellboreResult[]): string[] {
  return [
    ...conductivityWarnings(model, system.active),
    ...inputWarnings(model, system.active),
    ...headWarnings(model, system, head, wellbore),
  ];
}
