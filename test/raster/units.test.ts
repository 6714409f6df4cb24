/**
 * unitMatches: a raster's declared unit against the unit its scenario key is taken in. The spellings are common
 * practice in GIS metadata (no single source); the EPSG names of linear units 9001-9003 are EPSG's.
 */
import { describe, expect, it } from 'vitest';
import { describeExpectedUnit, unitMatches } from '../../src/raster/units.js';

const metreDay = { length: 'm', time: 'd' } as const;
const footSecond = { length: 'ft', time: 's' } as const;

describe('unitMatches', () => {
  it('unitMatches accepts the usual spellings of the expected length, velocity and fraction', () => {
    for (const unit of ['m', 'metre', 'Meter', ' metres ']) expect(unitMatches(unit, 'length', metreDay), unit).toBe(true);
    for (const unit of ['m/d', 'M / day', 'm per day', 'm d-1', 'm.d-1', 'm·d⁻¹', 'metre/day'])
      expect(unitMatches(unit, 'velocity', metreDay), unit).toBe(true);
    for (const unit of ['ft', 'foot', 'US survey foot']) expect(unitMatches(unit, 'length', footSecond), unit).toBe(true);
    expect(unitMatches('ft/s', 'velocity', footSecond)).toBe(true);
    for (const unit of ['1', 'fraction', 'dimensionless']) expect(unitMatches(unit, 'fraction', metreDay), unit).toBe(true);
  });

  it('unitMatches refuses another unit, a wrong dimension, and what it cannot read', () => {
    for (const unit of ['mm/d', 'm/s', 'cm/s', 'm', 'd-1', 'm d', 'm/d-1', 'mystery'])
      expect(unitMatches(unit, 'velocity', metreDay), unit).toBe(false);
    for (const unit of ['ft', 'km', 'cm', 'm/d']) expect(unitMatches(unit, 'length', metreDay), unit).toBe(false);
    expect(unitMatches('m', 'length', footSecond)).toBe(false);
    for (const unit of ['%', 'percent']) expect(unitMatches(unit, 'fraction', metreDay), unit).toBe(false);
  });

  it('takes boundary conductances in length²/time and leakances in 1/time, refusing other dimensions (common practice spellings)', () => {
    for (const unit of ['m2/d', 'm²/day', 'm^2 per day', 'm2 d-1']) expect(unitMatches(unit, 'area-rate', metreDay), unit).toBe(true);
    for (const unit of ['m/d', 'm2/s', 'm3/d', 'ft2/d', 'm2']) expect(unitMatches(unit, 'area-rate', metreDay), unit).toBe(false);
    for (const unit of ['1/d', '1 / day', 'd-1', 'per day']) expect(unitMatches(unit, 'rate', metreDay), unit).toBe(true);
    for (const unit of ['1/s', 'm/d', 'd', '1']) expect(unitMatches(unit, 'rate', metreDay), unit).toBe(false);
    expect(describeExpectedUnit('area-rate', metreDay)).toBe('m2/d');
    expect(describeExpectedUnit('rate', footSecond)).toBe('1/s');
  });

  it('describeExpectedUnit names the unit for messages', () => {
    expect(describeExpectedUnit('velocity', metreDay)).toBe('m/d');
    expect(describeExpectedUnit('length', footSecond)).toBe('ft');
    expect(describeExpectedUnit('fraction', metreDay)).toBe('a fraction (no unit)');
  });
});
