/**
 * The velocity field particle tracking runs on: Pollock's (1988, 1989) face velocities from the same face flows
 * as the water budget (src/analysis/flux.ts `faceFlows`), and the cells that stop a particle.
 *
 * Grid frame. Cells row-major, `p = row * nx + col`, row 0 at the top as stored: columns run east, rows run
 * south (map y falls), so map coordinates are x = x0 + u, y = y0 - w for a position (u, w) in length units
 * from the outer corner of cell (0, 0), i.e. the geotransform [x0, dx, 0, y0, 0, -dy].
 *
 * Velocity normal to a face (Pollock 1988, Ground Water 26(6); citation from memory): face flow / (face length x
 * saturated thickness x effective porosity) with the thickness and porosity of the cell the particle is in, so
 * the flow through a face is the same seen from both sides. Row-direction velocities are positive southward
 * (towards row + 1), as the `south` face flows are.
 *
 * Which cells stop a particle, and the weak-sink rule (documented choice; "common practice" to offer both
 * stop-always and a threshold, no single source):
 * - Only labelled cells stop particles (`stopLabel[p] >= 0`: wells by id, boundary groups by name). A cell is a
 *   sink for a direction when water leaves the aquifer there in that direction's field: forward, net internal
 *   exchange < 0 (a pumping well, a fixed-head or head-dependent cell that takes water out); backward the field is
 *   reversed, so a cell that puts water in (an injection well, a boundary that feeds the aquifer) is the sink.
 * - Sink fraction f = water the sink takes / water flowing into the cell through its faces (in that direction's
 *   field). f >= 1 (no face outflow) is a strong sink: particles cannot leave it and always stop.
 * - 0 < f < 1 is a weak sink: the cell takes part of the water and passes the rest on. A particle stops on
 *   entering it when f >= `weakSinkFraction` (default 0: always stop, so a well's capture zone is never
 *   drawn smaller than the water that could reach it: the cautious choice for protection areas). Raising the
 *   threshold lets particles pass weak sinks that take less than that share. Every labelled weak sink is
 *   reported (`weakSinks`) with its fraction, whatever the rule decided.
 * - A particle stops on entering a stopping cell, at the face where it enters: its travel time is the time to
 *   reach that cell, not a point inside it (in a strong sink the linear field gives no finite arrival time).
 */
import { inputError } from '../../errors.js';

export type StopKind = 'well' | 'boundary';

/** What a labelled cell is: a well (by id) or a boundary group (by name). */
export interface StopLabel {
  kind: StopKind;
  name: string;
}

export interface TrackingInput {
  nx: number;
  ny: number;
  /** Cell width (along columns, east) and height (along rows, south), length units, > 0. */
  dx: number;
  dy: number;
  /** Map coordinates of the outer corner of cell (0, 0); default 0, 0. */
  x0?: number;
  y0?: number;
  /** Eastward flow through the face between p and p+1 (L^3/T), 0 on the last column: `faceFlows(...).east`. */
  faceEast: Float64Array;
  /** Flow towards row + 1 through the face between p and p+nx (L^3/T), 0 on the last row: `faceFlows(...).south`. */
  faceSouth: Float64Array;
  /** 1 = active cell. */
  active: Uint8Array;
  /** Saturated thickness per cell (> 0 on active cells), or one number. */
  thickness: Float64Array | number;
  /** Effective porosity in (0, 1], per cell or one number. */
  porosity: Float64Array | number;
  /**
   * Net internal exchange per cell (L^3/T, positive = water into the aquifer: recharge, injection, a boundary that
   * feeds; negative = out: pumping, a boundary that takes). Default: the face-flow imbalance of each cell
   * (`internalExchange`), which agrees exactly with the face flows.
   */
  netSource?: Float64Array;
  /** Index into `labels` per cell, -1 = none. */
  stopLabel: Int32Array;
  labels: readonly StopLabel[];
  /** Weak-sink rule: stop when the sink takes at least this fraction of the cell's inflow (0..1, default 0 = always). */
  weakSinkFraction?: number;
}

