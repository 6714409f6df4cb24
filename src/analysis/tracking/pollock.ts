/**
 * Pollock's semi-analytical particle tracking (Pollock 1988, Ground Water 26(6); Pollock 1989, USGS Open-File
 * Report 89-381; citations from memory), cell by cell on a `TrackingField`.
 *
 * Inside a cell each velocity component varies linearly between the two opposite faces,
 *   v(x) = v1 + A x,  A = (v2 - v1) / L,   (x from the low face, L the cell size along that axis)
 * so dx/dt = v has the exact solution v(t) = v_p exp(A t), and the time to reach the face at distance d is
 *   t = ln(v_e / v_p) / A = (d / v_p) * ln(1 + z) / z,   z = A d / v_p,
 * written in the second form so that the uniform-velocity limit (A -> 0, z -> 0, t -> d / v_p) has no
 * cancellation: Math.log1p keeps ln(1 + z) accurate for tiny z. The particle leaves through the face it
 * reaches first; the other coordinate moves by
 *   x(t) - x_p = v_p t * (exp(A t) - 1) / (A t)    (Math.expm1, same reason).
 * A component can only carry the particle out if the velocity at the target face has the same sign as at the
 * particle; otherwise that component never reaches a face (it tends to a stagnation line). If neither does,
 * the particle has reached a stagnation point (or an unlabelled strong sink) and stops there.
 *
 * Backward tracking reverses every velocity (direction = -1): the same exact formulas then trace where water
 * came from, and the stop cells are those where water enters the aquifer.
 *
 * The hot loop allocates nothing: state lives in the Tracker's fields, vertices go into a reused PathBuffer.
 */
import type { TrackingField } from './field.js';

/** How a track ended (numeric codes for the hot loop; `END_REASONS` gives their names). */
export const END_LABEL = 0; // reached a stop cell: a well or a boundary group (see `label`)
export const END_EDGE = 1; // would leave the active area
export const END_STAGNATION = 2; // can leave the cell through no face
export const END_TIME_LIMIT = 3;
export const END_STALLED = 4; // more cell crossings than the grid could need (a safety stop that should not happen)

export type EndReason = 'well' | 'boundary' | 'edge' | 'stagnation' | 'time-limit';

/** Grows by doubling; `data` holds [x0, y0, x1, y1, ...] in map coordinates, `count` vertices. */
export class PathBuffer {
  data: Float64Array;
  count = 0;

  constructor(capacity = 256) {
    this.data = new Float64Array(2 * capacity);
  }

  clear(): void {
    this.count = 0;
  }

  push(x: number, y: number): void {
    let k = 2 * this.count;
    if (k + 2 > this.data.length) {
      const grown = new Float64Array(2 * this.data.length);
      grown.set(this.data);
      this.data = grown;
    }
    this.data[k++] = x;
    this.data[k] = y;
    this.count++;
  }

  /** A copy trimmed to the vertices recorded. */
  vertices(): Float64Array {
    return this.data.slice(0, 2 * this.count);
  }
}

/** (ln(1 + z)) / z, with its limit 1 at z = 0. */
function logRatio(z: number): number {
  return z === 0 ? 1 : Math.log1p(z) / z;
}

/** (exp(w) - 1) / w, with its limit 1 at w = 0. */
function expRatio(w: number): number {
  return w === 0 ? 1 : Math.expm1(w) / w;
}

/** One particle at a time on one field; reuse the instance for many particles. */
export class Tracker {
  readonly field: TrackingField;
  /** Result of the last `track`: end cell, position inside it (length units from its north-west corner), time. */
  cell = -1;
  localX = 0;
  localY = 0;
  time = 0;
  /** END_* code and, for END_LABEL, the label index. */
  reason = END_STAGNATION;
  label = -1;
  /** Cells entered by the last track. */
  crossings = 0;
  private readonly maxCrossings: number;

  constructor(field: TrackingField) {
    this.field = field;
    // A steady streamline enters a cell at most a few times (it cannot close on itself); far more means a fault.
    this.maxCrossings = 8 * field.nx * field.ny + 1000;
  }

