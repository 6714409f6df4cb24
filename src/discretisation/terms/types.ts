/**
 * The one interface of every source, sink and boundary of the flow equation (a "flow term"): fixed heads, wells,
 * recharge now; head-dependent boundaries, leakage and water-table terms later. Assembly, the outer iteration,
 * the water budget, the sources of added pumping, summaries, maps and reports iterate over terms and know no term
 * by name. Kinds are listed in ./registry.ts, the only place that names them.
 *
 * Signs follow ../shared/spec/physics.md: a flow is positive when it enters the aquifer. The unknowns of the
 * linear system are x = h - datum (see FlowSystem.datum).
 */
import type { Grid } from '../../grid.js';
import type { ModelInput } from '../../scenario/types.js';
import type { WaterTable } from '../aquifer.js';

export interface FlowTerm {
  /** The kind (registry key); for messages and tests, never for dispatch. */
  readonly kind: string;
  /** The water-budget row and map-legend label of this term (e.g. a fixed-head group's name, "wells"). */
  readonly label: string;
  /** Cells the term acts on, ascending and unique. */
  readonly cells: Int32Array;
  /**
   * Dirichlet terms only: the prescribed head per cell (same order as `cells`). Their cells are eliminated from
   * the system; their flow is the net exchange with the neighbouring unknown cells. null for every other term.
   */
  readonly prescribedHeads: Float64Array | null;
  /** True when the term fixes the level of a connected region (a region needs one anchor to have a unique head). */
  readonly anchors: boolean;
  /** True when the term's linearisation depends on the heads (switches, head-dependent conductance). */
  readonly nonlinear: boolean;
  /** Map legend of the term's cells when maps draw them, null when they are not drawn as cells. */
  readonly mapLegend: string | null;
  /** How maps draw the term's cells (pattern and ink); absent: the map picks a hatching of its own. */
  readonly mapStyle?: MapCellStyle;
  /** True when this term's flow is the pumping whose change `compare` splits into sources of water. */
  readonly pumping: boolean;
  /**
   * True when the term's flow is spread over the cells' area (recharge, leakage through a confining layer):
   * particle tracking lets particles pass its cells. Otherwise (default) its cells where water leaves or enters
   * the aquifer are a boundary that stops particles, named by `label` (analysis/tracking/fromSystem.ts).
   */
  readonly areal?: boolean;
  /**
   * Add the term's contribution, linearised about `head` (absolute heads, full grid, NaN off the active area), to
   * the operator's diagonal and the right-hand side for the unknowns x = h - datum: a flow Q(h) ~ a - c·h adds c
   * to diag[p] and a - c·datum to rhs[p]. Only unknown cells are touched.
   */
  linearise(head: Float64Array, diag: Float64Array, rhs: Float64Array): void;
  /**
   * Update the switch state from `head` (e.g. a river cell whose head fell below its bed); returns how many cells
   * changed state. Linear terms return 0.
   */
  updateState(head: Float64Array): number;
  /** The switch state as text, for cycle detection in the outer loop ('' for linear terms). */
  stateKey(): string;
  /** Flow into the aquifer per cell for `head` (L^3/T), written into out[k] for cells[k]. */
  flow(head: Float64Array, out: Float64Array): void;
  /** Input cells of this term that fell on inactive ground and were ignored (counted, not an error). */
  readonly ignoredCells: number;
  /** Non-fatal remarks about the term's input, worded for before (`done` false) or after a solve. */
  notes(done: boolean): string[];
  /**
   * Terms whose anchoring depends on their switch state (a drain that runs dry fixes no level): mark in `mask` the
   * cells that anchor in the current state. Absent: every cell anchors when `anchors` is true.
   */
  markAnchors?(mask: Uint8Array): void;
  /**
   * Sub-rows of the budget (e.g. the reaches of a river given as several features): their names and the part of
   * each cell (index into names, same order as `cells`). Absent or null: the term has one row.
   */
  readonly parts?: { readonly names: readonly string[]; readonly of: Int32Array } | null;
  /** True when the per-cell exchange is written as a raster (`exchange-<label>.tif`). */
  readonly exchangeRaster?: boolean;
}