/** A labelled cell that takes only part of the water flowing into it. */
export interface WeakSink {
  cell: number;
  row: number;
  col: number;
  label: number;
  name: string;
  kind: StopKind;
  direction: 'forward' | 'backward';
  /** Share of the cell's inflow the sink takes (0..1). */
  fraction: number;
  /** True when the weak-sink rule stops particles there. */
  stops: boolean;
}

export interface TrackingField {
  nx: number;
  ny: number;
  dx: number;
  dy: number;
  x0: number;
  y0: number;
  active: Uint8Array;
  /**
   * Velocity (length/time) normal to each face of each cell, as seen inside that cell, rows positive southward:
   * four values per cell, [west, east, north, south] at 4p .. 4p+3 (together, so one cell is one memory fetch).
   */
  velocity: Float64Array;
  /** Label index where a forward (backward) particle stops, -1 where it passes. */
  stopForward: Int32Array;
  stopBackward: Int32Array;
  labels: readonly StopLabel[];
  /** Net internal exchange per cell actually used (L^3/T). */
  netSource: Float64Array;
  weakSinks: WeakSink[];
  weakSinkFraction: number;
}

/** Below this share of the inflow leaving through faces, a sink counts as strong (face-flow round-off). */
const STRONG_SINK_OUTFLOW = 1e-9;

/**
 * Net internal exchange per cell from the face flows: outflow through faces minus inflow through faces
 * (L^3/T, positive = the cell puts water into the aquifer). For a solved model this is W + R on unknown cells
 * (to the solver's residual) and the boundary exchange on fixed-head cells, consistent with the budget.
 */
export function internalExchange(
  nx: number,
  ny: number,
  faceEast: Float64Array,
  faceSouth: Float64Array,
  out = new Float64Array(nx * ny),
): Float64Array {
  out.fill(0);
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      let s = faceEast[p]! + faceSouth[p]!;
      if (j > 0) s -= faceEast[p - 1]!;
      if (i > 0) s -= faceSouth[p - nx]!;
      out[p] = s;
    }
  }
  return out;
}

