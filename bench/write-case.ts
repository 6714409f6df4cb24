/** Writes the benchmark case as GeoTIFF + scenario JSON so the same case can be solved through the CLI. */
export async function writeCase(size: number, dir: string): Promise<void> {
  throw new Error(`--write-case is not available yet (size ${size}, ${dir})`);
}
