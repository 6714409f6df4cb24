/**
 * Capture zones of a variant against the baseline's: the change of each well's zone area per capture time (and
 * the steady zone), and the receptors (neighbours' wells, springs, wetland edges) whose water a well captures in
 * the variant but did not in the baseline: they lie inside a new capture zone. Per cell, from the capturing-well
 * rasters (a receptor counts as inside a zone when the water of its cell reaches that well).
 */
import type { TrackingRun } from './run.js';

export interface ZoneAreaChange {
  well: string;
  /** Capture time, null for the steady zone. */
  time: number | null;
  /** Areas in square map units; null where the run has no such well (added or switched off). */
  baseline: number | null;
  variant: number | null;
  /** variant - baseline, missing areas counted as 0. */
  change: number;
}

export interface NewCapture {
  receptor: string;
  /** The well whose steady capture zone holds the receptor in the variant. */
  well: string;
  /** Travel time from the receptor's cell to that well (time units). */
  travelTime: number;
  /** The well that captured it in the baseline (another one), or null when none did. */
  baselineWell: string | null;
}

export interface CaptureComparison {
  zones: ZoneAreaChange[];
  newCaptures: NewCapture[];
}

/** Zone changes (baseline wells first, then wells new in the variant) and receptors newly captured. */
export function compareCapture(
  base: TrackingRun,
  variant: TrackingRun,
  receptors: ReadonlyArray<{ id: string }>,
  receptorCells: Int32Array,
): CaptureComparison {
  const key = (well: string, time: number | null) => `${well}\u0000${time === null ? 'steady' : time}`;
  const baseAreas = new Map(base.capture.zones.map((z) => [key(z.properties.well, z.properties.time), z.properties.area]));
  const variantAreas = new Map(variant.capture.zones.map((z) => [key(z.properties.well, z.properties.time), z.properties.area]));
  const times: Array<number | null> = [...new Set([...base.settings.captureTimes, ...variant.settings.captureTimes])].sort((a, b) => a - b);
  times.push(null);
  const wells = [...new Set([...base.capture.wells.map((w) => w.id), ...variant.capture.wells.map((w) => w.id)])];
  const zones: ZoneAreaChange[] = [];
  for (const well of wells) {
    for (const time of times) {
      const b = baseAreas.get(key(well, time)) ?? null;
      const v = variantAreas.get(key(well, time)) ?? null;
      if (b === null && v === null) continue;
      zones.push({ well, time, baseline: b, variant: v, change: (v ?? 0) - (b ?? 0) });
    }
  }
  const newCaptures: NewCapture[] = [];
  receptors.forEach((r, k) => {
    const cell = receptorCells[k]!;
    if (cell < 0) return;
    const v = variant.capture.capturingWell[cell]!;
    if (v < 0) return;
    const well = variant.capture.wells[v]!.id;
    const b = base.capture.capturingWell[cell]!;
    const baselineWell = b >= 0 ? base.capture.wells[b]!.id : null;
    if (baselineWell === well) return;
    newCaptures.push({ receptor: r.id, well, travelTime: variant.capture.travelTime[cell]!, baselineWell });
  });
  return { zones, newCaptures };
}
