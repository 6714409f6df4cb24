/**
 * Calibration statistics of simulated against observed heads, as model reports commonly give them
 * (common practice; e.g. Anderson, Woessner & Hunt, Applied Groundwater Modeling, 2nd ed. 2015, ch. 9, from memory):
 * residual = simulated - observed; mean error (bias), mean absolute error, root-mean-square error, and the RMS
 * error divided by the range of observed heads (a scale-free figure; often quoted against a 10 % guide).
 */
import type { ObservationResult } from './points.js';

export interface CalibrationStatistics {
  count: number;
  /** Mean of (simulated - observed). */
  meanError: number;
  meanAbsoluteError: number;
  rmsError: number;
  /** max - min of the observed heads. */
  observedRange: number;
  /** rmsError / observedRange, as a percentage; null when the range is 0 (a single observation or equal heads). */
  scaledRmsPercent: number | null;
}

/** Statistics over all observations; null when there are none. */
export function calibrationStatistics(observations: readonly ObservationResult[]): CalibrationStatistics | null {
  const count = observations.length;
  if (count === 0) return null;
  let sum = 0,
    sumAbs = 0,
    sumSquares = 0;
  let min = Infinity,
    max = -Infinity;
  for (const o of observations) {
    const r = o.simulated - o.observed;
    sum += r;
    sumAbs += Math.abs(r);
    sumSquares += r * r;
    if (o.observed < min) min = o.observed;
    if (o.observed > max) max = o.observed;
  }
  const rmsError = Math.sqrt(sumSquares / count);
  const observedRange = max - min;
  return {
    count,
    meanError: sum / count,
    meanAbsoluteError: sumAbs / count,
    rmsError,
    observedRange,
    scaledRmsPercent: observedRange > 0 ? (100 * rmsError) / observedRange : null,
  };
}
