import { describe, expect, it } from 'vitest';
import { buildTrackingField, type TrackingInput } from '../../../src/analysis/tracking/field.js';
import { END_LABEL, END_STAGNATION, END_TIME_LIMIT, PathBuffer, Tracker } from '../../../src/analysis/tracking/pollock.js';

/** A one-row strip of nx cells: face flows given per interior east face, the last cell labelled as a boundary sink. */
function strip(faceFlowsEast: number[], options: Partial<TrackingInput> = {}): TrackingInput {
  const nx = faceFlowsEast.length + 1;
  const faceEast = new Float64Array(nx);
  faceEast.set(faceFlowsEast);
  const stopLabel = new Int32Array(nx).fill(-1);
  stopLabel[nx - 1] = 0;
  return {
    nx,
    ny: 1,
    dx: 10,
    dy: 4,
    faceEast,
    faceSouth: new Float64Array(nx),
    active: new Uint8Array(nx).fill(1),
    thickness: 8,
    porosity: 0.25,
    stopLabel,
    labels: [{ kind: 'boundary', name: 'outlet' }],
    ...options,
  };
}

describe('Tracker.track', () => {
  it('gives travel time n L / q along a uniform flow line, to 1e-9 relative', () => {
    // Uniform Darcy flux q through a strip: every face carries Q = q b dy. Seepage velocity q/n, so the time over
    // a length L is n L / q (Darcy's law with effective porosity; Freeze & Cherry 1979, citation from memory);
    // Pollock's method is exact for a uniform field (Pollock 1988).
    const q = 0.037; // m/d
    const b = 8;
    const dy = 4;
    const n = 0.25;
    const Q = q * b * dy;
    const field = buildTrackingField(strip(new Array(40).fill(Q), { thickness: b, dy, porosity: n }));
    const tracker = new Tracker(field);
    const x0 = 3.3; // start 3.3 m into cell 1 (cell 0 is a source cell: no flow through its west edge)
    expect(tracker.track(1, x0, 2, 1)).toBe(END_LABEL);
    expect(tracker.cell).toBe(40);
    const L = 39 * 10 - x0; // to the west face of the outlet cell (40)
    const expected = (n * L) / q;
    expect(Math.abs(tracker.time - expected) / expected).toBeLessThan(1e-9);
    expect(tracker.endsAt()).toBe('outlet');
    expect(tracker.endReason()).toBe('boundary');
  });

  it('matches the exponential exit time and exit point of a linear velocity field in one cell (Pollock 1988)', () => {
    // Cell 1 of a 3 x 3 block: east-west velocity grows from vW to vE, north-south from vN to vS (positive south).
    // Analytic (Pollock 1988): v(t) = v_p exp(A t); exit time t = ln(v_e / v_p) / A; the other coordinate
    // y(t) = y_p + v_py (exp(A_y t) - 1) / A_y.
    const dx = 10,
      dy = 6,
      b = 5,
      n = 0.3;
    const Qw = 2,
      Qe = 5,
      Qn = 0.4,
      Qs = 0.9;
    const nx = 3,
      ny = 3;
    const faceEast = new Float64Array(9);
    const faceSouth = new Float64Array(9);
    const c = 4; // centre cell
    faceEast[c - 1] = Qw;
    faceEast[c] = Qe;
    faceSouth[c - nx] = Qn;
    faceSouth[c] = Qs;
    const field = buildTrackingField({
      nx,
      ny,
      dx,
      dy,
      faceEast,
      faceSouth,
      active: new Uint8Array(9).fill(1),
      thickness: b,
      porosity: n,
      stopLabel: new Int32Array(9).fill(-1),
      labels: [],
    });
    const vW = Qw / (dy * b * n),
      vE = Qe / (dy * b * n),
      vN = Qn / (dx * b * n),
      vS = Qs / (dx * b * n);
    const xp = 2.5,
      yp = 1.5;
    const Ax = (vE - vW) / dx,
      Ay = (vS - vN) / dy;
    const vpx = vW + Ax * xp,
      vpy = vN + Ay * yp;
    const tEast = Math.log(vE / vpx) / Ax;
    const tSouth = Math.log(vS / vpy) / Ay;
    expect(tEast).toBeLessThan(tSouth); // leaves through the east face
    const yExit = yp + (vpy / Ay) * (Math.exp(Ay * tEast) - 1);
    const tracker = new Tracker(field);
    const path = new PathBuffer(2);
    tracker.track(c, xp, yp, 1, Infinity, path);
    // The first face crossing is vertex 1 of the path, in map coordinates (x0 = y0 = 0; y = -(row dy + local y)).
    expect(path.data[2]).toBeCloseTo(2 * dx, 12);
    expect(Math.abs(path.data[3]! - -(dy + yExit))).toBeLessThan(1e-12 * dy);
    // Time to that face: track again with a limit just beyond it and compare the clock at the crossing.
    const again = new Tracker(field);
    again.track(c, xp, yp, 1, tEast * (1 - 1e-12));
    expect(again.reason).toBe(END_TIME_LIMIT);
    expect(again.cell).toBe(c);
    expect(Math.abs(again.localX - dx)).toBeLessThan(1e-9);
    const limited = new Tracker(field);
    limited.track(c, xp, yp, 1, tEast * (1 + 1e-9));
    expect(limited.cell).toBe(c + 1); // crossed within the relative 1e-9 bracket around the analytic time
  });

  it('keeps the uniform-velocity limit free of cancellation (A -> 0)', () => {
    // Face flows differing by 1 part in 1e13: ln(v_e/v_p)/A computed directly would lose most digits; the exact
    // time is d/v (1 - z/2 + ...) with z ~ 1e-13, i.e. d/v to 1e-12.
    const Q = 1;
    const field = buildTrackingField(strip([Q, Q * (1 + 1e-13), Q * (1 + 2e-13)]));
    const tracker = new Tracker(field);
    tracker.track(1, 0, 2, 1);
    const v = Q / (4 * 8 * 0.25);
    expect(Math.abs(tracker.time - 20 / v) / (20 / v)).toBeLessThan(1e-12);
  });

  it('runs backward along reversed velocities to the start (exactness of the per-cell solution)', () => {
    const field = buildTrackingField(strip([1, 1.5, 2.5, 2.6, 4]));
    const tracker = new Tracker(field);
    tracker.track(1, 1.7, 1.1, 1, 123.4);
    expect(tracker.reason).toBe(END_TIME_LIMIT);
    const back = new Tracker(field);
    back.track(tracker.cell, tracker.localX, tracker.localY, -1, 123.4);
    expect(back.cell).toBe(1);
    expect(Math.abs(back.localX - 1.7)).toBeLessThan(1e-6 * 10);
  });

  it('ends at stagnation where no face lets the particle out', () => {
    // Water enters the middle cell from both sides and leaves through an unlabelled internal sink.
    const field = buildTrackingField(strip([1, -1], { stopLabel: new Int32Array(3).fill(-1), labels: [] }));
    const tracker = new Tracker(field);
    expect(tracker.track(0, 5, 2, 1)).toBe(END_STAGNATION);
    expect(tracker.cell).toBe(1);
    expect(tracker.endReason()).toBe('stagnation');
  });
});

