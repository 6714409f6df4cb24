/** Variants: a variant's JSON merged into the baseline's (pure; resolved like any scenario by load.ts). */
import type { ScenarioJson, VariantJson, WellLayer } from './schema.js';

/**
 * The scenario a variant describes: its top-level keys replace the baseline's; its wells merge with the
 * baseline's by id (same id: the fields given replace the baseline well's, new id: added, `rate: 0`: switched off).
 * The result has no variants. Wells given as CSV are merged when the scenario is resolved.
 */
export function mergeVariant(base: ScenarioJson, variant: VariantJson): ScenarioJson {
  const { name, wells, ...replacing } = variant;
  const merged: ScenarioJson = { ...base };
  delete merged.variants;
  for (const [key, value] of Object.entries(replacing)) {
    if (value !== undefined) (merged as Record<string, unknown>)[key] = value;
  }
  if (wells !== undefined) {
    merged.wells = { layers: [...wellLayers(base.wells), { source: `variants "${name}".wells`, wells }] };
  }
  return merged;
}

/** The well lists of a scenario in the order they apply. */
export function wellLayers(wells: ScenarioJson['wells']): WellLayer[] {
  if (wells === undefined) return [];
  if (typeof wells === 'string' || Array.isArray(wells)) return [{ source: 'wells', wells }];
  return wells.layers;
}
