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

/**
 * Where water crossing each part of each face ends up, filled from finished forward tracks, so that a later
 * track that crosses the same part of a face can take over that track's end instead of retracing it.
 *
 * Faces are cut into parts of about equal flow, not equal length: a face gets ceil(partsPerFace x |v| L / mean)
 * parts (|v| L its velocity times length, mean over flowing faces; at most 1024), so a fast channel that gathers
 * the water of many cells is cut as finely as the water it carries. Streamlines keep their share of the flow, so
 * two tracks crossing one part are never further apart, in flow, than about 1/partsPerFace of an average cell.
 *
 * When a track tracked to its end (label L at time T), every part it crossed that holds nothing yet records L and
 * the remaining time T - t_crossing. A later track adopts a record only after it has crossed at least
 * `exactCrossings` cells and travelled at least `exactTime`: its travel time is exact up to `exactTime` (time zones
 * up to that time are exact), and beyond that its end is the end of a track that crossed the same part of a face.
 * That end can differ from the exact one only for water within that part of a dividing streamline (below the
 * resolution of a raster of cell centres); the adopted time differs by the travel-time difference across the
 * part. Adopted tracks record nothing, so an estimate never feeds another. Records are written once, in the
 * order tracks finish: results depend only on the seeds and their order.
 */
export class FaceCache {
  readonly exactTime: number;
  readonly exactCrossings: number;
  /** First part of face f (east face of p: f = p; south face of p: f = n + p); parts of f end at start[f + 1]. */
  readonly start: Int32Array;
  /** Label index + 2 per face part: 0 = nothing recorded, 1 = ended without a label, >= 2 a label. */
  readonly code: Int32Array;
  readonly remaining: Float32Array;

  constructor(field: TrackingField, options: { partsPerFace?: number; exactTime?: number; exactCrossings?: number } = {}) {
    const partsPerFace = options.partsPerFace ?? 4;
    this.exactTime = options.exactTime ?? 0;
    this.exactCrossings = options.exactCrossings ?? 16;
    const { nx, ny, dx, dy } = field;
    const n = nx * ny;
    const v = field.velocity;
    const measure = (f: number): number => (f < n ? Math.abs(v[4 * f + 1]!) * dy : Math.abs(v[4 * (f - n) + 3]!) * dx);
    let sum = 0;
    let flowing = 0;
    for (let f = 0; f < 2 * n; f++) {
      const m = measure(f);
      if (m > 0) {
        sum += m;
        flowing++;
      }
    }
    const mean = flowing > 0 ? sum / flowing : 1;
    this.start = new Int32Array(2 * n + 1);
    let total = 0;
    for (let f = 0; f < 2 * n; f++) {
      this.start[f] = total;
      const m = measure(f);
      total += m > 0 ? Math.min(1024, Math.ceil((partsPerFace * m) / mean)) : 1;
    }
    this.start[2 * n] = total;
    this.code = new Int32Array(total);
    this.remaining = new Float32Array(total);
  }

  /** The part of face f at fraction `along` (0..1) of its length. */
  part(f: number, along: number): number {
    const first = this.start[f]!;
    const count = this.start[f + 1]! - first;
    const k = (along * count) | 0;
    return first + (k < count ? k : count - 1);
  }

  reset(): void {
    this.code.fill(0);
  }
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
  /** True when the last track's end was taken over from a FaceCache record. */
  adopted = false;
  private readonly maxCrossings: number;
  /** Face parts crossed by the current track and the time of each crossing (for FaceCache records). */
  private crossedPart = new Int32Array(1024);
  private crossedTime = new Float64Array(1024);

  constructor(field: TrackingField) {
    this.field = field;
    // A steady streamline enters a cell at most a few times (it cannot close on itself); far more means a fault.
    this.maxCrossings = 8 * field.nx * field.ny + 1000;
  }

  /**
   * Tracks one particle from (localX, localY) inside cell `start` (0 <= localX <= dx, 0 <= localY <= dy, y
   * southward) forward (direction 1) or backward (-1) until it ends or `maxTime` passes. Returns the END_* code;
   * the end state is in the tracker's fields. With `path`, records the start and every face crossing and the end
   * point in map coordinates (the path is cleared first). With `cache` (forward only, no time limit), takes over
   * recorded ends as the FaceCache comment says and records its own.
   */
  track(
    start: number,
    startX: number,
    startY: number,
    direction: 1 | -1,
    maxTime = Infinity,
    path: PathBuffer | null = null,
    cache: FaceCache | null = null,
  ): number {
    // Records hold remaining times to the end of forward tracks without a time limit: use them only for those.
    if (direction !== 1 || maxTime !== Infinity) cache = null;
    const f = this.field;
    const { nx, ny, dx, dy, x0, y0, active } = f;
    const velocity = f.velocity;
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
    let adopted = false;
    const n = nx * ny;
    const cacheTime = cache ? cache.exactTime : Infinity;
    const cacheCrossings = cache ? cache.exactCrossings : 0;
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
      const v1x = s * velocity[4 * p]!;
      const v2x = s * velocity[4 * p + 1]!;
      const v1y = s * velocity[4 * p + 2]!;
      const v2y = s * velocity[4 * p + 3]!;
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
      let part = 0; // FaceCache index of the face part crossed: east faces first, then south faces
      if (next === p + 1) {
        col++;
        x = 0;
        if (cache) part = cache.part(p, y / dy);
      } else if (next === p - 1) {
        col--;
        x = dx;
        if (cache) part = cache.part(next, y / dy);
      } else if (next === p + nx) {
        row++;
        y = 0;
        if (cache) part = cache.part(n + p, x / dx);
      } else {
        row--;
        y = dy;
        if (cache) part = cache.part(n + next, x / dx);
      }
      p = next;
      if (++crossings > this.maxCrossings) {
        reason = END_STALLED;
        break;
      }
      if (cache) {
        const code = cache.code[part]!;
        if (code !== 0 && t >= cacheTime && crossings >= cacheCrossings) {
          t += cache.remaining[part]!;
          reason = code === 1 ? END_STAGNATION : END_LABEL;
          label = code - 2;
          adopted = true;
          break;
        }
        if (crossings > this.crossedPart.length) this.growCrossed();
        this.crossedPart[crossings - 1] = part;
        this.crossedTime[crossings - 1] = t;
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
    if (cache && reason !== END_TIME_LIMIT && reason !== END_STALLED && !adopted) {
      const code = reason === END_LABEL ? label + 2 : 1;
      const recorded = adopted ? crossings - 1 : crossings;
      for (let c = 0; c < recorded; c++) {
        const k = this.crossedPart[c]!;
        if (cache.code[k] === 0) {
          cache.code[k] = code;
          cache.remaining[k] = t - this.crossedTime[c]!;
        }
      }
    }
    this.adopted = adopted;
    this.cell = p;
    this.localX = x;
    this.localY = y;
    this.time = t;
    this.reason = reason;
    this.label = label;
    this.crossings = crossings;
    return reason;
  }

  private growCrossed(): void {
    const part = new Int32Array(2 * this.crossedPart.length);
    part.set(this.crossedPart);
    this.crossedPart = part;
    const time = new Float64Array(2 * this.crossedTime.length);
    time.set(this.crossedTime);
    this.crossedTime = time;
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