describe('weak sinks', () => {
  // A well in cell 2 takes 4 of the 10 units flowing in; the rest goes on to the outlet (cell 5).
  function weakWell(weakSinkFraction: number) {
    const input = strip([10, 10, 6, 6, 6], {
      weakSinkFraction,
      labels: [
        { kind: 'boundary', name: 'outlet' },
        { kind: 'well', name: 'W1' },
      ],
    });
    input.stopLabel[2] = 1;
    return buildTrackingField(input);
  }

  it('are reported with the share of the inflow they take', () => {
    const field = weakWell(0);
    const forward = field.weakSinks.filter((w) => w.direction === 'forward');
    expect(forward).toHaveLength(1);
    expect(forward[0]!.name).toBe('W1');
    expect(forward[0]!.fraction).toBeCloseTo(0.4, 12);
    expect(forward[0]!.stops).toBe(true);
  });

  it('stop particles by default (fraction 0) and let them pass when they take less than the threshold', () => {
    const stopAlways = new Tracker(weakWell(0));
    stopAlways.track(0, 5, 2, 1);
    expect(stopAlways.endsAt()).toBe('W1');
    expect(stopAlways.endReason()).toBe('well');
    const threshold = new Tracker(weakWell(0.5));
    threshold.track(0, 5, 2, 1);
    expect(threshold.endsAt()).toBe('outlet');
    const strong = new Tracker(weakWell(0.39));
    strong.track(0, 5, 2, 1);
    expect(strong.endsAt()).toBe('W1');
  });
});

describe('buildTrackingField', () => {
  it('refuses porosity outside (0, 1] naming the key', () => {
    expect(() => buildTrackingField(strip([1], { porosity: 0 }))).toThrow(/porosity must lie in \(0, 1\]/);
    const porosity = new Float64Array([0.2, 1.5]);
    expect(() => buildTrackingField(strip([1], { porosity }))).toThrow(/row 0, column 1/);
  });
});
