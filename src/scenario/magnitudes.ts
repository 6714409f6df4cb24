/**
 * Input magnitudes against what the arithmetic carries. Every number the discretisation multiplies must stay far
 * enough from the ends of double precision (about 2.2e-308 to 1.8e308; IEEE 754 binary64) that its products do
 * too: the harmonic-mean conductance forms 2·Tp·Tq·(dy/dx), face flows form conductance × head difference, and
 * so on. Keeping each input and each product the discretisation forms from them (T = K·b, T·dy/dx, T·a·dx/dy,
 * R·dx·dy) within [1e-100, 1e100] keeps any product of three of them inside the double range. Without this check
 * K = 1e200 ended in "pivot NaN" (Tp·Tq overflowed) and a thickness of 1e-300 in "regions have no fixed head"
 * (Tp·Tq underflowed to zero, cutting every cell off).
 *
 * Heads and elevations are limited to |h| <= 1e15: there the spacing of doubles is 0.125 length units, so head
 * differences, which drive every flow, would no longer be resolved (and 1e300 heads overflowed head.tif's
 * single precision to infinity).
 *
 * What is possible but physically implausible is a warning instead (src/analysis/sanity.ts).
 */
import { cellHeight, cellWidth } from '../grid.js';
import { inputError } from '../errors.js';
import type { ModelInput } from './types.js';

/** The range every input magnitude and every product formed from them must lie in (see above). */
export const CARRIED_RANGE = { min: 1e-100, max: 1e100 } as const;
/** Largest head or elevation magnitude, in length units (see above). */
export const HEAD_LIMIT = 1e15;

/** Where the scenario names the rasters, for messages (a number where the key holds one). */
export interface MagnitudePaths {
  conductivity: string;
  thickness?: string | number;
  recharge?: string | number;
}

const RANGE_TEXT = '1e-100 to 1e100';
const MAX_TEXT = '1e100';
const HEAD_TEXT = '1e15';
const UNITS_HINT = 'check the units and the nodata value of the raster (gdalinfo -stats shows its range)';

function outside(value: number): boolean {
  return !(value >= CARRIED_RANGE.min && value <= CARRIED_RANGE.max);
}

function cellOf(p: number, nx: number): { row: number; col: number } {
  return { row: Math.floor(p / nx), col: p % nx };
}

function show(value: number): string {
  return value.toExponential(3);
}

/**
 * Refuse magnitudes the arithmetic cannot carry: an input error naming the key, the file and the first cell at
 * fault (with the count of such cells). `label` names the scenario in messages.
 */
