/**
 * Areal leakage through a confining bed (../shared/spec/physics.md): one term (budget row `leakage` or the entry's
 * `name`), Q_p = L_p · A · (Hs_p - h_p) on every unknown cell where the leakance L is a finite number > 0 and the
 * source head Hs is finite (none on fixed-head cells, which have no balance equation). Linear: L·A on the diagonal,
 * L·A·Hs on the right-hand side; its cells anchor their region's level.
 */
import { fieldAt } from '../../field.js';
import type { ModelInput } from '../../scenario/types.js';
import { linearTerm, type FlowTerm, type TermContext, type TermKind } from './types.js';

function build(model: ModelInput, context: TermContext): FlowTerm[] {
  const leakage = model.leakage;
  if (!leakage) return [];
  const { active, fixed, dx, dy } = context;
  const area = dx * dy;
  const n = active.length;
  let count = 0;
  for (let p = 0; p < n; p++) if (applies(p)) count++;
  const cells = new Int32Array(count);
  const conductance = new Float64Array(count);
  const source = new Float64Array(count);
  for (let p = 0, k = 0; p < n; p++) {
    if (!applies(p)) continue;
    cells[k] = p;
    conductance[k] = fieldAt(leakage.leakance, p) * area;
    source[k] = fieldAt(leakage.sourceHead, p);
    k++;
  }
  function applies(p: number): boolean {
    if (!active[p] || fixed[p]) return false;
    const l = fieldAt(leakage!.leakance, p);
    return l > 0 && Number.isFinite(l) && Number.isFinite(fieldAt(leakage!.sourceHead, p));
  }
  return [
    {
      ...linearTerm,
      kind: 'leakage',
      label: leakage.name,
      cells,
      prescribedHeads: null,
      anchors: true,
      mapLegend: null,
      exchangeRaster: true,
      pumping: false,
      linearise(_head, diag, rhs) {
        const datum = context.datum;
        for (let k = 0; k < cells.length; k++) {
          const p = cells[k]!;
          diag[p]! += conductance[k]!;
          rhs[p]! += conductance[k]! * (source[k]! - datum);
        }
      },
      flow(head, out) {
        for (let k = 0; k < cells.length; k++) out[k] = conductance[k]! * (source[k]! - head[cells[k]!]!);
      },
    },
  ];
}

export const leakageKind: TermKind = { kind: 'leakage', dirichlet: false, rhsOnly: false, build };
