import { describe, expect, it } from 'vitest';
import { buildTrackingField } from '../../../src/analysis/tracking/field.js';
import { trackPoints } from '../../../src/analysis/tracking/points.js';
import { checkCaptureTimes } from '../../../src/analysis/tracking/capture.js';
import { PiezomapError } from '../../../src/errors.js';

// A 4 x 2 strip of 10 m cells, uniform eastward flow 1 m3/d per face row, the east column a boundary sink,
// cell (1, 1) inactive.
function strip() {
  const nx = 4,
    ny = 2;
  const faceEast = new Float64Array([1, 1, 1, 0, 0, 0, 0, 0]);
  const active = new Uint8Array([1, 1, 1, 1, 1, 0, 1, 1]);
  const stopLabel = new Int32Array([-1, -1, -1, 0, -1, -1, -1, 0]);
  return buildTrackingField({
    nx,
    ny,
    dx: 10,
    dy: 10,
    x0: 1000,
    y0: 2000,
    faceEast,
    faceSouth: new Float64Array(8),
    active,
    thickness: 1,
    porosity: 0.5,
    stopLabel,
    labels: [{ kind: 'boundary', name: 'drain' }],
  });
}

describe('trackPoints', () => {
  it('reports the arrival boundary, travel time n L / q and the pathline in map coordinates', () => {
    // Seepage velocity Q / (dy b n) = 1 / (10 * 1 * 0.5) = 0.2 m/d (uniform from cell 1 on; cell 0 is where the
    // water enters); from x = 1015 to the drain's face at 1030: 15 m in 75 d (Darcy's law, effective porosity).
    const [track] = trackPoints(strip(), [{ id: 'spill', x: 1015, y: 1995 }]);
    expect(track!.endsAt).toBe('drain');
    expect(track!.endReason).toBe('boundary');
    expect(track!.travelTime).toBeCloseTo(75, 9);
    expect(track!.endX).toBeCloseTo(1030, 9);
    expect(track!.pathline.geometry.coordinates[0]).toEqual([1015, 1995]);
    expect(track!.pathline.properties).toMatchObject({ id: 'spill', direction: 'forward', endsAt: 'drain' });
  });

  it('stops at the time limit with the reason `time-limit`', () => {
    const [track] = trackPoints(strip(), [{ id: 'p', x: 1015, y: 1995 }], { maxTime: 50 });
    expect(track!.endsAt).toBe('time-limit');
    expect(track!.travelTime).toBe(50);
    expect(track!.endX).toBeCloseTo(1025, 9);
  });

  it('refuses a point outside the grid or on an inactive cell, naming it and its key', () => {
    const field = strip();
    const outside = () =>
      trackPoints(field, [
        { id: 'ok', x: 1015, y: 1995 },
        { id: 'far', x: 0, y: 0 },
      ]);
    expect(outside).toThrow(/"far" .* outside the grid/);
    try {
      outside();
    } catch (e) {
      expect(e).toBeInstanceOf(PiezomapError);
      expect((e as PiezomapError).code).toBe('input');
      expect((e as PiezomapError).detail.key).toBe('tracking.points[1]');
    }
    expect(() => trackPoints(field, [{ id: 'hole', x: 1015, y: 1985 }])).toThrow(/"hole" .* inactive cell/);
  });
});

describe('checkCaptureTimes', () => {
  it('refuses times <= 0 naming the entry, and sorts the rest', () => {
    expect(() => checkCaptureTimes([365, 0])).toThrow(/capture time must be a positive number/);
    expect(() => checkCaptureTimes([365, -1])).toThrow(PiezomapError);
    expect(checkCaptureTimes([3650, 365, 365])).toEqual([365, 3650]);
  });
});
