/**
 * Every kind of flow term, in budget order: the only place that names them. Assembly builds the Dirichlet kinds
 * first, then the others, each in this order; budgets, summaries, maps and reports list terms in the same order.
 * A new kind (head-dependent boundary, leakage, ...) is one module beside these and one line here.
 */
import { fixedHeadKind } from './fixedHeads.js';
import { headDependentKind } from './headDependent.js';
import { leakageKind } from './leakage.js';
import { rechargeKind } from './recharge.js';
import type { TermKind } from './types.js';
import { wellKind } from './wells.js';

export const TERM_KINDS: readonly TermKind[] = [fixedHeadKind, headDependentKind, leakageKind, wellKind, rechargeKind];
