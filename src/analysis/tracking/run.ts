/**
 * Particle tracking for a solved model (scenario key `tracking`): capture zones and backward pathlines of every
 * withdrawal well, and forward tracks from `tracking.points`, on the solved system's face flows. Geometry stays in
 * the grid's map coordinates here; the files project it (src/output/tracking.ts).
 */
import type { FlowSystem } from '../../discretisation/assemble.js';
import { saturatedThickness } from '../../discretisation/thickness.js';
import type { ModelInput, TrackingSettings } from '../../scenario/types.js';
import { buildTrackingField, type TrackingField, type TrackingInput } from './field.js';
import { captureZones, checkCaptureTimes, type CaptureResult } from './capture.js';
import type { EndRasters } from './rasters.js';
import { endRastersInWorkers } from './workers.js';
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
  const prepared = prepareTracking(model, system, head);
  return prepared && finishTracking(prepared, head);
}

/**
 * As trackSolution, the same result, with the end rasters (the long part: a track from every active cell) computed
 * in `workers` worker threads (./workers.ts), so that the calling thread stays free meanwhile, e.g. to answer
 * SIGINT at once (the CLI). Falls back to this thread where the compiled workers are not there.
 */
export async function trackSolutionInWorkers(
  model: ModelInput,
  system: FlowSystem,
  head: Float64Array,
  workers = 2,
): Promise<TrackingRun | null> {
  const prepared = prepareTracking(model, system, head);
  if (!prepared) return null;
  // the options captureZones computes its end rasters with (exact up to the largest capture time)
  const times = checkCaptureTimes(prepared.settings.captureTimes);
  const exactTime = times.length ? times[times.length - 1]! : 0;
  const ends = await endRastersInWorkers(prepared.input, { exactTime, potential: head }, workers);
  return finishTracking(prepared, head, ends);
}

interface PreparedTracking {
  settings: TrackingSettings;
  started: number;
  input: TrackingInput;
  field: TrackingField;
}

function prepareTracking(model: ModelInput, system: FlowSystem, head: Float64Array): PreparedTracking | null {
  const settings = model.tracking;
  if (!settings) return null;
  const started = performance.now();
  // The loader refuses tracking without porosity; this guards library callers who build models by hand.
  const porosity = model.porosity ?? NaN;
  const input = trackingInputFromSystem(system, head, { wells: model.wells, thickness: saturatedThickness(model, head), porosity });
  return { settings, started, input, field: buildTrackingField(input) };
}

function finishTracking({ settings, started, input, field }: PreparedTracking, head: Float64Array, ends?: EndRasters): TrackingRun {
  const capture = captureZones(
    field,
    input.stopLabel,
    {
      captureTimes: settings.captureTimes,
      particlesPerWell: settings.particlesPerWell,
      ...(settings.maxTime !== undefined ? { maxTime: settings.maxTime } : {}),
      rasters: { potential: head },
    },
    ends,
  );
  const points = trackPoints(
    field,
    settings.points.map(({ id, x, y }) => ({ id, x, y })),
    settings.maxTime !== undefined ? { maxTime: settings.maxTime } : {},
  );
  const warnings = capture.warnings.map((w) => `tracking: ${w}`);
  if (capture.wells.length === 0 && (settings.captureTimes.length > 0 || settings.particlesPerWell > 0)) {
    warnings.push('tracking: no withdrawal well, so no capture zone was drawn');
  }
  return { settings, capture, points, warnings, seconds: (performance.now() - started) / 1000 };
}