  /**
   * Tracks one particle from (localX, localY) inside cell `start` (0 <= localX <= dx, 0 <= localY <= dy, y
   * southward) forward (direction 1) or backward (-1) until it ends or `maxTime` passes. Returns the END_* code;
   * the end state is in the tracker's fields. With `path`, records the start and every face crossing and the end
   * point in map coordinates (the path is cleared first).
   */
  track(start: number, startX: number, startY: number, direction: 1 | -1, maxTime = Infinity, path: PathBuffer | null = null): number {
    const f = this.field;
    const { nx, ny, dx, dy, x0, y0, active } = f;
    const vWest = f.velocityWest;
    const vEast = f.velocityEast;
    const vNorth = f.velocityNorth;
    const vSouth = f.velocitySouth;
    const stop = direction === 1 ? f.stopForward : f.stopBackward;
    const s = direction;
    let p = start;
    let row = (p / nx) | 0;
    let col = p - row * nx;
    let x = startX;
    let y = startY;
    let t = 0;
    let reason = -1;
    let label = -1;
    let crossings = 0;
    if (path) {
      path.clear();
      path.push(x0 + col * dx + x, y0 - (row * dy + y));
    }
    if (!active[p]) reason = END_EDGE;
    else if (stop[p]! >= 0) {
      reason = END_LABEL;
      label = stop[p]!;
    }
    while (reason < 0) {
      // Face velocities in the tracking direction.
      const v1x = s * vWest[p]!;
      const v2x = s * vEast[p]!;
      const v1y = s * vNorth[p]!;
      const v2y = s * vSouth[p]!;
      const ax = (v2x - v1x) / dx;
      const ay = (v2y - v1y) / dy;
      const vx = v1x + ax * x;
      const vy = v1y + ay * y;
      // Exit time along x: towards the east face if moving east and the east face lets water out, etc.
      let tx = Infinity;
      let exitX = 0; // +1 east, -1 west
      if (vx > 0 && v2x > 0) {
        const d = dx - x;
        tx = (d / vx) * logRatio((ax * d) / vx);
        exitX = 1;
      } else if (vx < 0 && v1x < 0) {
        const d = -x;
        tx = (d / vx) * logRatio((ax * d) / vx);
        exitX = -1;
      }
      let ty = Infinity;
      let exitY = 0; // +1 south, -1 north
      if (vy > 0 && v2y > 0) {
        const d = dy - y;
        ty = (d / vy) * logRatio((ay * d) / vy);
        exitY = 1;
      } else if (vy < 0 && v1y < 0) {
        const d = -y;
        ty = (d / vy) * logRatio((ay * d) / vy);
        exitY = -1;
      }
      if (tx === Infinity && ty === Infinity) {
        // No face ever reached: move to the limit point of each component (where its velocity vanishes).
        if (vx !== 0 && ax < 0) x = clamp(x - vx / ax, 0, dx);
        if (vy !== 0 && ay < 0) y = clamp(y - vy / ay, 0, dy);
        reason = END_STAGNATION;
        break;
      }
      const dt = tx <= ty ? tx : ty;
      if (t + dt > maxTime) {
        const rest = maxTime - t;
        x = clamp(x + vx * rest * expRatio(ax * rest), 0, dx);
        y = clamp(y + vy * rest * expRatio(ay * rest), 0, dy);
        t = maxTime;
        reason = END_TIME_LIMIT;
        break;
      }
      t += dt;
      let next: number;
      if (tx <= ty) {
        y = clamp(y + vy * dt * expRatio(ay * dt), 0, dy);
        if (exitX > 0) {
          x = dx;
          next = col + 1 < nx ? p + 1 : -1;
        } else {
          x = 0;
          next = col > 0 ? p - 1 : -1;
        }
      } else {
        x = clamp(x + vx * dt * expRatio(ax * dt), 0, dx);
        if (exitY > 0) {
          y = dy;
          next = row + 1 < ny ? p + nx : -1;
        } else {
          y = 0;
          next = row > 0 ? p - nx : -1;
        }
      }
      if (path) path.push(x0 + col * dx + x, y0 - (row * dy + y));
      if (next < 0 || !active[next]) {
        reason = END_EDGE;
        break;
      }
      // Into the neighbour: the coordinate across the face flips to the neighbour's side.
      if (next === p + 1) {
        col++;
        x = 0;
      } else if (next === p - 1) {
        col--;
        x = dx;
      } else if (next === p + nx) {
        row++;
        y = 0;
      } else {
        row--;
        y = dy;
      }
      p = next;
      if (++crossings > this.maxCrossings) {
        reason = END_STALLED;
        break;
      }
      const l = stop[p]!;
      if (l >= 0) {
        reason = END_LABEL;
        label = l;
      }
    }
    if (path && (reason === END_STAGNATION || reason === END_TIME_LIMIT || reason === END_STALLED)) {
      path.push(x0 + col * dx + x, y0 - (row * dy + y));
    }
    this.cell = p;
    this.localX = x;
    this.localY = y;
    this.time = t;
    this.reason = reason;
    this.label = label;
    this.crossings = crossings;
    return reason;
  }

  /** The contract's name for the last track's end. A stalled track (a fault) reads as stagnation. */
  endReason(): EndReason {
    switch (this.reason) {
      case END_LABEL:
        return this.field.labels[this.label]!.kind;
      case END_EDGE:
        return 'edge';
      case END_TIME_LIMIT:
        return 'time-limit';
      default:
        return 'stagnation';
    }
  }

  /** Where the last track ended, for `endsAt`: the well id or boundary group name, else the end reason. */
  endsAt(): string {
    return this.reason === END_LABEL ? this.field.labels[this.label]!.name : this.endReason();
  }
}

function clamp(v: number, lo: number, hi: number): number {
  return v < lo ? lo : v > hi ? hi : v;
}
