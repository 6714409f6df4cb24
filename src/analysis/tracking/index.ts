/**
 * Particle tracking (Pollock's semi-analytical method) on the budget's face flows: the field, the tracker, the
 * per-cell end rasters, capture zones and tracking from points. Re-exports only.
 */
export {
  buildTrackingField,
  internalExchange,
  type TrackingInput,
  type TrackingField,
  type StopLabel,
  type StopKind,
  type WeakSink,
} from './field.js';
export {
  Tracker,
  PathBuffer,
  FaceCache,
  END_LABEL,
  END_EDGE,
  END_STAGNATION,
  END_TIME_LIMIT,
  END_STALLED,
  type EndReason,
} from './pollock.js';
export {
  endRasters,
  trackCellCentres,
  trackSeeds,
  trackBand,
  bandRows,
  seedOrder,
  SEED_BANDS,
  NO_LABEL,
  type EndRasters,
  type EndRasterOptions,
  type SeedWindow,
} from './rasters.js';
export {
  captureZones,
  checkCaptureTimes,
  withdrawalWells,
  pathlineFeature,
  signedArea,
  type CaptureOptions,
  type CaptureResult,
  type CaptureZoneFeature,
  type PathlineFeature,
  type WellCapture,
  type Project,
} from './capture.js';
export { trackPoints, locatePoint, type TrackPoint, type PointTrack, type PointTrackOptions } from './points.js';
export { trackingInputFromSystem, type SystemTrackingOptions } from './fromSystem.js';
export { endRastersInWorkers, trackingWorkersAvailable } from './workers.js';
export { trackSolution, type TrackingRun } from './run.js';
export { compareCapture, type CaptureComparison, type ZoneAreaChange, type NewCapture } from './compareCapture.js';
