/**
 * The water-table keys of the scenario (../shared/spec/interface.md, "Extensions": aquifer.type, top, bottom): which
 * keys each type needs and refuses, and the loading of the unconfined demo (data/valley-unconfined.json).
 */
import { describe, expect, it } from 'vitest';
import { fileURLToPath } from 'node:url';
import { parseScenarioJson } from '../../src/scenario/schema.js';
import { loadScenario } from '../../src/scenario/load.js';

const fixedHeads = [{ edge: 'west', head: 100 }];

function problem(aquifer: Record<string, unknown>): string {
  const parsed = parseScenarioJson({ aquifer: { conductivity: 'k.tif', ...aquifer }, fixedHeads }, 's.json');
  return parsed.ok ? '' : parsed.message;
}

describe('aquifer.type', () => {
  it('defaults to confined, which needs a thickness', () => {
    expect(problem({ thickness: 20 })).toBe('');
    expect(problem({})).toMatch(/aquifer\.thickness.*required for a confined aquifer/);
  });

  it('refuses a thickness for unconfined and convertible aquifers, naming the key', () => {
    expect(problem({ type: 'unconfined', bottom: 50, thickness: 20 })).toMatch(
      /aquifer\.thickness.*must not be given for an unconfined aquifer/,
    );
    expect(problem({ type: 'convertible', top: 90, bottom: 50, thickness: 20 })).toMatch(
      /aquifer\.thickness.*must not be given for a convertible aquifer/,
    );
  });

  it('needs a bottom (and for convertible a top)', () => {
    expect(problem({ type: 'unconfined' })).toMatch(/aquifer\.bottom.*required for an unconfined aquifer/);
    expect(problem({ type: 'convertible', bottom: 50 })).toMatch(/aquifer\.top.*required for a convertible aquifer/);
    expect(problem({ type: 'unconfined', bottom: 50, initialHead: 95 })).toBe('');
  });

  it('refuses starting heads for a confined aquifer and an unknown type', () => {
    expect(problem({ thickness: 20, initialHead: 95 })).toMatch(/aquifer\.initialHead/);
    expect(problem({ type: 'phreatic', bottom: 50 })).toMatch(/aquifer\.type/);
  });

  it('loads the unconfined demo with its bottom raster', async () => {
    const { model } = await loadScenario(fileURLToPath(new URL('../../data/valley-unconfined.json', import.meta.url)));
    expect(model.aquiferType).toBe('unconfined');
    expect(model.aquiferBottom).toBeInstanceOf(Float64Array);
  });
});
