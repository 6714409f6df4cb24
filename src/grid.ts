/**
 * The raster grid every input of a scenario shares: size, georeferencing and CRS.
 * Cells are indexed row-major, `index = row * nx + col`, row 0 at the top as stored in the GeoTIFF.
 */
export interface Crs {
  /** EPSG code when the file names one (projected or geographic), else null (user-defined CRS). */
  epsg: number | null;
  /** True for a geographic (lon/lat) CRS. */
  geographic: boolean;
  /** The GeoKeys as read, copied unchanged into rasters we write so that user-defined CRSs survive. */
  geoKeys: Record<string, number | string | number[]>;
  /** Linear unit name when known (e.g. "metre"), for warnings. */
  linearUnit?: string;
}

export interface Grid {
  nx: number;
  ny: number;
  /**
   * GDAL-style affine geotransform without rotation: [originX, pixelWidth, 0, originY, 0, pixelHeight],
   * origin at the outer corner of cell (0,0) (PixelIsArea convention). pixelHeight is negative for north-up.
   */
  transform: readonly [number, number, number, number, number, number];
  crs: Crs | null;
}

export function cellWidth(grid: Grid): number {
  return Math.abs(grid.transform[1]);
}

export function cellHeight(grid: Grid): number {
  return Math.abs(grid.transform[5]);
}

export function cellCount(grid: Grid): number {
  return grid.nx * grid.ny;
}

/** Map coordinates of a cell centre. */
export function cellCentre(grid: Grid, row: number, col: number): { x: number; y: number } {
  const t = grid.transform;
  return { x: t[0] + (col + 0.5) * t[1], y: t[3] + (row + 0.5) * t[5] };
}

/** Cell containing a map point, or null when the point lies outside the grid. Points on a shared edge go to the cell to the east/south. */
export function cellAt(grid: Grid, x: number, y: number): { row: number; col: number } | null {
  const t = grid.transform;
  const col = Math.floor((x - t[0]) / t[1]);
  const row = Math.floor((y - t[3]) / t[5]);
  if (!Number.isFinite(col) || !Number.isFinite(row)) return null;
  if (col < 0 || col >= grid.nx || row < 0 || row >= grid.ny) return null;
  return { row, col };
}

/** Bounding box of the grid in map coordinates. */
export function gridBounds(grid: Grid): { minX: number; minY: number; maxX: number; maxY: number } {
  const t = grid.transform;
  const x1 = t[0] + grid.nx * t[1];
  const y1 = t[3] + grid.ny * t[5];
  return { minX: Math.min(t[0], x1), maxX: Math.max(t[0], x1), minY: Math.min(t[3], y1), maxY: Math.max(t[3], y1) };
}

export function crsLabel(crs: Crs | null): string {
  if (!crs) return 'unknown';
  return crs.epsg !== null ? `EPSG:${crs.epsg}` : 'user-defined';
}

/** Describe how two grids differ, or return null when they are the same grid. */
export function gridDifference(a: Grid, b: Grid): string | null {
  const parts: string[] = [];
  if (a.nx !== b.nx || a.ny !== b.ny) parts.push(`size ${a.nx}x${a.ny} vs ${b.nx}x${b.ny}`);
  const tol = 1e-9 * Math.max(Math.abs(a.transform[1]), Math.abs(a.transform[5]), 1);
  const same = a.transform.every((v, i) => Math.abs(v - b.transform[i]!) <= (i === 0 || i === 3 ? Math.max(tol, 1e-9 * Math.abs(v)) : tol));
  if (!same) parts.push(`geotransform [${a.transform.join(', ')}] vs [${b.transform.join(', ')}]`);
  if (crsLabel(a.crs) !== crsLabel(b.crs)) parts.push(`CRS ${crsLabel(a.crs)} vs ${crsLabel(b.crs)}`);
  return parts.length ? parts.join('; ') : null;
}
