/**
 * A small seeded generator for synthetic fields (demo data, benchmark cases, test grids): the same seed gives the
 * same numbers on every machine, so generated files and benchmark cases are reproducible.
 * mulberry32, a public-domain generator (attributed to Tommy Ettinger; from memory), uniform in [0, 1).
 */
export function seededUniform(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}
