/** Result files whose bytes may still be on their way (a raster being encoded elsewhere), and the raster encoders. */
import type { Grid } from '../grid.js';
import type { EncodeOptions } from '../raster/write.js';

/**
 * Encodes a raster product: `encodeFloat32GeoTiff` (bytes at once), `encodeFloat32GeoTiffAsync` (the tiles
 * compressed on the thread pool) or a write pool's `geotiff` (./writePool.ts); the same bytes from each.
 */
export type RasterEncoder<B extends Uint8Array | Promise<Uint8Array>> = (grid: Grid, values: Float64Array, options: EncodeOptions) => B;

/** A result file whose bytes may still be on their way (a raster being compressed); settled before writing. */
export interface PendingFile<B extends Uint8Array | Promise<Uint8Array>> {
  name: string;
  bytes: string | Uint8Array | B;
}

/** A result file whose bytes may be any of text, bytes, or either on its way (built in a worker thread). */
export interface LaterFile {
  name: string;
  bytes: string | Uint8Array | Promise<string | Uint8Array>;
}

/**
 * The files with their bytes, once every one is complete; else the failure of the first file (in their order) that
 * failed, as the one-after-another writer would have met it first. `also` are waited for in the same way, after the
 * files, so that no failure is left unobserved. Waits for every file either way.
 */
export async function settleFiles(
  files: LaterFile[],
  also: Array<Promise<unknown>> = [],
): Promise<Array<{ name: string; bytes: string | Uint8Array }>> {
  const settled = await Promise.allSettled([...files.map((f) => f.bytes), ...also]);
  for (const s of settled) if (s.status === 'rejected') throw s.reason;
  return files.map((f, i) => ({ name: f.name, bytes: (settled[i] as PromiseFulfilledResult<string | Uint8Array>).value }));
}

/** `p`, marked as observed: a failure nobody ends up waiting for (the write failed elsewhere first) is not an unhandled rejection. */
export function observed<T>(p: Promise<T>): Promise<T> {
  p.catch(() => undefined);
  return p;
}
