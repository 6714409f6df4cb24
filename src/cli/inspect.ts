import { CAUTION } from '../caution.js';
import { cellHeight, cellWidth, crsLabel, gridBounds } from '../grid.js';
import type { FlowSystem } from '../discretisation/assemble.js';
import type { ModelInput } from '../scenario/types.js';
import { wellCells } from '../analysis/points.js';
import { conductivityWarnings, inputWarnings } from '../analysis/sanity.js';

export interface InspectReport {
  title: string;
  scenario: string;
  /** Units of every quantity below: lengths, heads and cell sizes in `length`; conductivity length/time; rates length^3/time. */
  units: { length: string; time: string };
  grid: { nx: number; ny: number; dx: number; dy: number; crs: string; bounds: { minX: number; minY: number; maxX: number; maxY: number } };
  cells: { total: number; active: number; inactive: number; fixedHead: number; unknowns: number; regions: number };
  fixedHeads: Array<{ name: string; cells: number; ignoredOnInactive: number }>;
  /** Every other term that acts on cells (head-dependent boundaries, leakage, ...): its cells and whether it switches. */
  boundaries: Array<{ term: string; cells: number; ignoredOnInactive: number; switching: boolean; reaches: number }>;
  conductivity: { min: number; max: number };
  wells: Array<{ id: string; row: number; col: number; rate: number }>;
  observations: number;
  receptors: number;
  /** The tracking key as resolved (points in the raster CRS), when given. */
  tracking?: {
    captureTimes: number[];
    particlesPerWell: number;
    points: Array<{ id: string; x: number; y: number }>;
    maxTime: number | null;
  };
  /** Variants, checked as compare would check them (resolved and assembled, not solved). */
  variants: Array<{ name: string; wells: number; sharedOperator: boolean; sharing: string }>;
  solver: { method: string; autoChoice: string; tolerance: number; maxIterations: number };
  inputFiles: string[];
  warnings: string[];
  caution: string;
}

export function inspectReport(
  model: ModelInput,
  system: FlowSystem,
  autoChoice: string,
  variants: ReadonlyArray<{ name: string; model: ModelInput; system?: FlowSystem; shared: boolean; sharing: string }> = [],
): InspectReport {
  const { grid } = model;
  let kMin = Infinity,
    kMax = -Infinity;
  for (let p = 0; p < system.active.length; p++) {
    if (!system.active[p]) continue;
    const k = model.conductivity[p]!;
    if (k < kMin) kMin = k;
    if (k > kMax) kMax = k;
  }
  const groupCells = system.groups.map(() => 0);
  for (let p = 0; p < system.fixedGroup.length; p++) {
    const g = system.fixedGroup[p]!;
    if (g >= 0) groupCells[g]!++;
  }
  const warnings = [...model.warnings];
  const cells = wellCells(grid, model.wells);
  for (const term of system.terms) warnings.push(...term.notes(false));
  // The input checks solve makes (units, plausible magnitudes), made here before any solve; variants' own findings named.
  warnings.push(...conductivityWarnings(model, system.active), ...inputWarnings(model, system.active));
  for (const v of variants) {
    const active = v.system?.active ?? system.active;
    for (const w of [...v.model.warnings, ...conductivityWarnings(v.model, active), ...inputWarnings(v.model, active)]) {
      if (!warnings.includes(w)) warnings.push(`variant "${v.name}": ${w}`);
    }
  }
  return {
    title: model.title,
    scenario: model.scenarioPath,
    units: model.units,
    grid: { nx: grid.nx, ny: grid.ny, dx: cellWidth(grid), dy: cellHeight(grid), crs: crsLabel(grid.crs), bounds: gridBounds(grid) },
    cells: {
      total: system.counts.cells,
      active: system.counts.active,
      inactive: system.counts.cells - system.counts.active,
      fixedHead: system.counts.fixed,
      unknowns: system.counts.unknowns,
      regions: system.counts.regions,
    },
    fixedHeads: system.groups.map((name, g) => ({ name, cells: groupCells[g]!, ignoredOnInactive: system.counts.fixedOnInactive[g]! })),
    boundaries: system.terms
      .filter((t) => t.prescribedHeads === null && !t.pumping && (t.anchors || t.nonlinear))
      .map((t) => ({
        term: t.label,
        cells: t.cells.length,
        ignoredOnInactive: t.ignoredCells,
        switching: t.nonlinear,
        reaches: t.parts?.names.length ?? 0,
      })),
    conductivity: { min: kMin, max: kMax },
    wells: model.wells.map((w, k) => {
      const p = cells[k]!;
      return { id: w.id, row: Math.floor(p / grid.nx), col: p % grid.nx, rate: w.rate };
    }),
    observations: model.observations.length,
    receptors: model.receptors?.length ?? 0,
    ...(model.tracking
      ? {
          tracking: {
            captureTimes: model.tracking.captureTimes,
            particlesPerWell: model.tracking.particlesPerWell,
            points: model.tracking.points.map(({ id, x, y }) => ({ id, x, y })),
            maxTime: model.tracking.maxTime ?? null,
          },
        }
      : {}),
    variants: variants.map((v) => ({ name: v.name, wells: v.model.wells.length, sharedOperator: v.shared, sharing: v.sharing })),
    solver: { method: model.solver.method, autoChoice, tolerance: model.solver.tolerance, maxIterations: model.solver.maxIterations },
    inputFiles: model.inputFiles,
    warnings,
    caution: CAUTION,
  };
}

