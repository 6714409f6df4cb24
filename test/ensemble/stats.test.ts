/**
 * Per-cell ensemble statistics against NumPy (a general-purpose reference library): mean, sample standard
 * deviation (ddof = 1) and percentiles with NumPy's default "linear" method, which is Hyndman & Fan's definition 7.
 * Skips with a message where python3 with NumPy is absent (outside CI).
 */
import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { cellStatistics, quantileSorted } from '../../src/ensemble/stats.js';
import { seededRandom } from '../helpers/model.js';

const numpy = spawnSync('python3', ['-c', 'import numpy'], { encoding: 'utf8' }).status === 0;

describe('ensemble statistics', () => {
  it('a worked case: the median of 1..4 is 2.5 and the 25th percentile 1.75 (Hyndman & Fan 1996, definition 7)', () => {
    expect(quantileSorted([1, 2, 3, 4], 50)).toBe(2.5);
    expect(quantileSorted([1, 2, 3, 4], 25)).toBe(1.75);
  });

  it.skipIf(!numpy && process.env.CI !== 'true')("mean, sd and percentiles per cell equal NumPy's", () => {
    const random = seededRandom(9);
    const cells = 7;
    const stack = Array.from({ length: 13 }, () => Float32Array.from({ length: cells }, () => 10 * random() - 3));
    stack[4]![2] = NaN; // an absent value is skipped
    const percentiles = [5, 37.5, 50, 95];
    const s = cellStatistics([...stack, null], cells, percentiles, [0, 4]);
    const data = JSON.stringify(Array.from({ length: cells }, (_, p) => stack.map((f) => f[p]!).filter((v) => !Number.isNaN(v))));
    const script = `import json,sys,numpy as np
cols=json.loads(sys.stdin.read())
print(json.dumps([[float(np.mean(c)),float(np.std(c,ddof=1))]+[float(np.percentile(c,q)) for q in ${JSON.stringify(percentiles)}]+[float(np.mean(np.array(c)>t)) for t in (0,4)] for c in cols]))`;
    const r = spawnSync('python3', ['-c', script], { input: data, encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    const ref = JSON.parse(r.stdout) as number[][];
    for (let p = 0; p < cells; p++) {
      const [mean, sd, ...rest] = ref[p]!;
      expect(s.mean[p]).toBeCloseTo(mean!, 12);
      expect(s.sd[p]).toBeCloseTo(sd!, 12);
      percentiles.forEach((_, k) => expect(s.percentiles[k]![p]).toBeCloseTo(rest[k]!, 12));
      expect(s.exceedance[0]![p]).toBe(rest[percentiles.length]);
      expect(s.exceedance[1]![p]).toBe(rest[percentiles.length + 1]);
    }
    expect(s.count[2]).toBe(12);
  });
});
