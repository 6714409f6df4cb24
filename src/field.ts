/** A quantity given either as one number for every cell or as a full-grid raster (indexed `row * nx + col`). */
export type Field = Float64Array | number;

/** The value of a field at cell p: the one place that tells a uniform number from a raster. */
export function fieldAt(field: Field, p: number): number {
  return typeof field === 'number' ? field : field[p]!;
}

/** Equal numbers or equal arrays, NaN equal to NaN (nodata stays nodata). */
export function fieldsEqual(a: ArrayLike<number> | number, b: ArrayLike<number> | number): boolean {
  if (a === b) return true;
  if (typeof a === 'number' || typeof b === 'number') return false;
  if (a.length !== b.length) return false;
  for (let p = 0; p < a.length; p++) {
    const x = a[p]!;
    const y = b[p]!;
    if (x !== y && !(x !== x && y !== y)) return false;
  }
  return true;
}
