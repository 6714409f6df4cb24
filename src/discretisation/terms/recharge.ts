/**
 * Recharge: one term (budget row "recharge"), a volume rate R·dx·dy on every unknown cell where R is a finite
 * non-zero number (on a fixed-head cell it would leave at once, so none is applied there).
 */
import { fieldAt } from '../../field.js';
import type { ModelInput } from '../../scenario/types.js';
import { linearTerm, type FlowTerm, type TermContext, type TermKind } from './types.js';

function build(model: ModelInput, context: TermContext): FlowTerm[] {
  const { active, fixed, dx, dy } = context;
  const n = active.length;
  const cellArea = dx * dy;
  const recharge = model.recharge;
  let count = 0;
  const rate = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    if (active[p] && !fixed[p]) {
      const r = fieldAt(recharge, p);
      if (Number.isFinite(r) && r !== 0) {
        rate[p] = r * cellArea;
        count++;
      }
    }
  }
  const cells = new Int32Array(count);
  const rates = new Float64Array(count);
  for (let p = 0, k = 0; p < n; p++) {
    if (rate[p] !== 0) {
      cells[k] = p;
      rates[k++] = rate[p]!;
    }
  }
  return [
    {
      ...linearTerm,
      kind: 'recharge',
      label: 'recharge',
      cells,
      prescribedHeads: null,
      anchors: false,
      mapLegend: null,
      pumping: false,
      areal: true,
      linearise(_head, _diag, rhs) {
        for (let k = 0; k < cells.length; k++) rhs[cells[k]!]! += rates[k]!;
      },
      flow(_head, out) {
        out.set(rates);
      },
    },
  ];
}

export const rechargeKind: TermKind = { kind: 'recharge', dirichlet: false, rhsOnly: true, build };