/** The cells that anchor a region's level for the terms' current states (1 = anchored). */
export function anchorMask(terms: readonly FlowTerm[], cellCount: number): Uint8Array {
  const mask = new Uint8Array(cellCount);
  for (const term of terms) {
    if (!term.anchors) continue;
    if (term.markAnchors) term.markAnchors(mask);
    else for (let k = 0; k < term.cells.length; k++) mask[term.cells[k]!] = 1;
  }
  return mask;
}

/**
 * How a map draws a term's cells: a pattern in one ink colour over the cell colours. A kind gives each of its terms
 * (e.g. each fixed-head group) its own colour or angle, so every legend row can be told apart on the map.
 */
export interface MapCellStyle {
  pattern: 'hatch' | 'cross-hatch' | 'dots' | 'outline';
  /** Ink colour (#rrggbb). */
  colour: string;
  /** Angle of hatching in degrees (default 45). */
  angle?: number;
}

/** What the first stage of assembly knows: the grid and the active cells. */
export interface TermGrid {
  grid: Grid;
  dx: number;
  dy: number;
  active: Uint8Array;
}

/** What terms that act on unknown cells know: also the prescribed (eliminated) cells and the conductances. */
export interface TermContext extends TermGrid {
  /** 1 = prescribed cell (a Dirichlet term's). */
  fixed: Uint8Array;
  /** Index into `groups` for prescribed cells, -1 elsewhere. */
  fixedGroup: Int32Array;
  /** Labels of the Dirichlet terms, in order. */
  groups: string[];
  datum: number;
  conductanceEast: Float64Array;
  conductanceSouth: Float64Array;
  /** The water table of an unconfined or convertible aquifer (../aquifer.ts), null (or absent) when confined. */
  waterTable?: WaterTable | null;
}

/** One kind of term: how its terms are built from a model. */
export interface TermKind {
  readonly kind: string;
  /**
   * Dirichlet kinds are built first, from the active cells alone; their cells become the prescribed cells.
   * Every other kind is built with the full context.
   */
  readonly dirichlet: boolean;
  /**
   * True when the kind only adds to the right-hand side (its linearisation never touches the diagonal): a variant
   * that changes only such terms can reuse the baseline's operator and solver set-up.
   */
  readonly rhsOnly: boolean;
  /** The kind's terms of a model. Dirichlet kinds see the context before any cell is prescribed (fixed all 0, datum 0). */
  build(model: ModelInput, context: TermContext): FlowTerm[];
}

/** Helpers for terms whose flow does not depend on the heads. */
export const linearTerm = {
  nonlinear: false,
  ignoredCells: 0,
  notes: (): string[] => [],
  updateState: (): number => 0,
  stateKey: (): string => '',
} as const;

/**
 * The cells of the terms drawn on maps, one layer per legend label (terms sharing a label form one layer, drawn in
 * the first one's style), in term order.
 */
export function mapCellLayers(
  terms: readonly FlowTerm[],
  cellCount: number,
): Array<{ legend: string; cells: Uint8Array; style?: MapCellStyle }> {
  const layers = new Map<string, { legend: string; cells: Uint8Array; style?: MapCellStyle }>();
  for (const term of terms) {
    if (term.mapLegend === null) continue;
    let layer = layers.get(term.mapLegend);
    if (!layer) {
      layer = { legend: term.mapLegend, cells: new Uint8Array(cellCount), ...(term.mapStyle ? { style: term.mapStyle } : {}) };
      layers.set(term.mapLegend, layer);
    }
    for (let k = 0; k < term.cells.length; k++) layer.cells[term.cells[k]!] = 1;
  }
  return [...layers.values()];
}