export function checkMagnitudes(model: ModelInput, label: string, paths: MagnitudePaths): void {
  const { grid } = model;
  const nx = grid.nx;
  const dx = cellWidth(grid);
  const dy = cellHeight(grid);

  // Cell size: its ratios weight every conductance, its area every recharge.
  for (const [what, value] of [
    ['cell width', dx],
    ['cell height', dy],
    ['cell height / width', dy / dx],
    ['cell area', dx * dy],
  ] as const) {
    if (outside(value)) {
      throw inputError(
        `${label}: aquifer.conductivity "${paths.conductivity}": ${what} ${show(value)} lies outside ${RANGE_TEXT}, the range the flow arithmetic carries`,
        { key: 'aquifer.conductivity', hint: 'check the geotransform (gdalinfo): cell sizes are in the units of the raster CRS' },
      );
    }
  }

  const k = model.conductivity;
  const thickness = model.thickness;
  const a = model.anisotropy;
  if (outside(a)) {
    throw inputError(`${label}: aquifer.anisotropy ${show(a)} lies outside ${RANGE_TEXT}, the range the flow arithmetic carries`, {
      key: 'aquifer.anisotropy',
      hint: 'anisotropy is the ratio Ky/Kx, e.g. 0.1 to 10',
    });
  }
  if (typeof thickness === 'number' && outside(thickness)) {
    throw inputError(`${label}: aquifer.thickness ${show(thickness)} lies outside ${RANGE_TEXT}, the range the flow arithmetic carries`, {
      key: 'aquifer.thickness',
      hint: 'thickness is in length units, e.g. 20 m',
    });
  }
  const ewRatio = dy / dx;
  const nsRatio = (dx / dy) * a;
  // One pass over the active cells: K, b, T and the two conductance factors; the first cell at fault and the count.
  let count = 0;
  let first = -1;
  let firstWhat = '';
  for (let p = 0; p < k.length; p++) {
    const kp = k[p]!;
    const bp = typeof thickness === 'number' ? thickness : thickness[p]!;
    if (!(kp > 0 && kp < Infinity && bp > 0 && bp < Infinity)) continue; // inactive
    const t = kp * bp;
    let what = '';
    if (outside(kp)) what = `conductivity ${show(kp)}`;
    else if (outside(bp)) what = `thickness ${show(bp)}`;
    else if (outside(t)) what = `transmissivity K·b = ${show(kp)} × ${show(bp)} = ${show(t)}`;
    else if (outside(t * ewRatio) || outside(t * nsRatio)) {
      what = `transmissivity ${show(t)} × cell-size ratio${a === 1 ? '' : ' and anisotropy'} = ${show(outside(t * ewRatio) ? t * ewRatio : t * nsRatio)}`;
    } else continue;
    if (first < 0) {
      first = p;
      firstWhat = what;
    }
    count++;
  }
  if (first >= 0) {
    const cell = cellOf(first, nx);
    const key = /^thickness/.test(firstWhat) && typeof paths.thickness === 'string' ? 'aquifer.thickness' : 'aquifer.conductivity';
    const named = key === 'aquifer.thickness' ? `aquifer.thickness "${paths.thickness}"` : `aquifer.conductivity "${paths.conductivity}"`;
    throw inputError(
      `${label}: ${named}: ${firstWhat} at row ${cell.row}, col ${cell.col}${count > 1 ? ` (and ${count - 1} more active cell(s))` : ''} lies outside ${RANGE_TEXT}, the range the flow arithmetic carries`,
      { key, cell, hint: UNITS_HINT },
    );
  }

  // Recharge: the rate and the volume rate per cell.
  const area = dx * dy;
  const recharge = model.recharge;
  const rechargeKey = typeof paths.recharge === 'string' ? `recharge "${paths.recharge}"` : 'recharge';
  const rechargeOutside = (r: number) => Math.abs(r) > CARRIED_RANGE.max || Math.abs(r * area) > CARRIED_RANGE.max;
  if (typeof recharge === 'number') {
    if (rechargeOutside(recharge)) {
      throw inputError(
        `${label}: recharge ${show(recharge)} (${show(recharge * area)} per cell) exceeds ${MAX_TEXT}, the magnitude the flow arithmetic carries`,
        {
          key: 'recharge',
          hint: 'recharge is a rate in length/time, e.g. 0.0005 m/d',
        },
      );
    }
  } else {
    for (let p = 0; p < recharge.length; p++) {
      if (rechargeOutside(recharge[p]!)) {
        const cell = cellOf(p, nx);
        throw inputError(
          `${label}: ${rechargeKey}: ${show(recharge[p]!)} at row ${cell.row}, col ${cell.col} exceeds ${MAX_TEXT} (per cell area), the magnitude the flow arithmetic carries`,
          {
            key: 'recharge',
            cell,
            hint: UNITS_HINT,
          },
        );
      }
    }
  }

  for (const well of model.wells) {
    if (Math.abs(well.rate) > CARRIED_RANGE.max) {
      throw inputError(
        `${label}: well "${well.id}" (${well.source}): rate ${show(well.rate)} exceeds ${MAX_TEXT}, the magnitude the flow arithmetic carries`,
        {
          key: well.source,
          hint: 'rates are in length^3/time, e.g. -500 m3/d',
        },
      );
    }
    if (well.minimumHead !== undefined && Math.abs(well.minimumHead) > HEAD_LIMIT) {
      throw inputError(
        `${label}: well "${well.id}" (${well.source}): minimumHead ${show(well.minimumHead)} exceeds ${HEAD_TEXT} in magnitude`,
        {
          key: well.source,
          hint: headHint(),
        },
      );
    }
  }

  // Heads and elevations.
  for (const entry of model.fixedHeads) {
    const { cells, heads } = entry;
    for (let i = 0; i < heads.length; i++) {
      const h = heads[i]!;
      if (Math.abs(h) > HEAD_LIMIT) {
        const cell = cellOf(cells[i]!, nx);
        throw inputError(
          `${label}: ${entry.source} ("${entry.name}"): head ${show(h)} at row ${cell.row}, col ${cell.col} exceeds ${HEAD_TEXT} in magnitude, beyond which head differences are not resolved`,
          { key: entry.source, cell, hint: headHint() },
        );
      }
    }
  }
  for (const observation of model.observations) {
    if (Math.abs(observation.head) > HEAD_LIMIT) {
      throw inputError(
        `${label}: observation "${observation.id}" (${observation.source}): head ${show(observation.head)} exceeds ${HEAD_TEXT} in magnitude`,
        {
          key: observation.source,
          hint: headHint(),
        },
      );
    }
  }
  for (const [key, field] of [
    ['aquifer.top', model.aquiferTop],
    ['aquifer.bottom', model.aquiferBottom],
    ['groundSurface', model.groundSurface],
  ] as const) {
    if (field === undefined) continue;
    const p = typeof field === 'number' ? (Math.abs(field) > HEAD_LIMIT ? 0 : -1) : firstAbove(field, HEAD_LIMIT);
    if (p < 0) continue;
    const value = typeof field === 'number' ? field : field[p]!;
    const where = typeof field === 'number' ? '' : ` at row ${cellOf(p, nx).row}, col ${cellOf(p, nx).col}`;
    throw inputError(`${label}: ${key}: elevation ${show(value)}${where} exceeds ${HEAD_TEXT} in magnitude`, {
      key,
      ...(typeof field === 'number' ? {} : { cell: cellOf(p, nx) }),
      hint: headHint(),
    });
  }
}

function headHint(): string {
  return 'heads and elevations are in length units (e.g. metres above sea level); check the units and the nodata value';
}

/** Index of the first value whose magnitude exceeds `limit` (NaN is no data), or -1. */
function firstAbove(values: Float64Array, limit: number): number {
  for (let p = 0; p < values.length; p++) if (Math.abs(values[p]!) > limit) return p;
  return -1;
}
