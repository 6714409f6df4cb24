/**
 * Ensemble statistics that do not depend on how the realisations were split (workers, shards): every statistic is
 * computed from the per-realisation values themselves, kept as Float32 per cell (the precision of the result
 * rasters) and taken in realisation order. A shard folder stores those values, so a merge of shards sees exactly
 * the numbers a one-machine run sees and gives identical files. Percentiles are therefore exact (no sketch):
 * the per-cell values are sorted and interpolated linearly between order statistics, definition 7 of Hyndman &
 * Fan 1996 ("Sample quantiles in statistical packages", Am. Stat. 50(4)), the default of R and NumPy.
 * Per cell, so a caller may give a block of rows of every realisation at a time (files.ts does: the merge reads
 * shard files block by block) and get the same numbers as for the whole grid.
 *
 * The standard deviation is the sample one (divisor n − 1), by two passes (mean, then squared deviations), which
 * avoids the cancellation of sum-of-squares formulas. Exceedance: the fraction of values strictly above T.
 */

/** A quantile of sorted values (ascending, no NaN), p in [0, 100], Hyndman & Fan definition 7. */
export function quantileSorted(sorted: ArrayLike<number>, p: number): number {
  const n = sorted.length;
  if (n === 0) return NaN;
  const h = ((n - 1) * p) / 100;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, n - 1);
  const a = sorted[lo]!;
  const b = sorted[hi]!;
  return a + (h - lo) * (b - a);
}

export interface CellStatistics {
  /** Realisations with a value at the cell (converged and active). */
  count: Int32Array;
  mean: Float64Array;
  /** Sample standard deviation; NaN with fewer than two values. */
  sd: Float64Array;
  /** One field per requested percentile. */
  percentiles: Float64Array[];
  /** One field per threshold: fraction of values > T. */
  exceedance: Float64Array[];
}

/**
 * Per-cell statistics of a stack of fields (one per realisation, in realisation order; `null` for a realisation
 * that is left out, e.g. not converged). NaN values (inactive cells) are skipped; a cell with no value gets NaN.
 */
export function cellStatistics(
  stack: ReadonlyArray<Float32Array | null>,
  cells: number,
  percentiles: readonly number[],
  thresholds: readonly number[],
): CellStatistics {
  const fields = stack.filter((f): f is Float32Array => f !== null);
  const count = new Int32Array(cells);
  const mean = new Float64Array(cells);
  const sd = new Float64Array(cells);
  const pct = percentiles.map(() => new Float64Array(cells));
  const exc = thresholds.map(() => new Float64Array(cells));
  const values = new Float64Array(fields.length);
  for (let p = 0; p < cells; p++) {
    let n = 0;
    let sum = 0;
    for (let r = 0; r < fields.length; r++) {
      const v = fields[r]![p]!;
      if (v === v) {
        values[n++] = v;
        sum += v;
      }
    }
    count[p] = n;
    if (n === 0) {
      mean[p] = NaN;
      sd[p] = NaN;
      for (const f of pct) f[p] = NaN;
      for (const f of exc) f[p] = NaN;
      continue;
    }
    const m = sum / n;
    mean[p] = m;
    let ss = 0;
    for (let k = 0; k < n; k++) ss += (values[k]! - m) ** 2;
    sd[p] = n > 1 ? Math.sqrt(ss / (n - 1)) : NaN;
    for (let t = 0; t < thresholds.length; t++) {
      let above = 0;
      for (let k = 0; k < n; k++) if (values[k]! > thresholds[t]!) above++;
      exc[t]![p] = above / n;
    }
    if (percentiles.length) {
      const sorted = values.subarray(0, n).sort();
      for (let q = 0; q < percentiles.length; q++) pct[q]![p] = quantileSorted(sorted, percentiles[q]!);
    }
  }
  return { count, mean, sd, percentiles: pct, exceedance: exc };
}

export interface PointStatistics {
  count: number;
  mean: number | null;
  sd: number | null;
  /** By percentile, as requested. */
  percentiles: Array<number | null>;
  /** By threshold: fraction of values > T. */
  exceedance: Array<number | null>;
}

/** Statistics of one point's values over the realisations (nulls left out). */
export function pointStatistics(
  values: ReadonlyArray<number | null>,
  percentiles: readonly number[],
  thresholds: readonly number[],
): PointStatistics {
  const v = Float64Array.from(values.filter((x): x is number => x !== null && Number.isFinite(x)));
  const n = v.length;
  if (n === 0) return { count: 0, mean: null, sd: null, percentiles: percentiles.map(() => null), exceedance: thresholds.map(() => null) };
  let sum = 0;
  for (const x of v) sum += x;
  const mean = sum / n;
  let ss = 0;
  for (const x of v) ss += (x - mean) ** 2;
  v.sort();
  return {
    count: n,
    mean,
    sd: n > 1 ? Math.sqrt(ss / (n - 1)) : null,
    percentiles: percentiles.map((p) => quantileSorted(v, p)),
    exceedance: thresholds.map((t) => v.filter((x) => x > t).length / n),
  };
}
