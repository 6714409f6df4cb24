/**
 * Flow terms: the registry, the budget built from the terms, and the outer (fixed-point) iteration for terms whose
 * linearisation depends on the heads. The nonlinear terms here are test-only stand-ins (a drain as specified in
 * ../shared/spec/physics.md, and terms that misbehave on purpose); the checks are worked by hand.
 */
import { describe, expect, it } from 'vitest';
import { assembleSystem, headsFromSolution, linearise, withSources, type FlowSystem } from '../../src/discretisation/assemble.js';
import { DEFAULT_OUTER, solveOuter, type OuterSettings } from '../../src/discretisation/outerLoop.js';
import { TERM_KINDS } from '../../src/discretisation/terms/registry.js';
import { mapCellLayers, type FlowTerm } from '../../src/discretisation/terms/types.js';
import { waterBudget } from '../../src/analysis/budget.js';
import { buildSummary } from '../../src/output/summary.js';
import { solveModel } from '../../src/pipeline.js';
import { resultProblem } from '../../src/analysis/result.js';
import { exitCodeFor } from '../../src/errors.js';
import { closeSession, openSession, runInline } from '../../src/executor/plan.js';
import { fixedCells, fixedColumn, makeModel, testGrid, well } from '../helpers/model.js';

/** A drain cell: flow C (E - h) while h > E, none otherwise (physics.md, head-dependent boundaries). */
function drain(cell: number, elevation: number, conductance: number, system: FlowSystem): FlowTerm {
  let on = false;
  return {
    kind: 'test-drain',
    label: 'drain',
    cells: Int32Array.of(cell),
    prescribedHeads: null,
    anchors: false,
    nonlinear: true,
    pumping: false,
    mapLegend: null,
    ignoredCells: 0,
    notes: () => [],
    linearise(_head, diag, rhs) {
      // C (E - h) with h = x + datum: +C on the diagonal, C (E - datum) on the right-hand side.
      if (!on) return;
      diag[cell]! += conductance;
      rhs[cell]! += conductance * (elevation - system.datum);
    },
    updateState(head) {
      const next = head[cell]! > elevation;
      const changed = next !== on ? 1 : 0;
      on = next;
      return changed;
    },
    stateKey: () => (on ? '1' : '0'),
    flow(head, out) {
      out[0] = on ? conductance * (elevation - head[cell]!) : 0;
    },
  };
}

/** 3 x 1 cells of 10 m, T = 10 m²/d, a fixed head of 10 m in cell 0, recharge 0.1 m/d (10 m³/d per cell). */
function chain(): FlowSystem {
  const grid = testGrid(3, 1, 10);
  const model = makeModel(grid, {
    conductivity: new Float64Array(3).fill(2),
    thickness: 5,
    fixedHeads: [fixedCells('left', [[0, 10]])],
    recharge: 0.1,
  });
  return assembleSystem(model);
}

function solve(system: FlowSystem, settings: OuterSettings = DEFAULT_OUTER) {
  return runInline(
    (function* () {
      const session = yield* openSession(system.operator, { method: 'cg' });
      const answer = yield* solveOuter(system, session, { tolerance: 1e-13, maxIterations: 100 }, settings);
      yield* closeSession(session);
      return answer;
    })(),
  );
}

describe('flow term registry', () => {
  it('names every kind once, and a system lists its terms in budget order: fixed-head groups, wells, recharge', () => {
    const kinds = TERM_KINDS.map((k) => k.kind);
    expect(new Set(kinds).size).toBe(kinds.length);
    const grid = testGrid(6, 4, 10);
    const model = makeModel(grid, {
      conductivity: new Float64Array(24).fill(1),
      fixedHeads: [fixedColumn(grid, 0, 20, 'west'), fixedColumn(grid, 5, 10, 'east')],
      wells: [well(grid, 'A', 1, 2, -5)],
      recharge: 0.001,
    });
    const system = assembleSystem(model);
    expect(system.terms.map((t) => t.label)).toEqual(['west', 'east', 'wells', 'recharge']);
    const head = headsFromSolution(system, solve(system).x);
    expect(waterBudget(system, head).terms.map((t) => t.term)).toEqual(['west', 'east', 'wells', 'recharge']);
  });

  it('a variant on the shared operator rebuilds its right-hand side with the assembly code; a term with a diagonal part changes the operator', () => {
    const grid = testGrid(5, 3, 10);
    const base = makeModel(grid, { conductivity: new Float64Array(15).fill(1), fixedHeads: [fixedColumn(grid, 0, 5, 'west')] });
    const system = assembleSystem(base);
    const variant = { ...base, wells: [well(grid, 'B', 1, 3, -2)] };
    const shared = withSources(system, variant);
    expect(shared.operator).toBe(system.operator);
    // Well B adds -2 m³/d to its cell's balance, nothing else changes.
    const p = 1 * 5 + 3;
    for (let q = 0; q < 15; q++) expect(shared.rhs[q]).toBe(system.rhs[q]! + (q === p ? -2 : 0));
    // A term that touches the diagonal cannot ride on a shared operator.
    const withDrain = { ...system, terms: [...system.terms] };
    const d = drain(p, 0, 1, withDrain);
    d.updateState(new Float64Array(15).fill(1));
    const { diag } = linearise({ ...withDrain, terms: [...system.terms, d] }, system.operator.unknown, new Float64Array(15));
    expect(diag[p]).toBe(system.operator.diag[p]! + 1);
  });
});

