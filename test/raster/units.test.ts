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
    for (const unit of ['m/d', 'M / day', 'm per day', 'm d-1', 'm.d-1', 'm·d⁻¹', 'metre/day']) expect(unitMatches(unit, 'velocity', metreDay), unit).toBe(true);
    for (const unit of ['ft', 'foot', 'US survey foot']) expect(unitMatches(unit, 'length', footSecond), unit).toBe(true);
    expect(unitMatches('ft/s', 'velocity', footSecond)).toBe(true);
    for (const unit of ['1', 'fraction', 'dimensionless']) expect(unitMatches(unit, 'fraction', metreDay), unit).toBe(true);
  });

  it('unitMatches refuses another unit, a wrong dimension, and what it cannot read', () => {
    for (const unit of ['mm/d', 'm/s', 'cm/s', 'm', 'd-1', 'm d', 'm/d-1', 'mystery']) expect(unitMatches(unit, 'velocity', metreDay), unit).toBe(false);
    for (const unit of ['ft', 'km', 'cm', 'm/d']) expect(unitMatches(unit, 'length', metreDay), unit).toBe(false);
    expect(unitMatches('m', 'length', footSecond)).toBe(false);
    for (const unit of ['%', 'percent']) expect(unitMatches(unit, 'fraction', metreDay), unit).toBe(false);
  });

  it('describeExpectedUnit names the unit for messages', () => {
    expect(describeExpectedUnit('velocity', metreDay)).toBe('m/d');
    expect(describeExpectedUnit('length', footSecond)).toBe('ft');
    expect(describeExpectedUnit('fraction', metreDay)).toBe('a fraction (no unit)');
  });
});