/** Checks the input once, up front, and builds the face velocities and stop cells. */
export function buildTrackingField(input: TrackingInput): TrackingField {
  const { nx, ny, dx, dy, faceEast, faceSouth, active, thickness, porosity, stopLabel, labels } = input;
  if (!(Number.isInteger(nx) && nx > 0 && Number.isInteger(ny) && ny > 0)) {
    throw inputError(`tracking grid size must be positive integers, got ${nx} x ${ny}`);
  }
  if (!(dx > 0 && Number.isFinite(dx) && dy > 0 && Number.isFinite(dy))) {
    throw inputError(`cell size must be positive, got dx ${dx}, dy ${dy}`);
  }
  const n = nx * ny;
  checkLength('east face flows', faceEast.length, n);
  checkLength('south face flows', faceSouth.length, n);
  checkLength('active mask', active.length, n);
  checkLength('stop labels', stopLabel.length, n);
  if (typeof thickness !== 'number') checkLength('saturated thickness', thickness.length, n);
  if (typeof porosity !== 'number') checkLength('porosity', porosity.length, n);
  if (input.netSource) checkLength('net internal exchange', input.netSource.length, n);
  const weakSinkFraction = input.weakSinkFraction ?? 0;
  if (!(weakSinkFraction >= 0 && weakSinkFraction <= 1)) {
    throw inputError(`weak-sink fraction must lie in [0, 1], got ${weakSinkFraction}`, {
      key: 'tracking.weakSinkFraction',
      hint: '0 stops particles at every labelled sink; 0.5 only where the sink takes at least half of the inflow',
    });
  }
  if (typeof porosity === 'number' && !(porosity > 0 && porosity <= 1)) {
    throw inputError(`porosity must lie in (0, 1], got ${porosity}`, {
      key: 'aquifer.porosity',
      hint: 'give the effective porosity as a fraction, e.g. 0.2 for 20 %',
    });
  }
  if (typeof thickness === 'number' && !(thickness > 0 && Number.isFinite(thickness))) {
    throw inputError(`saturated thickness must be positive for tracking, got ${thickness}`, { key: 'aquifer.thickness' });
  }
  const velocity = new Float64Array(4 * n);
  const stopForward = new Int32Array(n).fill(-1);
  const stopBackward = new Int32Array(n).fill(-1);
  const netSource = input.netSource ?? internalExchange(nx, ny, faceEast, faceSouth);
  const weakSinks: WeakSink[] = [];
  for (let i = 0; i < ny; i++) {
    for (let j = 0; j < nx; j++) {
      const p = i * nx + j;
      if (!active[p]) continue;
      const b = typeof thickness === 'number' ? thickness : thickness[p]!;
      const ne = typeof porosity === 'number' ? porosity : porosity[p]!;
      const cell = { row: i, col: j };
      if (!(b > 0 && Number.isFinite(b))) {
        throw inputError(`saturated thickness must be positive on active cells for tracking, got ${b} at row ${i}, column ${j}`, {
          key: 'aquifer',
          cell,
          hint: 'a dry or inactive cell must be marked inactive before tracking',
        });
      }
      if (!(ne > 0 && ne <= 1)) {
        throw inputError(`porosity must lie in (0, 1], got ${ne} at row ${i}, column ${j}`, {
          key: 'aquifer.porosity',
          cell,
          hint: 'give the effective porosity as a fraction on every active cell',
        });
      }
      const west = j > 0 ? faceEast[p - 1]! : 0;
      const east = faceEast[p]!;
      const north = i > 0 ? faceSouth[p - nx]! : 0;
      const south = faceSouth[p]!;
      if (!(Number.isFinite(west) && Number.isFinite(east) && Number.isFinite(north) && Number.isFinite(south))) {
        throw inputError(`face flows are not finite at row ${i}, column ${j}`, { cell, hint: 'track only on a converged head field' });
      }
      const ax = b * ne * dy; // east/west face area x porosity
      const ay = b * ne * dx;
      velocity[4 * p] = west / ax;
      velocity[4 * p + 1] = east / ax;
      velocity[4 * p + 2] = north / ay;
      velocity[4 * p + 3] = south / ay;
      const label = stopLabel[p]!;
      if (label < 0) continue;
      if (label >= labels.length) {
        throw inputError(`stop label ${label} at row ${i}, column ${j} is not in the list of ${labels.length} labels`, { cell });
      }
      // Face inflow and outflow in the forward field; the backward field swaps them.
      const faceIn = positive(west) + positive(-east) + positive(north) + positive(-south);
      const faceOut = positive(-west) + positive(east) + positive(-north) + positive(south);
      const exchange = netSource[p]!;
      for (const direction of ['forward', 'backward'] as const) {
        const taken = direction === 'forward' ? -exchange : exchange;
        if (!(taken > 0)) continue;
        const inflow = direction === 'forward' ? faceIn : faceOut;
        const outflow = direction === 'forward' ? faceOut : faceIn;
        const strong = outflow <= STRONG_SINK_OUTFLOW * Math.max(inflow, taken);
        const fraction = strong ? 1 : Math.min(1, taken / inflow);
        const stops = strong || fraction >= weakSinkFraction;
        if (stops) (direction === 'forward' ? stopForward : stopBackward)[p] = label;
        if (!strong) {
          const l = labels[label]!;
          weakSinks.push({ cell: p, row: i, col: j, label, name: l.name, kind: l.kind, direction, fraction, stops });
        }
      }
    }
  }
  return {
    nx,
    ny,
    dx,
    dy,
    x0: input.x0 ?? 0,
    y0: input.y0 ?? 0,
    active,
    velocity,
    stopForward,
    stopBackward,
    labels,
    netSource,
    weakSinks,
    weakSinkFraction,
  };
}

function positive(v: number): number {
  return v > 0 ? v : 0;
}

function checkLength(what: string, length: number, n: number): void {
  if (length !== n)
    throw inputError(`${what} has ${length} values, the grid has ${n} cells`, { hint: 'pass one value per cell, row-major' });
}