describe('outer iteration', () => {
  it('runs one linear solve when every term is linear, and the summary stays as it was', () => {
    const r = solve(chain());
    expect(r.outer).toEqual({ iterations: 1, stopReason: 'linear', history: [], innerIterations: r.stats.iterations });
    const system = chain();
    const result = solveModel(
      makeModel(system.grid, {
        conductivity: new Float64Array(3).fill(2),
        thickness: 5,
        fixedHeads: [fixedCells('left', [[0, 10]])],
        recharge: 0.1,
      }),
    );
    expect(result.outer.iterations).toBe(1);
    expect(buildSummary(result, [], 'test').solver).not.toHaveProperty('outerIterations');
    expect(resultProblem(result)).toBeNull();
    // An outer loop that did not settle is not a result (exit 3, as a linear solve that did not converge).
    const unsettled = { ...result, outer: { iterations: 3, stopReason: 'cycle' as const, history: [], innerIterations: 30 } };
    expect(exitCodeFor(resultProblem(unsettled)!)).toBe(3);
    expect(buildSummary(unsettled, [], 'test').solver).toMatchObject({ outerIterations: 3, outerStopReason: 'cycle' });
  });

  it('switches a drain on and settles on the heads worked by hand', () => {
    const system = chain();
    system.terms.push(drain(2, 11, 5, system));
    const r = solve(system);
    // Without the drain h = 12, 13 m (h2 = 13 > E = 11 switches it on). With it, by hand:
    //   cell 1: 10 (10 - h1) + 10 (h2 - h1) + 10 = 0;  cell 2: 10 (h1 - h2) + 10 + 5 (11 - h2) = 0  ->  h1 = 11.5, h2 = 12.
    const head = headsFromSolution(system, r.x);
    expect(head[1]).toBeCloseTo(11.5, 9);
    expect(head[2]).toBeCloseTo(12, 9);
    expect(r.outer.stopReason).toBe('settled');
    expect(r.outer.history[0]!.stateChanges).toBe(1);
    expect(r.outer.iterations).toBeGreaterThanOrEqual(2);
    // Budget by hand: in 20 m³/d recharge; out 15 to the fixed head (10 (11.5 - 10)) and 5 to the drain (5 (12 - 11)).
    const budget = waterBudget(system, head);
    const rows = Object.fromEntries(budget.terms.map((t) => [t.term, t]));
    expect(rows.drain!.outflow).toBeCloseTo(5, 9);
    expect(rows.left!.outflow).toBeCloseTo(15, 9);
    expect(Math.abs(budget.discrepancyPercent)).toBeLessThan(1e-8);
  });

  it('stops on a switch state seen before (a cycle) and at the iteration cap, saying which', () => {
    const flip = (system: FlowSystem): FlowTerm => {
      let state = 0;
      return {
        ...drain(1, 0, 1, system),
        updateState: () => {
          state ^= 1;
          return 1;
        },
        stateKey: () => String(state),
      };
    };
    const cycling = chain();
    cycling.terms.push(flip(cycling));
    const c = solve(cycling);
    expect(c.outer.stopReason).toBe('cycle');
    expect(c.outer.iterations).toBe(3);

    const wandering = chain();
    let count = 0;
    wandering.terms.push({
      ...drain(1, 0, 1, wandering),
      updateState: () => {
        count++;
        return 1;
      },
      stateKey: () => String(count),
    });
    const w = solve(wandering, { headTolerance: 1e-6, maxOuterIterations: 4 });
    expect(w.outer.stopReason).toBe('iteration-limit');
    expect(w.outer.iterations).toBe(4);
  });
});

describe('mapCellLayers', () => {
  it("gives every fixed-head group its own layer, legend row and style, and passes a new term's own style through", () => {
    const grid = testGrid(6, 4, 10);
    const model = makeModel(grid, {
      conductivity: new Float64Array(24).fill(2),
      thickness: 5,
      fixedHeads: [
        fixedCells('river', [
          [0, 10],
          [6, 10],
        ]),
        fixedCells('lake', [[5, 9]]),
        fixedCells('edge', [[23, 8]]),
      ],
    });
    const system = assembleSystem(model);
    // A head-dependent boundary to come supplies its legend and style; the map code needs no change for it.
    const custom = { ...drain(14, 9, 1, system), mapLegend: 'Drain cells', mapStyle: { pattern: 'dots' as const, colour: '#123456' } };
    const layers = mapCellLayers([...system.terms, custom], 24);
    expect(layers.map((l) => l.legend)).toEqual(['Fixed head: river', 'Fixed head: lake', 'Fixed head: edge', 'Drain cells']);
    expect([...layers[0]!.cells].flatMap((v, p) => (v ? [p] : []))).toEqual([0, 6]);
    const styles = layers.map((l) => JSON.stringify(l.style));
    expect(new Set(styles).size).toBe(4);
    expect(layers[3]!.style).toEqual({ pattern: 'dots', colour: '#123456' });
  });
});
