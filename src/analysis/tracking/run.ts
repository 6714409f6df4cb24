/**
 * Particle tracking for a solved model (scenario key `tracking`): capture zones and backward pathlines of every
 * withdrawal well, and forward tracks from `tracking.points`, on the solved system's face flows. Geometry stays in
 * the grid's map coordinates here; the files project it (src/output/tracking.ts).
 */
import type { FlowSystem } from '../../discretisation/assemble.js';
import { saturatedThickness } from '../../discretisation/thickness.js';
import type { ModelInput, TrackingSettings } from '../../scenario/types.js';
import { buildTrackingField } from './field.js';
import { captureZones, type CaptureResult } from './capture.js';
import { trackPoints, type PointTrack } from './points.js';
import { trackingInputFromSystem } from './fromSystem.js';

export interface TrackingRun {
  settings: TrackingSettings;
  capture: CaptureResult;
  /** Forward tracks from tracking.points, in their order. */
  points: PointTrack[];
  /** Remarks for the summary (weak sinks, stalled tracks, points that reach no well). */
  warnings: string[];
  seconds: number;
}

/** Capture zones and point tracks of a solved model; null when the model has no `tracking` key. */
export function trackSolution(model: ModelInput, system: FlowSystem, head: Float64Array): TrackingRun | null {
  const settings = model.tracking;
  if (!settings) return null;
  const t = performance.now();
  // The loader refuses tracking without porosity; this guards library callers who build models by hand.
  const porosity = model.porosity ?? NaN;
  const input = trackingInputFromSystem(system, head, { wells: model.wells, thickness: saturatedThickness(model, head), porosity });
  const field = buildTrackingField(input);
  const capture = captureZones(field, input.stopLabel, {
    captureTimes: settings.captureTimes,
    particlesPerWell: settings.particlesPerWell,
    ...(settings.maxTime !== undefined ? { maxTime: settings.maxTime } : {}),
    rasters: { potential: head },
  });
  const points = trackPoints(
    field,
    settings.points.map(({ id, x, y }) => ({ id, x, y })),
    settings.maxTime !== undefined ? { maxTime: settings.maxTime } : {},
  );
  const warnings = capture.warnings.map((w) => `tracking: ${w}`);
  if (capture.wells.length === 0 && (settings.captureTimes.length > 0 || settings.particlesPerWell > 0)) {
    warnings.push('tracking: no withdrawal well, so no capture zone was drawn');
  }
  return { settings, capture, points, warnings, seconds: (performance.now() - t) / 1000 };
}