export function formatInspect(r: InspectReport): string {
  const L = (n: number) => n.toLocaleString('en-US');
  const u = r.units.length;
  const t = r.units.time;
  const out: string[] = [];
  out.push(`piezomap inspect: ${r.title}`);
  out.push(`Units        length ${u}, time ${t}`);
  out.push(`Grid         ${r.grid.nx} x ${r.grid.ny} cells of ${r.grid.dx} x ${r.grid.dy} ${u}, ${r.grid.crs}`);
  out.push(`Extent       x ${r.grid.bounds.minX} to ${r.grid.bounds.maxX} ${u}, y ${r.grid.bounds.minY} to ${r.grid.bounds.maxY} ${u}`);
  out.push(
    `Cells        ${L(r.cells.active)} active (${L(r.cells.inactive)} inactive), ${L(r.cells.fixedHead)} fixed-head, ` +
      `${L(r.cells.unknowns)} unknowns in ${r.cells.regions} connected region(s)`,
  );
  out.push(`Conductivity ${r.conductivity.min.toPrecision(4)} to ${r.conductivity.max.toPrecision(4)} ${u}/${t} on active cells`);
  for (const f of r.fixedHeads) {
    out.push(
      `Fixed head   ${f.name}: ${L(f.cells)} cells${f.ignoredOnInactive ? ` (${L(f.ignoredOnInactive)} on inactive cells ignored)` : ''}`,
    );
  }
  for (const b of r.boundaries) {
    const extra = [
      b.switching ? 'switching' : '',
      b.reaches ? `${b.reaches} reaches` : '',
      b.ignoredOnInactive ? `${L(b.ignoredOnInactive)} on inactive cells ignored` : '',
    ].filter(Boolean);
    out.push(`Boundary     ${b.term}: ${L(b.cells)} cells${extra.length ? ` (${extra.join(', ')})` : ''}`);
  }
  for (const w of r.wells) out.push(`Well         ${w.id}: row ${w.row}, col ${w.col}, rate ${w.rate} ${u}\u00b3/${t}`);
  out.push(`Observations ${r.observations}`);
  if (r.receptors) out.push(`Receptors    ${r.receptors}`);
  if (r.tracking) {
    const times = r.tracking.captureTimes.length
      ? `capture times ${r.tracking.captureTimes.join(', ')} and steady`
      : 'steady capture zones';
    out.push(
      `Tracking     ${times}; ${r.tracking.particlesPerWell} pathline(s) per well; ${r.tracking.points.length} point(s)${r.tracking.maxTime !== null ? `; time limit ${r.tracking.maxTime}` : ''}`,
    );
  }
  for (const v of r.variants) out.push(`Variant      ${v.name}: ${v.wells} well(s); ${v.sharing}`);
  out.push(
    `Solver       ${r.solver.method}${r.solver.method === 'auto' ? ` (would use ${r.solver.autoChoice})` : ''}, relative tolerance ${r.solver.tolerance}, at most ${L(r.solver.maxIterations)} iterations`,
  );
  out.push(`Inputs       ${r.inputFiles.join(', ')}`);
  for (const w of r.warnings) out.push(`warning: ${w}`);
  out.push('');
  out.push(r.caution);
  return out.join('\n') + '\n';
}
