/**
 * The unit a raster declares for its values (GDAL's unit type, or its vertical CRS's unit: RasterData.unit) against
 * the unit its values are taken in. piezomap converts no units, so a raster in another unit, or in a unit it cannot
 * recognise, must be refused rather than read as if it were in the expected one.
 *
 * Pure: unit names as GDAL and common GIS practice write them (no single source; the names of the EPSG linear units
 * 9001-9003 are EPSG's).
 */

/**
 * What a value measures: a length (thickness, elevation, head), a length per time (conductivity, recharge), a
 * fraction, an area per time (a boundary conductance), a rate per time (a leakance).
 */
export type Quantity = 'length' | 'velocity' | 'fraction' | 'area-rate' | 'rate';

export interface ValueUnits {
  length: 'm' | 'ft';
  time: 's' | 'd';
}

const LENGTH_NAMES: Record<ValueUnits['length'], readonly string[]> = {
  m: ['m', 'metre', 'meter', 'metres', 'meters'],
  // the US survey foot differs from the international foot by 2 parts per million: both are feet here
  ft: ['ft', 'foot', 'feet', 'us survey foot', 'us survey feet', 'ftus', 'us-ft', 'international foot'],
};

const TIME_NAMES: Record<ValueUnits['time'], readonly string[]> = {
  s: ['s', 'sec', 'second', 'seconds'],
  d: ['d', 'day', 'days'],
};

/** Names of a pure number (porosity as a fraction). */
const FRACTION_NAMES = ['1', '-', 'fraction', 'dimensionless', 'unitless', 'none', 'm/m', 'm3/m3', 'm³/m³'];

/** The expected unit in words, for messages: "m", "m/d", "a fraction (no unit)". */
export function describeExpectedUnit(quantity: Quantity, units: ValueUnits): string {
  if (quantity === 'length') return units.length;
  if (quantity === 'velocity') return `${units.length}/${units.time}`;
  if (quantity === 'area-rate') return `${units.length}2/${units.time}`;
  if (quantity === 'rate') return `1/${units.time}`;
  return 'a fraction (no unit)';
}

/** Whether `declared` is the unit of `quantity` in `units`. Case and spacing do not matter. */
export function unitMatches(declared: string, quantity: Quantity, units: ValueUnits): boolean {
  const text = declared.trim().toLowerCase().replace(/⁻¹/g, '-1').replace(/\s+/g, ' ');
  if (quantity === 'fraction') return FRACTION_NAMES.includes(text);
  const lengths = LENGTH_NAMES[units.length];
  if (quantity === 'length') return lengths.includes(text);
  if (quantity === 'rate') {
    return TIME_NAMES[units.time].some((time) => [`1/${time}`, `1 / ${time}`, `/${time}`, `per ${time}`, `${time}-1`].includes(text));
  }
  if (quantity === 'area-rate') {
    for (const length of lengths) {
      for (const square of [`${length}2`, `${length}²`, `${length}^2`, `sq ${length}`]) {
        for (const time of TIME_NAMES[units.time]) {
          const forms = [
            `${square}/${time}`,
            `${square} / ${time}`,
            `${square} per ${time}`,
            `${square} ${time}-1`,
            `${square}.${time}-1`,
            `${square}·${time}-1`,
          ];
          if (forms.includes(text)) return true;
        }
      }
    }
    return false;
  }
  // L/T, L per T, L T-1, L.T-1, L·T-1
  for (const length of lengths) {
    for (const time of TIME_NAMES[units.time]) {
      const forms = [
        `${length}/${time}`,
        `${length} / ${time}`,
        `${length} per ${time}`,
        `${length} ${time}-1`,
        `${length}.${time}-1`,
        `${length}·${time}-1`,
      ];
      if (forms.includes(text)) return true;
    }
  }
  return false;
}
