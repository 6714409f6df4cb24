import { describe, expect, it } from 'vitest';
import { assembleSystem } from '../../../src/discretisation/assemble.js';
import type { FlowSystem } from '../../../src/discretisation/assemble.js';
import { linearTerm, type FlowTerm } from '../../../src/discretisation/terms/types.js';
import { trackingInputFromSystem } from '../../../src/analysis/tracking/fromSystem.js';
import { buildTrackingField, Tracker, PathBuffer } from '../../../src/analysis/tracking/index.js';
import { fixedColumn, makeModel, testGrid, well } from '../../helpers/model.js';

describe('trackingInputFromSystem', () => {
  const grid = testGrid(6, 4, 10);
  const model = makeModel(grid, {
    conductivity: new Float64Array(24).fill(1),
    fixedHeads: [fixedColumn(grid, 0, 10, 'west'), fixedColumn(grid, 5, 9, 'east')],
    wells: [well(grid, 'A', 1, 2, -1), well(grid, 'B', 1, 2, -2), well(grid, 'C', 2, 3, 1)],
  });
  const system = assembleSystem(model);
  // Heads falling from the west boundary (10) to the east one (9): both exchange water with the aquifer.
  const head = Float64Array.from({ length: 24 }, (_, p) => 10 - (p % 6) / 5);

  it('labels fixed-head groups as boundaries and well cells as wells (wells in one cell share a label)', () => {
    const input = trackingInputFromSystem(system, head, { wells: model.wells, thickness: 1, porosity: 0.2 });
    expect(input.labels).toEqual([
      { kind: 'boundary', name: 'west' },
      { kind: 'boundary', name: 'east' },
      { kind: 'well', name: 'A+B' },
      { kind: 'well', name: 'C' },
    ]);
    expect(input.stopLabel[0]).toBe(0);
    expect(input.stopLabel[5]).toBe(1);
    expect(input.stopLabel[1 * 6 + 2]).toBe(2);
    expect(input.stopLabel[2 * 6 + 3]).toBe(3);
    expect(input.stopLabel[1]).toBe(-1);
  });

  it('refuses a grid that is not north-up rather than mirror the tracks', () => {
    const flipped = { ...system, grid: { ...grid, transform: [500000, 10, 0, 4100000, 0, 10] as const } };
    expect(() => trackingInputFromSystem(flipped, head, { wells: model.wells, thickness: 1, porosity: 0.2 })).toThrow(/north-up/);
  });

  /** A term the registry does not know (as a head-dependent drain would be): it takes `rate` out of each of its cells. */
  function standInTerm(label: string, cells: number[], rate: number, areal = false): FlowTerm {
    return {
      ...linearTerm,
      kind: 'stand-in',
      label,
      cells: Int32Array.from(cells),
      prescribedHeads: null,
      anchors: false,
      mapLegend: null,
      pumping: false,
      ...(areal ? { areal: true } : {}),
      linearise() {},
      flow(_head, out) {
        out.fill(rate);
      },
    };
  }

  it('labels the cells of any non-areal term by the term label where its flow is not zero, and ignores areal terms', () => {
    const withTerms: FlowSystem = {
      ...system,
      terms: [
        ...system.terms,
        standInTerm('field-drain', [7, 10], -0.5),
        standInTerm('dry-drain', [13], 0),
        standInTerm('seepage', [19, 20], -0.1, true),
      ],
    };
    const input = trackingInputFromSystem(withTerms, head, { wells: model.wells, thickness: 1, porosity: 0.2 });
    const drain = input.labels.findIndex((l) => l.name === 'field-drain');
    expect(input.labels[drain]).toEqual({ kind: 'boundary', name: 'field-drain' });
    expect(input.stopLabel[7]).toBe(drain);
    expect(input.stopLabel[10]).toBe(drain);
    expect(input.stopLabel[13]).toBe(-1); // no flow at the solved heads: not a boundary there
    expect(input.stopLabel[19]).toBe(-1); // areal: particles pass
    expect(input.labels.some((l) => l.name === 'seepage' || l.name === 'dry-drain')).toBe(false);
  });

  it('a forward particle stops in a discharging cell of a new term, named by its label', () => {
    // One row, flow from west (10) to east (9), a stand-in drain in column 3 taking water out: the exchange there is
    // read from the face flows, so give heads whose face flows converge on column 3 (a trough).
    const g = testGrid(7, 1, 10);
    const m = makeModel(g, {
      conductivity: new Float64Array(7).fill(1),
      fixedHeads: [fixedColumn(g, 0, 10, 'west'), fixedColumn(g, 6, 10, 'east')],
      wells: [],
    });
    const s = assembleSystem(m);
    const h = Float64Array.from([10, 9.5, 9.1, 9, 9.1, 9.5, 10]);
    const input = trackingInputFromSystem({ ...s, terms: [...s.terms, standInTerm('field-drain', [3], -1)] }, h, {
      wells: [],
      thickness: 1,
      porosity: 0.2,
    });
    const field = buildTrackingField(input);
    const tracker = new Tracker(field);
    tracker.track(1, 5, 5, 1, Infinity, new PathBuffer());
    expect(tracker.endsAt()).toBe('field-drain');
    expect(tracker.endReason()).toBe('boundary');
  });
});
