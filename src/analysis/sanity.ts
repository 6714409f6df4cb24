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
    warnings.push(`aquifer.conductivity: ${above} active cell(s) above ${fmt(high)} ${unit} (1 m/s, the top of published values, for gravel; ${source}), up to ${fmt(highest)} ${unit}: ${units}`);
  }
  if (below > 0) {
    warnings.push(`aquifer.conductivity: ${below} active cell(s) below ${fmt(low)} ${unit} (1e-13 m/s, the bottom of published values, for unfractured rock; ${source}), down to ${fmt(lowest)} ${unit}: ${units}`);
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
  const bottom = model.aquiferBottom;
  if (bottom !== undefined) {
    const s = survey((p) => at(bottom, p) - head[p]!);
    if (s.count > 0) {
      warnings.push(
        `head below the aquifer bottom at ${s.count} active cell(s), down to ${fmt(s.most)} ${u} below it at ${cellText(s.worst, nx)}: the aquifer would be dry there, which this confined model cannot represent; reduce the pumping or check the fixed heads`,
      );
    }
  }
  const top = model.aquiferTop;
  if (top !== undefined) {
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
  return [...conductivityWarnings(model, system.active), ...headWarnings(model, system, head, wellbore)];
}
