/**
 * Library example: try several rates for a planned well without writing a variant per rate into the scenario
 * file. test/e2e/library-example.test.ts runs it on the bundled demo, `compareWellRates(demoScenarioPath(), …)`;
 * in your own scripts import from 'piezomap' instead of '../src/index.js' and pass your scenario's path.
 */
import { compareScenario, loadScenario, writeComparisonResults, type VariantJson } from '../src/index.js';

export interface RateOutcome {
  name: string;
  rate: number;
  /** Largest drawdown anywhere, length units. */
  maxDrawdown: number;
  /** Drawdown at each observation point, by id. */
  atObservations: Record<string, number>;
  /** Share of the added pumping taken from each budget term (boundaries, recharge), percent. */
  sources: Record<string, number | null>;
  /** The same per reach of a boundary given as several features, e.g. "river: upper reach" (these split their term). */
  reaches: Record<string, number | null>;
  /** True when the variant reused the baseline's operator and solver set-up. */
  sharedOperator: boolean;
  /** Drawdown per cell; changes below `noiseLevel` (rounding and solver error) are 0. */
  drawdown: Float64Array | null;
  /** Length units: smaller drawdowns are not distinguishable from solver error and are reported as 0. */
  noiseLevel: number;
}

/** Compare the baseline of `scenarioPath` with one variant per rate of a new well at (x, y). */
export async function compareWellRates(
  scenarioPath: string,
  well: { id: string; x: number; y: number },
  rates: number[],
  outDir?: string,
): Promise<RateOutcome[]> {
  const { model, raw } = await loadScenario(scenarioPath);
  const variants: VariantJson[] = rates.map((rate) => ({ name: `${well.id}-${Math.abs(rate)}`, wells: [{ ...well, rate }] }));
  const comparison = await compareScenario({ model, raw: { ...raw, variants } });
  if (outDir) await writeComparisonResults(comparison, outDir, { overwrite: true, maps: false });
  return comparison.variants.map((v, k) => ({
    name: v.name,
    rate: rates[k]!,
    maxDrawdown: v.maxDrawdown?.value ?? NaN,
    atObservations: Object.fromEntries(v.observations.map((o) => [o.id, o.drawdown])),
    sources: Object.fromEntries(v.sources.terms.filter((t) => t.partOf === undefined).map((t) => [t.term, t.percentOfAddedPumping])),
    reaches: Object.fromEntries(v.sources.terms.filter((t) => t.partOf !== undefined).map((t) => [t.term, t.percentOfAddedPumping])),
    sharedOperator: v.sharedOperator,
    drawdown: v.drawdown,
    noiseLevel: v.noiseLevel,
  }));
}
