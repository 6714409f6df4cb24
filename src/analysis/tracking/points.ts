/**
 * Tracking from given points (a spill, a field): where the water at each point goes (forward) or came from
 * (backward), when it arrives, and the pathline.
 */
import { inputError } from '../../errors.js';
import type { TrackingField } from './field.js';
import { pathlineFeature, type PathlineFeature, type Project } from './capture.js';
import { PathBuffer, Tracker, type EndReason } from './pollock.js';

export interface TrackPoint {
  id: string;
  /** Map coordinates of the grid (the field's x0, y0 frame). */
  x: number;
  y: number;
}

export interface PointTrackOptions {
  direction?: 'forward' | 'backward';
  /** Time limit; default none (tracks run until they end). */
  maxTime?: number;
  project?: Project;
  /** Key of the point list, for messages; default `tracking.points`. */
  key?: string;
}

export interface PointTrack {
  id: string;
  /** Well id or boundary group name, else `edge`, `stagnation` or `time-limit`. */
  endsAt: string;
  endReason: EndReason;
  travelTime: number;
  /** End point in the grid's map coordinates and its cell. */
  endX: number;
  endY: number;
  endRow: number;
  endCol: number;
  pathline: PathlineFeature;
}

/** The cell holding a map point and the point's position inside it; a point on a shared edge goes east/south. */
export function locatePoint(field: TrackingField, x: number, y: number): { cell: number; localX: number; localY: number } | null {
  const u = (x - field.x0) / field.dx;
  const w = (field.y0 - y) / field.dy;
  const col = Math.floor(u);
  const row = Math.floor(w);
  if (!(col >= 0 && col < field.nx && row >= 0 && row < field.ny)) return null;
  return { cell: row * field.nx + col, localX: (u - col) * field.dx, localY: (w - row) * field.dy };
}

/** Tracks every point; a point outside the grid or on an inactive cell is an input error naming it. */
export function trackPoints(field: TrackingField, points: readonly TrackPoint[], options: PointTrackOptions = {}): PointTrack[] {
  const key = options.key ?? 'tracking.points';
  const maxTime = options.maxTime ?? Infinity;
  if (!(maxTime > 0)) throw inputError(`tracking time limit must be positive, got ${maxTime}`, { key: 'tracking.maxTime' });
  const located = points.map((pt, i) => {
    const at = Number.isFinite(pt.x) && Number.isFinite(pt.y) ? locatePoint(field, pt.x, pt.y) : null;
    if (!at || !field.active[at.cell]) {
      throw inputError(`tracking point "${pt.id}" (${pt.x}, ${pt.y}) lies ${at ? 'on an inactive cell' : 'outside the grid'}`, {
        key: `${key}[${i}]`,
        ...(at ? { cell: { row: Math.floor(at.cell / field.nx), col: at.cell % field.nx } } : {}),
        hint: 'give points inside the active area, in the raster CRS (or pointCrs)',
      });
    }
    return at;
  });
  const direction = options.direction === 'backward' ? -1 : 1;
  const tracker = new Tracker(field);
  const path = new PathBuffer();
  return points.map((pt, i) => {
    const at = located[i]!;
    tracker.track(at.cell, at.localX, at.localY, direction, maxTime, path);
    const row = Math.floor(tracker.cell / field.nx);
    const col = tracker.cell - row * field.nx;
    return {
      id: pt.id,
      endsAt: tracker.endsAt(),
      endReason: tracker.endReason(),
      travelTime: tracker.time,
      endX: field.x0 + col * field.dx + tracker.localX,
      endY: field.y0 - (row * field.dy + tracker.localY),
      endRow: row,
      endCol: col,
      pathline: pathlineFeature(pt.id, direction === 1 ? 'forward' : 'backward', tracker, path, options.project ?? null),
    };
  });
}
